"""Thick incoherent layers: intensity sums of multiply reflected beams.

A stack with thick layers (a 0.5-1 mm glass or silicon substrate) is split at
every incoherent medium into coherent blocks; each block has amplitude
coefficients from above and from below (coherent.py).  Between blocks the light
adds in intensity: the phase across a thick slab varies by many periods over
the spectral bandwidth and the illuminated spot, so the beams of different
round-trip orders do not interfere (Katsidis and Siapkas, Appl. Opt. 41, 3978
(2002); Centurioni, Appl. Opt. 44, 7532 (2005); Byrnes, arXiv:1603.02720,
the method of the ``tmm`` package's ``inc_tmm``).

The sum is carried out bottom-up as a recursion, which is numerically safe for
opaque slabs (no growing intensity-transfer matrices):

    R_k = R_f + G P^2 R_(k+1) / (1 - R_b P^2 R_(k+1))
    T_k = T_f P T_(k+1)     / (1 - R_b P^2 R_(k+1))

with R_f, T_f, R_b of block k seen from above and below, G = |t_f t_b|^2 the
round-trip transmission product and P = exp(-2 Im(delta)) the single-pass
intensity transmission of the slab.

For ellipsometry the same recursion runs in a third, complex "cross" channel,
r_s conj(r_p): s and p light take the same paths and see the same slab phase,
which cancels in r_s conj(r_p) (e^{i delta} conj(e^{i delta}) = P), so every
beam adds its own Mueller matrix.  The incoherent sum of Mueller matrices of
an isotropic sample is fixed by (R_s, R_p, X = sum r_s conj(r_p)); with more
than one beam it is depolarizing (|X| < sqrt(R_s R_p)), which shows as a
degree of polarization below 1.
"""
from __future__ import annotations

import numpy as np


class Channels:
    """Reflection sums R_s, R_p (real), X (complex cross term) and transmission sums.

    ``ts2``/``tp2`` are sums of |t|^2 over paths *without* the power factors;
    the factors telescope, so the transmittance is ts2 Re(eta_exit) / Re(eta_ambient)
    (applied once by the caller; per-block factors would give inf * 0 behind
    a slab that carries only an evanescent wave).
    """

    __slots__ = ("rs2", "rp2", "cross", "ts2", "tp2")

    def __init__(self, rs2, rp2, cross, ts2, tp2):
        self.rs2, self.rp2, self.cross, self.ts2, self.tp2 = rs2, rp2, cross, ts2, tp2


def _abs2(z):
    return z.real * z.real + z.imag * z.imag


def single_block(block_s, block_p, transmission=True):
    """Channels of a purely coherent stack (one block, no incoherent layer).

    Without `transmission` the ts2/tp2 sums are None (the blocks' t may be too).
    """
    if not transmission:
        return Channels(_abs2(block_s.r), _abs2(block_p.r), block_s.r * np.conj(block_p.r), None, None)
    return Channels(_abs2(block_s.r), _abs2(block_p.r), block_s.r * np.conj(block_p.r),
                    _abs2(block_s.t), _abs2(block_p.t))


def combine(blocks_s, blocks_p, slab_passes, transmission=True):
    """Incoherent sum over blocks 0..m-1 separated by thick media.

    blocks_s, blocks_p: BlockCoefficients of each block, top to bottom (all but
    the last with r_back/t_back); slab_passes[k]: single-pass intensity
    transmission P of the thick medium between block k and block k+1.
    Without `transmission` the transmission sums are not formed (None), and
    the last block's t is not read.
    """
    below = single_block(blocks_s[-1], blocks_p[-1], transmission)
    for k in range(len(blocks_s) - 2, -1, -1):
        below = _add_block_on_top(blocks_s[k], blocks_p[k], slab_passes[k], below)
    return below


def _add_block_on_top(bs, bp, single_pass, below):
    p2 = single_pass * single_pass
    rs2_back, rp2_back = _abs2(bs.r_back), _abs2(bp.r_back)
    cross_back = bs.r_back * np.conj(bp.r_back)
    trip_s = bs.t * bs.t_back
    trip_p = bp.t * bp.t_back
    denom_s = 1.0 - rs2_back * p2 * below.rs2
    denom_p = 1.0 - rp2_back * p2 * below.rp2
    denom_x = 1.0 - cross_back * p2 * below.cross
    rs2 = _abs2(bs.r) + _abs2(trip_s) * p2 * below.rs2 / denom_s
    rp2 = _abs2(bp.r) + _abs2(trip_p) * p2 * below.rp2 / denom_p
    cross = bs.r * np.conj(bp.r) + trip_s * np.conj(trip_p) * p2 * below.cross / denom_x
    if below.ts2 is None:  # transmission not asked for
        return Channels(rs2, rp2, cross, None, None)
    ts2 = _abs2(bs.t) * single_pass * below.ts2 / denom_s
    tp2 = _abs2(bp.t) * single_pass * below.tp2 / denom_p
    return Channels(rs2, rp2, cross, ts2, tp2)


def combine_normal(blocks_s, slab_passes, transmission=True):
    """`combine` at normal incidence, from the s blocks alone.

    There s and p are the same wave (r_p = -r_s for every path, and
    |t_p t_p'| = |t_s t_s'| since the H/E field factors cancel over a round
    trip), so R_p = R_s, X = -R_s and the transmission sums are equal; the
    recursion for s is the one `combine` runs, giving identical numbers.
    Without `transmission` the transmission sums are None.
    """
    if not transmission:
        rs2 = _abs2(blocks_s[-1].r)
        for k in range(len(blocks_s) - 2, -1, -1):
            bs, single_pass = blocks_s[k], slab_passes[k]
            p2 = single_pass * single_pass
            denom = 1.0 - _abs2(bs.r_back) * p2 * rs2
            rs2 = _abs2(bs.r) + _abs2(bs.t * bs.t_back) * p2 * rs2 / denom
        return Channels(rs2, rs2, np.negative(rs2, dtype=complex), None, None)
    rs2, ts2 = _abs2(blocks_s[-1].r), _abs2(blocks_s[-1].t)
    for k in range(len(blocks_s) - 2, -1, -1):
        bs, single_pass = blocks_s[k], slab_passes[k]
        p2 = single_pass * single_pass
        denom = 1.0 - _abs2(bs.r_back) * p2 * rs2
        rs2, ts2 = (_abs2(bs.r) + _abs2(bs.t * bs.t_back) * p2 * rs2 / denom,
                    _abs2(bs.t) * single_pass * ts2 / denom)
    return Channels(rs2, rs2, np.negative(rs2, dtype=complex), ts2, ts2)


def single_pass_transmission(q, thickness_nm, k0_per_nm):
    """P = exp(-2 k0 d Im(q)): intensity left after one crossing of a thick layer."""
    return np.exp(-2.0 * k0_per_nm * thickness_nm * q.imag)
