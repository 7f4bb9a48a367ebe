"""Instrument effects: spectral bandwidth, angle-of-incidence spread, thickness
non-uniformity over the measurement spot.

Each effect is a Gaussian distribution of one input around its nominal value;
the measured signal is the intensity-weighted mean over it.  lamina averages
the photometric quantities (R_s, R_p, T_s, T_p) and the unnormalized Mueller
elements (equivalently R_s, R_p and X = sum r_s conj(r_p)) by Gauss-Hermite
quadrature, then derives N, C, S, P, Psi and Delta from the averages, so that a
loss of polarization shows as P < 1 instead of being folded into a wrong Psi or
Delta (Fujiwara, Spectroscopic Ellipsometry, Wiley 2007, on depolarization;
from memory; the quadrature rule is the standard Gauss-Hermite rule,
Abramowitz and Stegun 1964, ch. 25, for a normal distribution).

Settings (all off by default; a zero setting adds no quadrature node at all,
so an all-zero Instrument gives exactly the unaveraged result):

- ``bandwidth_nm``: full width at half maximum of a Gaussian spectral slit
  function (sigma = FWHM / (2 sqrt(2 ln 2))).
- ``angle_spread_deg``: standard deviation (sigma) of a Gaussian distribution
  of the angle of incidence, in the plane of incidence (a one-dimensional
  model of the beam's convergence).
- ``thickness_nonuniformity_pct``: standard deviation (sigma), in percent, of
  one relative scale factor applied to the thickness of every coherent layer
  over the spot (thick incoherent slabs are not scaled).
- ``nodes``: quadrature nodes per active effect (odd, so that the nominal
  point is a node; the reported amplitudes rs, rp, ts, tp are those of the
  nominal point).
"""
from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import LaminaInputError
from .solver import RawResponse, finish, prepare_inputs, raw_response, solve, NEAR_NORMAL_DEG

FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))


@dataclass(frozen=True)
class Instrument:
    """Instrument averaging settings; see the module docstring for units and meaning."""

    bandwidth_nm: float = 0.0
    angle_spread_deg: float = 0.0
    thickness_nonuniformity_pct: float = 0.0
    nodes: int = 5

    def __post_init__(self):
        for name in ("bandwidth_nm", "angle_spread_deg", "thickness_nonuniformity_pct"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, numbers.Real) or not math.isfinite(value) \
                    or value < 0:
                raise LaminaInputError(f"{name} = {value!r} is not a non-negative number", f"instrument.{name}",
                                       "a number >= 0 (0 switches the effect off)")
        if isinstance(self.nodes, bool) or not isinstance(self.nodes, numbers.Integral) or self.nodes < 3 \
                or self.nodes % 2 == 0 or self.nodes > 21:
            raise LaminaInputError(f"nodes = {self.nodes!r}", "instrument.nodes", "an odd integer from 3 to 21")

    @property
    def is_active(self) -> bool:
        return bool(self.bandwidth_nm or self.angle_spread_deg or self.thickness_nonuniformity_pct)

    def to_attrs(self) -> dict:
        """Settings as flat attributes (for xarray / NetCDF)."""
        return {"instrument_bandwidth_nm_fwhm": float(self.bandwidth_nm),
                "instrument_angle_spread_deg_sigma": float(self.angle_spread_deg),
                "instrument_thickness_nonuniformity_pct_sigma": float(self.thickness_nonuniformity_pct),
                "instrument_quadrature_nodes": int(self.nodes)}


def normal_nodes(count: int, sigma: float):
    """Gauss-Hermite nodes and weights (summing to 1) for a normal distribution N(0, sigma^2).

    One node at 0 with weight 1 when sigma == 0 (the effect is off).
    """
    if sigma == 0:
        return np.zeros(1), np.ones(1)
    x, w = np.polynomial.hermite_e.hermegauss(count)
    x[count // 2] = 0.0  # the symmetric rule's middle node, exactly
    return sigma * x, w / w.sum()


def averaged_solve(n_media_at: Callable, thickness_nm, coherent, wavelength_nm, angle_deg,
                   instrument: Instrument | None = None, *, pseudo_dielectric: bool = True) -> dict:
    """`solve` with instrument averaging.

    n_media_at(wavelength_nm) -> list of complex index arrays (ambient first),
    each (W',) or (*batch, W') for a 1-D array of W' wavelengths: the
    materials, re-evaluated at the wavelengths the spectral average samples.
    Returns the same dict as `solve`, shape (*batch, A, W).
    """
    wavelength = np.atleast_1d(np.asarray(wavelength_nm, dtype=float))
    if instrument is None or not instrument.is_active:
        return solve(n_media_at(wavelength), thickness_nm, coherent, wavelength, angle_deg,
                     pseudo_dielectric=pseudo_dielectric)

    d_wl, w_wl = normal_nodes(instrument.nodes, instrument.bandwidth_nm / FWHM_PER_SIGMA)
    d_ang, w_ang = normal_nodes(instrument.nodes, instrument.angle_spread_deg)
    d_scale, w_scale = normal_nodes(instrument.nodes, instrument.thickness_nonuniformity_pct / 100.0)

    # nominal inputs: checks shapes and values once
    n_nominal = n_media_at(wavelength)
    n_full, d_full, coherent, _, angle_rad, shape = prepare_inputs(
        n_nominal, thickness_nm, coherent, wavelength, angle_deg)
    batch_ndim = len(shape) - 2

    sampled_wl = (wavelength[None, :] + d_wl[:, None])  # (n_wl, W)
    if np.any(sampled_wl <= 0):
        raise LaminaInputError(f"bandwidth_nm = {instrument.bandwidth_nm:g} samples wavelengths <= 0 nm",
                               "instrument.bandwidth_nm", "a bandwidth much smaller than the shortest wavelength")
    n_sampled = n_full if d_wl.size == 1 else _indices_at(n_media_at, sampled_wl, batch_ndim)
    angles = np.abs(np.degrees(angle_rad[:, 0])[None, :] + d_ang[:, None])  # (n_ang, A); symmetric in theta
    if np.any(angles >= 90):
        raise LaminaInputError(f"angle_spread_deg = {instrument.angle_spread_deg:g} reaches grazing incidence",
                               "instrument.angle_spread_deg", "nominal angle + 3 sigma below 90 degrees")
    scales = np.maximum(1.0 + d_scale, 0.0)

    # One pass per (wavelength node, angle node); the thickness-scale nodes form
    # a leading axis: arrays (n_scale, *batch, A, W).  Looping over the node
    # pairs bounds the memory when several effects are on (nodes^3 evaluations).
    pad = (1,) * batch_ndim
    scale_nodes = scales.reshape((d_scale.size,) + pad + (1, 1))
    d_nodes = [d * scale_nodes if c else d for d, c in zip(d_full, coherent)]
    scale_weights = w_scale.reshape((d_scale.size,) + (1,) * len(shape))
    centre = (d_wl.size // 2, d_ang.size // 2, d_scale.size // 2)
    mean = None
    for i_wl in range(d_wl.size):
        n_nodes = n_full if d_wl.size == 1 else [n[i_wl] for n in n_sampled]
        k0 = 2.0 * np.pi / sampled_wl[i_wl]
        for i_ang in range(d_ang.size):
            theta = np.radians(angles[i_ang])[:, None]
            raw = raw_response(n_nodes, d_nodes, coherent, k0, np.sin(theta), np.cos(theta))
            weight = w_wl[i_wl] * w_ang[i_ang]
            mean = _accumulate(mean, raw, weight * scale_weights, shape,
                               centre[2] if (i_wl, i_ang) == centre[:2] else None)
    out = finish(mean, np.sin(angle_rad), n_full[0], shape)
    normal = angle_rad[:, 0] < np.radians(NEAR_NORMAL_DEG)
    if pseudo_dielectric and np.any(normal):
        # <eps> holds no information at normal incidence; report the theta -> 0
        # limit of the nominal configuration (an average over +-theta of the
        # near-normal Mueller elements would only amplify round-off).
        near = solve(n_nominal, thickness_nm, coherent, wavelength, NEAR_NORMAL_DEG)
        out["eps_pseudo"][..., normal, :] = near["eps_pseudo"]
    return out


def _indices_at(n_media_at, sampled_wl, batch_ndim):
    """Indices at the sampled wavelengths as (n_wl, *batch, 1, W)."""
    n_wl, width = sampled_wl.shape
    try:
        n_flat = n_media_at(sampled_wl.reshape(-1))
    except LaminaInputError as err:
        reach = np.abs(sampled_wl[0] - sampled_wl[n_wl // 2]).max()
        raise LaminaInputError(f"{err.problem} (the spectral bandwidth average samples up to {reach:.3g} nm "
                               "beyond each wavelength)", err.where, err.expected) from None
    out = []
    for n in n_flat:
        n = np.asarray(n, dtype=complex)
        if n.ndim == 0:
            n = np.full(n_wl * width, n)
        own_batch = n.shape[:-1]
        n = n.reshape(own_batch + (n_wl, width))
        n = np.moveaxis(n, -2, 0)  # (n_wl, *own_batch, W)
        pad = (1,) * (batch_ndim - len(own_batch))
        out.append(n.reshape((n_wl,) + pad + own_batch + (1, width)))
    return out


def _accumulate(mean: RawResponse | None, raw: RawResponse, weights, shape, centre) -> RawResponse:
    """Add the weighted scale-node sum of `raw` to `mean`; keep amplitudes of the nominal node."""
    full = weights.shape[:1] + shape

    def weighted(values):
        return np.sum(np.broadcast_to(values, full) * weights, axis=0)

    part = {key: weighted(getattr(raw, key)) for key in ("rs2", "rp2", "cross", "Ts", "Tp")}
    if mean is None:
        mean = RawResponse(rs=None, rp=None, ts=None, tp=None, **part)
    else:
        for key, value in part.items():
            setattr(mean, key, getattr(mean, key) + value)
    if centre is not None:
        for key in ("rs", "rp", "ts", "tp"):
            setattr(mean, key, np.broadcast_to(getattr(raw, key), full)[centre])
    return mean
