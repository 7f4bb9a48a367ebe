"""The forward solver: `solve(n_media, thickness_nm, coherent, wavelength_nm, angle_deg)`.

Inputs are what `Stack.optical_inputs` produces: complex indices of every
medium (ambient first, exit last), each (W,) or (*batch, W); one thickness
(nm; float or (*batch,)) and one coherence flag per inner medium.  Outputs are
arrays of shape (*batch, A, W), keyed

    rs rp ts tp   amplitude coefficients (tp: ratio of the full electric fields)
    Rs Rp Ts Tp   reflectances and transmittances per polarization
    R T A         unpolarized averages and absorptance A = 1 - R - T
    psi delta     ellipsometric angles, degrees (delta in [0, 360))
    N C S P       normalized Mueller elements and degree of polarization
    eps_pseudo    pseudo-dielectric function <eps> (complex)

With an incoherent layer the amplitudes are those of the coherent part in
front of the first thick layer (the front-surface reflection), not of the
whole sample, whose reflected light is a sum of intensities; all the other
quantities are of the whole sample.

Fast paths, chosen automatically and equal to the general computation to
round-off (tests/optics/test_fast_paths.py): when every angle is 0 only s is
computed (p is the same wave there); a coherent block whose layers are all
lossless with a propagating wave (real N, real q) is multiplied out in real
arithmetic; ``quantities=`` skips outputs nobody asked for.
"""
from __future__ import annotations

import numpy as np

from ..errors import LaminaInputError
from .coherent import (LosslessProduct, block_both_ways, block_forward, layer_matrices, lossless_block_both_ways,
                       lossless_block_forward, lossless_layer_matrices, normal_component)
from .ellipsometry import mueller_from_sums, pseudo_dielectric, psi_delta_from_mueller, psi_delta_from_sums
from .incoherent import combine, combine_normal, single_pass_transmission

#: the keys of the dict `solve` returns
KEYS = ("rs", "rp", "ts", "tp", "Rs", "Rp", "Ts", "Tp", "R", "T", "A",
        "psi", "delta", "N", "C", "S", "P", "eps_pseudo")

#: <eps> at angles below this (deg) is evaluated at this angle: at normal
#: incidence it is 0 * inf, and closer to it rho + 1 ~ theta^2 drowns in
#: round-off; the relative error of the substitute is of order theta^2 ~ 3e-8.
NEAR_NORMAL_DEG = 0.01

_WHERE = "optics.solve"


class RawResponse:
    """Sums the ellipsometric and photometric quantities are built from."""

    __slots__ = ("rs", "rp", "ts", "tp", "rs2", "rp2", "cross", "Ts", "Tp")

    def __init__(self, **kw):
        for key, value in kw.items():
            setattr(self, key, value)


def solve(n_media, thickness_nm, coherent, wavelength_nm, angle_deg, *, pseudo_dielectric: bool = True,
          quantities=None, fast_paths: bool = True):
    """Reflection, transmission and ellipsometric response of a layer stack.

    See the module docstring for inputs and outputs.  Scalars for wavelength
    or angle count as length-1 arrays.  With ``pseudo_dielectric=False`` the
    extra near-normal evaluation for <eps> at angles below NEAR_NORMAL_DEG is
    skipped (<eps> there is then NaN or round-off); fitters that do not use
    <eps> may set it.  ``quantities`` (a subset of KEYS) limits the returned
    dict to those keys and skips the work only the others need (e.g. Mueller
    elements, Psi/Delta and <eps> when only R and T are wanted).
    ``fast_paths=False`` forces the general complex computation (for tests).
    """
    wanted = _wanted(quantities)
    prepared = prepare_inputs(n_media, thickness_nm, coherent, wavelength_nm, angle_deg)
    n_full, d_full, coherent, k0, angle_rad, shape = prepared
    transmission = bool(_TRANSMISSION & set(wanted))
    raw = raw_response(n_full, d_full, coherent, k0, np.sin(angle_rad), np.cos(angle_rad), fast_paths=fast_paths,
                       transmission=transmission)
    out = finish(raw, np.sin(angle_rad), n_full[0], shape, wanted)
    normal = angle_rad[:, 0] < np.radians(NEAR_NORMAL_DEG)
    if pseudo_dielectric and "eps_pseudo" in wanted and np.any(normal):
        near = np.full((int(normal.sum()), 1), np.radians(NEAR_NORMAL_DEG))
        raw_near = raw_response(n_full, d_full, coherent, k0, np.sin(near), np.cos(near), fast_paths=fast_paths,
                                transmission=False)
        near_shape = shape[:-2] + (near.shape[0], shape[-1])
        out["eps_pseudo"][..., normal, :] = finish(raw_near, np.sin(near), n_full[0], near_shape,
                                                   ("eps_pseudo",))["eps_pseudo"]
    return out


def _wanted(quantities) -> tuple:
    """The requested output keys, in KEYS order; all of them for None."""
    if quantities is None:
        return KEYS
    if isinstance(quantities, str):
        quantities = (quantities,)
    unknown = [key for key in quantities if key not in KEYS]
    if unknown:
        raise LaminaInputError(f"unknown quantities {unknown}", _WHERE, "keys among " + " ".join(KEYS))
    return tuple(key for key in KEYS if key in quantities)


def prepare_inputs(n_media, thickness_nm, coherent, wavelength_nm, angle_deg):
    """Check the inputs and give them broadcastable shapes (*batch, A, W).

    Returns (n_full, d_full, coherent, k0, angle_rad, shape): indices as
    (*batch, 1, W) (complex, or float where given real), thicknesses as
    (*batch, 1, 1), k0 = 2 pi / lambda as (W,), angles (radians) as (A, 1),
    and the full output shape.
    """
    wavelength = _as_1d(wavelength_nm, "wavelength_nm")
    angle = _as_1d(angle_deg, "angle_deg")
    # min/max instead of elementwise masks (cheaper); a NaN makes min() NaN and fails the check
    if not (wavelength.min(initial=np.inf) > 0 and wavelength.max(initial=1.0) < np.inf):
        raise LaminaInputError("wavelength_nm holds a value that is not a positive number", _WHERE,
                               "wavelengths > 0 nm")
    if not (angle.min(initial=0.0) >= 0 and angle.max(initial=0.0) < 90):
        raise LaminaInputError("angle_deg holds a value outside [0, 90)", _WHERE, "0 <= angle < 90 degrees")
    n_media = list(n_media)
    inner = len(n_media) - 2
    if inner < 0:
        raise LaminaInputError(f"{len(n_media)} media given", _WHERE, "at least an ambient and an exit medium")
    thickness_nm, coherent = list(thickness_nm), [bool(c) for c in coherent]
    if len(thickness_nm) != inner or len(coherent) != inner:
        raise LaminaInputError(
            f"{len(n_media)} media but {len(thickness_nm)} thicknesses and {len(coherent)} coherence flags",
            _WHERE, f"{inner} thicknesses and flags (one per inner medium)")
    width = wavelength.size
    indices, batch_shapes = [], []
    for pos, n in enumerate(n_media):
        n = np.asarray(n)
        # a real index array stays real (half the memory, and no scan of its imaginary part)
        n = n.astype(float if n.dtype.kind in "biuf" else complex, copy=False)
        if n.ndim == 0:
            n = np.full(width, n)
        if n.shape[-1] not in (width, 1):
            raise LaminaInputError(f"medium {pos} has {n.shape[-1]} index values for {width} wavelengths",
                                   _WHERE, "one index per wavelength")
        batch_shapes.append(n.shape[:-1])
        indices.append(n)
    depths = []
    for pos, d in enumerate(thickness_nm):
        d = np.asarray(d, dtype=float)
        if not (d.min(initial=0.0) >= 0 and d.max(initial=0.0) < np.inf):
            raise LaminaInputError(f"thickness of inner medium {pos + 1} is negative or not a number",
                                   _WHERE, "thickness_nm >= 0")
        batch_shapes.append(d.shape)
        depths.append(d)
    try:
        batch = np.broadcast_shapes(*batch_shapes)
    except ValueError:
        raise LaminaInputError(f"batch shapes {batch_shapes} do not match", _WHERE,
                               "the same leading batch shape for every array") from None
    n_full = [n.reshape(n.shape[:-1] + (1, n.shape[-1])) for n in indices]
    d_full = [d.reshape(d.shape + (1, 1)) for d in depths]
    k0 = 2.0 * np.pi / wavelength
    angle_rad = np.radians(angle)[:, None]
    return n_full, d_full, coherent, k0, angle_rad, tuple(batch) + (angle.size, width)


def _as_1d(values, name):
    arr = np.asarray(values, dtype=float)
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1:
        raise LaminaInputError(f"{name} has shape {arr.shape}", _WHERE, f"a number or a 1-D array for {name}")
    return arr


def raw_response(n_full, d_full, coherent, k0, sin0, cos0, *, fast_paths: bool = True,
                 transmission: bool = True) -> RawResponse:
    """Amplitudes of the front part and the (R_s, R_p, X, T_s, T_p) sums.

    All arguments broadcast to the output shape; `coherent` has one flag per
    inner medium.  The tangential wave-vector is real, kx = Re(N_0) sin(theta_0)
    (for an absorbing ambient: an incident wave whose planes of constant
    amplitude are parallel to the surface, the convention of the ``tmm``
    package), so every medium below has a well-defined forward wave.
    With `fast_paths` (see the module docstring) the result is the same to round-off.
    Without `transmission` the transmission side (ts, tp, Ts, Tp; the last
    block's t) is not computed and is None: Psi/Delta and R need none of it.
    """
    n_ambient = n_full[0]
    kx = n_ambient.real * sin0
    kx2 = kx * kx
    kx2_bound = float(np.max(np.abs(n_ambient.real))) ** 2  # |kx| <= Re(N_0)
    normal_only = fast_paths and not np.any(sin0)  # s and p are one problem: compute s only
    boundaries = [0] + [j + 1 for j, c in enumerate(coherent) if not c] + [len(n_full) - 1]
    eps = {j: n_full[j] * n_full[j] + 0j for j in boundaries}  # + 0j: no -0.0 imaginary parts (normal_component)
    absorbing_ambient = bool(np.any(n_ambient.imag != 0))
    q = {j: normal_component(eps[j], kx2) for j in boundaries[1:]}
    q[0] = normal_component(eps[0], kx2) if absorbing_ambient else n_ambient * cos0
    zeta = {j: q[j] / eps[j] for j in boundaries}  # p admittance (tangential-H form) of thick media

    blocks_s, blocks_p, passes = [], [], []
    for top, bottom in zip(boundaries[:-1], boundaries[1:]):
        is_last = bottom == boundaries[-1]
        eta_s, eta_p = (q[top], q[bottom]), (zeta[top], zeta[bottom])
        block_s, block_p = _coherent_block(n_full, d_full, range(top + 1, bottom), eta_s, eta_p, is_last,
                                           k0, kx2, kx2_bound, normal_only, fast_paths,
                                           with_t=transmission or not is_last)
        blocks_s.append(block_s)
        blocks_p.append(block_p)
        if not is_last:
            passes.append(single_pass_transmission(q[bottom], d_full[bottom - 1], k0))

    rs, ts = blocks_s[0].r, blocks_s[0].t
    exit_s = q[boundaries[-1]].real / q[0].real
    if normal_only:
        sums = combine_normal(blocks_s, passes, transmission)
        ts_power = sums.ts2 * exit_s if transmission else None
        # r_p = -r_s, t_p = t_s exactly (see _impose_normal_incidence)
        return RawResponse(rs=rs, rp=-rs, ts=ts, tp=ts, rs2=sums.rs2, rp2=sums.rp2, cross=sums.cross,
                           Ts=ts_power, Tp=ts_power)
    sums = combine(blocks_s, blocks_p, passes, transmission)
    rp = blocks_p[0].r
    if transmission:
        front_bottom = boundaries[1]
        tp = blocks_p[0].t * (n_ambient / n_full[front_bottom])  # H-field ratio -> E-field ratio
        exit_p = zeta[boundaries[-1]].real / zeta[0].real
        raw = RawResponse(rs=rs, rp=rp, ts=ts, tp=tp, rs2=sums.rs2, rp2=sums.rp2, cross=sums.cross,
                          Ts=sums.ts2 * exit_s, Tp=sums.tp2 * exit_p)
    else:
        raw = RawResponse(rs=rs, rp=rp, ts=None, tp=None, rs2=sums.rs2, rp2=sums.rp2, cross=sums.cross,
                          Ts=None, Tp=None)
    normal = sin0 == 0
    if np.any(normal):
        _impose_normal_incidence(raw, normal)
    return raw


def _coherent_block(n_full, d_full, inner, eta_s, eta_p, is_last, k0, kx2, kx2_bound, normal_only, fast_paths,
                    with_t=True):
    """BlockCoefficients (s, p) of the coherent layers `inner` between two thick media.

    `eta_s`, `eta_p`: (top, bottom) admittances.  The p block is None when
    `normal_only`.  A block of lossless layers is multiplied out in real
    arithmetic, each layer folded into the product as soon as it is computed;
    otherwise its lossless layers still get their matrices from the real phase
    and the others from `layer_matrices`.
    """
    real_q = [_real_normal_component(n_full[j], kx2, normal_only) if fast_paths else None for j in inner]
    if real_q and all(real is not None for real in real_q):
        product_s, product_p = LosslessProduct(), LosslessProduct()
        for j, (q, eps) in zip(inner, real_q):
            cos_d, a_s, b_s, a_p, b_p = lossless_layer_matrices(q, eps, d_full[j - 1], k0, with_p=not normal_only)
            product_s.multiply(cos_d, a_s, b_s)
            if not normal_only:
                product_p.multiply(cos_d, a_p, b_p)
        if is_last:
            block_s = lossless_block_forward(*eta_s, product_s.elements, with_t)
            return block_s, None if normal_only else lossless_block_forward(*eta_p, product_p.elements, with_t)
        block_s = lossless_block_both_ways(*eta_s, product_s.elements)
        return block_s, None if normal_only else lossless_block_both_ways(*eta_p, product_p.elements)
    layers_s, layers_p = [], []
    for j, real in zip(inner, real_q):
        if real is not None:  # m12 = -i a, m21 = -i b (lossless_layer_matrices)
            cos_d, a_s, b_s, a_p, b_p = lossless_layer_matrices(*real, d_full[j - 1], k0, with_p=not normal_only)
            cos_d = cos_d.astype(complex)  # complex once, not at each product with complex elements
            m12_s, m21_s = -1j * a_s, -1j * b_s
            m12_p, m21_p = (None, None) if normal_only else (-1j * a_p, -1j * b_p)
        else:
            eps_j = n_full[j] * n_full[j] + 0j  # + 0j: see normal_component
            cos_d, m12_s, m21_s, m12_p, m21_p = layer_matrices(
                normal_component(eps_j, kx2), eps_j, d_full[j - 1], k0, kx2_bound, with_p=not normal_only)
        layers_s.append((cos_d, m12_s, m21_s))
        layers_p.append((cos_d, m12_p, m21_p))
    if is_last:
        return (block_forward(*eta_s, layers_s, with_t),
                None if normal_only else block_forward(*eta_p, layers_p, with_t))
    return block_both_ways(*eta_s, layers_s), None if normal_only else block_both_ways(*eta_p, layers_p)


def _real_normal_component(n, kx2, normal_only):
    """(q, eps) as real arrays for a lossless layer with a propagating wave, else None.

    Real N and eps - kx^2 > 0 make q = sqrt(eps - kx^2) real and positive (the
    principal root the general path takes), so the layer's phase is real.  The
    imaginary part is checked first: an absorbing layer costs one reduction.
    """
    if np.iscomplexobj(n) and np.any(n.imag):
        return None
    if normal_only:  # kx = 0: q = sqrt(n^2) = n for n > 0; eps serves only the p matrices, not computed
        q = np.ascontiguousarray(n.real)
        return (q, None) if q.min() > 0 else None
    n_real = np.ascontiguousarray(n.real)
    eps = n_real * n_real
    argument = eps - kx2
    if not argument.min() > 0:  # evanescent or grazing (q = 0) somewhere; NaN too
        return None
    return np.sqrt(argument), eps


def _impose_normal_incidence(raw: RawResponse, normal):
    """At normal incidence s and p are the same wave: r_p = -r_s, t_p = t_s exactly
    (so X = r_s conj(r_p) = -|r_s|^2).

    Imposed so that rounding (or a 0/0 for a perfect anti-reflection stack)
    cannot produce a spurious Delta; rho = -1 is also the limit theta -> 0.
    """
    raw.rp = np.where(normal, -raw.rs, raw.rp)
    raw.rp2 = np.where(normal, raw.rs2, raw.rp2)
    raw.cross = np.where(normal, -raw.rs2, raw.cross)
    if raw.Ts is not None:  # None: transmission not computed (raw_response)
        raw.tp = np.where(normal, raw.ts, raw.tp)
        raw.Tp = np.where(normal, raw.Ts, raw.Tp)


#: outputs that need the transmission side of the computation
_TRANSMISSION = frozenset(("ts", "tp", "Ts", "Tp", "T", "A"))

#: outputs built from the Mueller elements
_ELLIPSOMETRIC = frozenset(("psi", "delta", "N", "C", "S", "P", "eps_pseudo"))


def finish(raw: RawResponse, sin_theta, n_ambient, shape, quantities=KEYS) -> dict:
    """The requested output quantities (all by default), each broadcast to `shape`, from the raw sums."""
    wanted = set(quantities)
    values = {"rs": raw.rs, "rp": raw.rp, "ts": raw.ts, "tp": raw.tp,
              "Rs": raw.rs2, "Rp": raw.rp2, "Ts": raw.Ts, "Tp": raw.Tp}
    if wanted & {"R", "A"}:
        values["R"] = 0.5 * (raw.rs2 + raw.rp2)
    if wanted & {"T", "A"}:
        values["T"] = 0.5 * (raw.Ts + raw.Tp)
    if "A" in wanted:
        values["A"] = 1.0 - values["R"] - values["T"]
    ellipsometric = wanted & _ELLIPSOMETRIC
    angles_only = (ellipsometric and ellipsometric <= {"psi", "delta"}
                   and psi_delta_from_sums(raw.rs2, raw.rp2, raw.cross))
    if angles_only:  # a fitter's usual request: no Mueller normalisation, no P
        values["psi"], values["delta"] = angles_only
    elif ellipsometric:
        cos_2theta = 1.0 - 2.0 * sin_theta * sin_theta
        n_elem, c_elem, s_elem, polarization = mueller_from_sums(raw.rs2, raw.rp2, raw.cross, cos_2theta)
        values.update(N=n_elem, C=c_elem, S=s_elem, P=polarization)
        if wanted & {"psi", "delta"}:
            values["psi"], values["delta"] = psi_delta_from_mueller(n_elem, c_elem, s_elem)
        if "eps_pseudo" in wanted:
            # the two-phase inversion needs the ambient's (complex) sine: N_0 sin th_0 = kx
            sin_ambient = (sin_theta * (n_ambient.real / n_ambient) if np.any(n_ambient.imag != 0)
                           else sin_theta)
            values["eps_pseudo"] = pseudo_dielectric(n_elem, c_elem, s_elem, polarization, sin_ambient,
                                                     n_ambient * n_ambient)
    out, seen = {}, set()
    for key in KEYS:
        if key in wanted:
            value = _full(values[key], shape)
            if id(value) in seen:  # the normal-incidence path shares arrays between s and p
                value = value.copy()
            seen.add(id(value))
            out[key] = value
    return out


def _full(value, shape):
    value = np.asarray(value)
    if value.shape == shape:
        return value
    return np.array(np.broadcast_to(value, shape))
