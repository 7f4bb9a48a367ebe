"""Ellipsometric quantities: Psi, Delta, Mueller elements N, C, S, degree of
polarization P, pseudo-dielectric function <eps>.

Convention (DEVELOPERS.md): rho = tan(Psi) exp(i Delta), degrees, Delta
reported in [0, 360); a bare transparent substrate gives Delta = 180 below
Brewster's angle and 0 above, a bare absorbing substrate 0 < Delta < 180.

lamina's amplitude coefficients r_s, r_p are those of the ``tmm`` package's
``coh_tmm`` (time dependence exp(-i omega t), N = n + ik, r_p = -r_s at normal
incidence).  Ellipsometry practice measures the phase difference the other
way round (as for exp(+i omega t) fields), so in terms of these amplitudes

    tan(Psi) exp(i Delta) = conj(r_p / r_s) = r_s conj(r_p) / |r_s|^2,

which is what gives 0 < Delta < 180 for an absorbing substrate (N = 0.2 + 3.3i
at 70 deg: Psi = 43.46, Delta = 106.18).  ``tmm.ellips`` reports
angle(-r_p / r_s) in radians; `delta_from_tmm` converts: Delta = 180 - Delta_tmm.

Normalized Mueller elements of an isotropic sample (Fujiwara, Spectroscopic
Ellipsometry, Wiley 2007; section from memory):
N = cos 2Psi, C = sin 2Psi cos Delta, S = sin 2Psi sin Delta, and the degree of
polarization P = sqrt(N^2 + C^2 + S^2), 1 for a non-depolarizing sample.

Everything is derived from three sums over the (incoherently added) reflected
beams: R_s = sum |r_s|^2, R_p = sum |r_p|^2 and X = sum r_s conj(r_p):
N = (R_s - R_p) / (R_s + R_p), C + iS = 2 X / (R_s + R_p).  For one coherent
beam X / R_s = conj(r_p / r_s) = rho.  Psi and Delta come from the polarized part,
(N, C, S) / P, so depolarization lowers P instead of distorting Psi and Delta.
"""
from __future__ import annotations

import numpy as np


#: total reflectance (R_s + R_p) below which the reflected light counts as none:
#: amplitudes of 1e-12, far below any measurement, yet 1e4 times the round-off
#: (~1e-16) of the amplitudes of an index-matched interface.
DARK_REFLECTANCE = 1e-24


def wrap_delta_deg(delta_deg):
    """Delta folded into [0, 360); np.mod alone can return 360.0 for -1e-17."""
    wrapped = np.mod(delta_deg, 360.0)
    return np.where(wrapped >= 360.0, 0.0, wrapped)


def delta_from_tmm(delta_tmm_rad):
    """lamina's Delta (deg, [0, 360)) from the ``Delta`` that ``tmm.ellips`` returns.

    ``tmm.ellips`` gives Delta_tmm = angle(-r_p / r_s) in radians with the same r_p
    and r_s as ``tmm.coh_tmm``; lamina's Delta is angle(conj(r_p / r_s)) =
    -(Delta_tmm + 180 deg) = 180 deg - Delta_tmm (mod 360).
    """
    return wrap_delta_deg(180.0 - np.degrees(np.asarray(delta_tmm_rad, dtype=float)))


def delta_to_tmm(delta_deg):
    """Inverse of `delta_from_tmm`: Delta_tmm = 180 deg - Delta, in radians in (-pi, pi]."""
    return np.radians(180.0 - wrap_delta_deg(np.asarray(delta_deg, dtype=float)))


def mueller_from_sums(rs2, rp2, cross, cos_2theta):
    """Normalized N, C, S and P from R_s, R_p and X = sum r_s conj(r_p).

    Where nothing is reflected (R_s + R_p below `DARK_REFLECTANCE`, e.g. an
    index-matched ambient, where the ratio r_p / r_s is pure round-off), Psi and
    Delta are undefined; lamina uses the limit of an index-matched interface
    approached from either side, rho -> -cos 2theta (at normal incidence
    rho = -1: Psi = 45, Delta = 180), which also makes the pseudo-dielectric
    function equal to the ambient's.
    """
    total = rs2 + rp2
    dark = total < DARK_REFLECTANCE
    # 1 / total may be inf (total 0) or overflow (subnormal total); those points are dark, replaced below
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        inverse = 1.0 / total
        n_elem = (rs2 - rp2) * inverse
        twice = 2.0 * inverse
        c_elem = cross.real * twice
        s_elem = cross.imag * twice
    if np.any(dark):
        c2 = np.broadcast_to(cos_2theta, total.shape)
        n_elem = np.where(dark, (1.0 - c2 * c2) / (1.0 + c2 * c2), n_elem)
        c_elem = np.where(dark, -2.0 * c2 / (1.0 + c2 * c2), c_elem)
        s_elem = np.where(dark, 0.0, s_elem)
    polarization = np.minimum(np.sqrt(n_elem * n_elem + c_elem * c_elem + s_elem * s_elem), 1.0)
    return n_elem, c_elem, s_elem, polarization


def psi_delta_from_mueller(n_elem, c_elem, s_elem):
    """Psi in [0, 90] and Delta in [0, 360), degrees, from N, C, S (any common scale)."""
    psi = 0.5 * np.degrees(np.arctan2(np.hypot(c_elem, s_elem), n_elem))
    return psi, _wrap_half_turn(np.degrees(np.arctan2(s_elem, c_elem)))


def psi_delta_from_sums(rs2, rp2, cross):
    """Psi and Delta (degrees) straight from R_s, R_p and X, or None if any point is dark.

    N, C and S share the factor 1 / (R_s + R_p), which the arctangents ignore,
    so a caller that wants only Psi and Delta skips that scaling and P:
    Psi = atan2(2 |X|, R_s - R_p) / 2 and Delta = arg X, equal to
    `psi_delta_from_mueller(*mueller_from_sums(...)[:3])` to round-off.  Dark
    points (see `mueller_from_sums`) need the limit there: None sends the
    caller to that path (NaN sums too, which give NaN there as well).
    """
    if not (rs2 + rp2).min() >= DARK_REFLECTANCE:
        return None
    psi = np.arctan2(2.0 * np.abs(cross), rs2 - rp2)
    psi *= 90.0 / np.pi  # half the angle, in degrees
    return psi, _wrap_half_turn(np.angle(cross, deg=True))


def _wrap_half_turn(delta_deg):
    """`wrap_delta_deg` for angles in [-180, 180] (an arctangent's), in place and cheaper.

    np.mod is slow; for this range it is x + 360 for x < 0; adding 0.0 turns
    -0.0 into +0.0 as np.mod does, and x + 360 can round to 360 for tiny
    negative x, which wraps to 0.
    """
    delta_deg = np.asarray(delta_deg)
    delta_deg += np.where(delta_deg < 0.0, 360.0, 0.0)
    delta_deg[delta_deg >= 360.0] = 0.0
    return delta_deg


def pseudo_dielectric(n_elem, c_elem, s_elem, polarization, sin_theta, eps_ambient):
    """<eps> = eps_a sin^2 th [1 + tan^2 th ((1 - rho) / (1 + rho))^2].

    Azzam and Bashara, Ellipsometry and Polarized Light (1977); Fujiwara (2007)
    (two-phase model inverted for the substrate; sections from memory).  The
    formula is written for rho in the amplitudes' own phase convention,
    r_p / r_s = conj(tan Psi e^{i Delta}) = (C - iS) / (P + N) from the polarized
    part, so that eps2 >= 0 for an absorbing substrate.  Undefined at normal
    incidence (rho = -1, tan th = 0); the solver evaluates that limit at a small
    angle instead.
    """
    u = c_elem - 1j * s_elem
    v = polarization + n_elem
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = (v - u) / (v + u)
        sin2 = sin_theta * sin_theta
        tan2 = sin2 / (1.0 - sin2)
        return eps_ambient * sin2 * (1.0 + tan2 * ratio * ratio)
