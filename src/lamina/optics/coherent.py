"""Coherent thin layers: characteristic (transfer) matrices, vectorized.

Every array here broadcasts to the full evaluation shape (..., A, W): leading
batch axes, then angle, then wavelength.  Loops run over layers only.

Notation (time dependence exp(-i omega t), N = n + ik, k >= 0):

- ``kx``  tangential wave-vector component in units of k0 = 2 pi / lambda,
  kx = N_ambient sin(theta_ambient), the same in every medium (Snell's law).
- ``q``   normal component N cos(theta) = sqrt(N^2 - kx^2) in units of k0.
- ``eta`` optical admittance used in the characteristic matrix: q for s
  (fields E_y, H_x) and q / N^2 for p, where the p-matrix is written for the
  tangential *magnetic* field H_y (so that N^2 / q, singular at grazing
  incidence inside a layer, never appears).

Characteristic matrix of one layer of phase thickness delta = k0 q d
(Born and Wolf, Principles of Optics, on stratified media; Macleod, Thin-Film
Optical Filters, ch. 2 (chapters from memory); here in the exp(-i omega t)
convention):

    M = [[cos delta,            -i sin(delta) / eta],
         [-i eta sin(delta),     cos delta         ]]

With (B, C) = M_1 ... M_m (1, eta_exit) the stack's amplitude coefficients are
r = (eta_0 B - C) / (eta_0 B + C) and t = 2 eta_0 / (eta_0 B + C).  For p this
r is the ratio of the magnetic fields, which equals the reflection coefficient
of the electric field in the sign convention of the ``tmm`` package (Byrnes,
arXiv:1603.02720), r_p = (N_1 cos th_0 - N_0 cos th_1) / (N_1 cos th_0 + N_0 cos th_1)
for a single interface; that is the convention lamina reports.
"""
from __future__ import annotations

import numpy as np

#: Largest |Im(delta)| kept for a coherent layer.  exp(-2 * 35) ~ 4e-31 is the
#: single-pass intensity transmission at the cap, far below anything measurable;
#: capping keeps cos/sin finite for optically opaque layers (the ``tmm`` package
#: uses the same cap, so results agree with it exactly).
MAX_PHASE_IMAG = 35.0

def normal_component(eps, kx2):
    """q = N cos(theta) = sqrt(eps - kx^2) on the forward branch (eps = N^2, kx real).

    With a real tangential wave-vector kx, Im(eps - kx^2) = 2 n k >= 0, so the
    principal square root has Im(q) >= 0 (decaying into the medium) and
    Re(q) >= 0 (power flowing away from the interface) -- the physical branch
    (see the ``tmm`` package's ``is_forward_angle``).  A signed zero -0.0 in
    the imaginary part would put an evanescent (total internal reflection) wave
    on the growing branch; x - kx^2 is -0.0 only when x is, so the caller
    passes eps with its signed zeros cleared (eps + 0j, on the small (W,) array).
    """
    return np.sqrt(eps - kx2)


def layer_matrices(q, eps, thickness_nm, k0_per_nm, kx2_bound=np.inf, with_p=True):
    """Elements of one layer's characteristic matrices for s and p.

    Returns (cos_d, m12_s, m21_s, m12_p, m21_p): the diagonal element cos(delta)
    (the same for both polarizations) and the off-diagonal elements
    m12 = -i sin(delta) / eta, m21 = -i eta sin(delta) with eta = q (s) and
    eta = q / eps (p, tangential-H form).  With sin(delta) = (e^{i delta} -
    e^{-i delta}) / 2i these are m12_s = -(e^{i delta} - e^{-i delta}) / (2 q) and
    m21_s = -q (e^{i delta} - e^{-i delta}) / 2.  At q = 0 (grazing inside the
    layer) m12_s takes its limit -i k0 d; a zero-thickness layer gives the
    identity matrix exactly.  `kx2_bound`, an upper bound of |kx|^2, lets a
    cheap bound skip the search for phases beyond the cap.  Without `with_p`
    the p elements are None.
    """
    k0d = k0_per_nm * thickness_nm
    i_delta = (1j * k0d) * q
    if _may_exceed_cap(k0d, eps, kx2_bound):
        # Re(i delta) = -Im(delta); cap |Im(delta)| (see MAX_PHASE_IMAG)
        decay = i_delta.real
        if decay.max() > MAX_PHASE_IMAG or decay.min() < -MAX_PHASE_IMAG:
            i_delta = np.clip(decay, -MAX_PHASE_IMAG, MAX_PHASE_IMAG) + 1j * i_delta.imag
    # in place on this function's own temporaries (fewer allocations)
    phasor = np.exp(i_delta, out=i_delta)
    inverse = np.divide(1.0, phasor)
    cos_d = phasor + inverse
    cos_d *= 0.5
    diff = np.subtract(phasor, inverse, out=phasor)
    with np.errstate(divide="ignore", invalid="ignore"):
        m12_s = np.multiply(q, -2.0, out=inverse)
        np.divide(diff, m12_s, out=m12_s)
    if q.real.min() <= 0:  # cheap pre-check: q = 0 needs Re(q) = 0 (principal root: Re(q) >= 0)
        grazing = q == 0
        if np.any(grazing):
            m12_s = np.where(grazing, -1j * np.broadcast_to(k0d, grazing.shape), m12_s)
    m21_s = np.multiply(q, diff, out=diff)
    m21_s *= -0.5
    if not with_p:
        return cos_d, m12_s, m21_s, None, None
    # eps has no angle axis: one reciprocal on it and a product on the full grid beat a full-grid division
    return cos_d, m12_s, m21_s, eps * m12_s, m21_s * (1.0 / eps)


def _may_exceed_cap(k0d, eps, kx2_bound) -> bool:
    """False when |Im(delta)| <= k0 d |q| <= k0 d sqrt(|eps| + |kx|^2) stays below the cap.

    Evaluated on the small (W,) or (B, 1, W) arrays instead of the full grid.
    """
    if not np.isfinite(kx2_bound):
        return True
    bound = np.max(k0d) * np.sqrt(np.max(np.abs(eps)) + kx2_bound)
    return not bound <= MAX_PHASE_IMAG


def lossless_layer_matrices(q, eps, thickness_nm, k0_per_nm, with_p=True):
    """`layer_matrices` of a lossless layer with a propagating wave (real q > 0, real eps).

    The phase delta = k0 d q is then real, so cos(delta) and sin(delta) are
    real and the off-diagonal elements purely imaginary: m12 = -i a and
    m21 = -i b with a = sin(delta) / eta, b = eta sin(delta) (eta = q for s,
    q / eps for p).  Returns (cos_d, a_s, b_s, a_p, b_p), real arrays; a_p and
    b_p are None when `with_p` is false.  Agrees with `layer_matrices` to
    round-off.

    cos and sin come from one tangent, t = tan(delta / 2):
    cos = (1 - t^2) / (1 + t^2) = w - 1 and sin = 2t / (1 + t^2) = t w with
    w = 2 / (1 + t^2) (half-angle identities).  numpy evaluates float64 tan
    vectorized, cos and sin not (numpy 2.4 on the development machine: about
    2 ns against 25 ns per value), and one transcendental replaces two (or a
    complex exp and a division).  The absolute errors are a few units of
    round-off, like those of cos and sin of the (already rounded) phase itself:
    near delta = pi, where t is large and ill-conditioned, sin ~ 2 / t and
    cos ~ -1 + 2 / t^2 stay accurate; |tan| of a double stays below ~2e16, so
    t^2 never overflows.  A zero thickness gives the identity exactly.
    """
    t = np.multiply(0.5 * k0_per_nm * thickness_nm, q)  # half phase, this function's own array
    np.tan(t, out=t)
    w = np.multiply(t, t)
    w += 1.0
    np.divide(2.0, w, out=w)
    sin_d = np.multiply(t, w, out=t)
    cos_d = np.subtract(w, 1.0, out=w)
    a_s = sin_d / q
    b_s = np.multiply(sin_d, q, out=sin_d)
    if not with_p:
        return cos_d, a_s, b_s, None, None
    return cos_d, a_s, b_s, a_s * eps, b_s / eps


class LosslessProduct:
    """Running product M = M_1 M_2 ... of lossless layers, top to bottom.

    Products of matrices [[c, -i a], [-i b, c]] with real c, a, b keep the form
    [[m11, -i x], [-i y, m22]] with all four real (``elements``), so real
    arithmetic on four arrays replaces the complex matrix product.  Each layer
    is folded in by `multiply` as soon as its matrix exists: the arrays in
    flight stay few (cache).
    """

    def __init__(self):
        self.elements = None  # (m11, x, y, m22)
        self._scratch = None

    def multiply(self, cos_d, a, b) -> "LosslessProduct":
        """M <- M @ [[cos_d, -i a], [-i b, cos_d]]."""
        if self.elements is None:
            self.elements = (cos_d, a, b, cos_d)  # shared with the layer: the next step allocates
            return self
        m11, x, y, m22 = self.elements
        if self._scratch is None or np.broadcast_shapes(m11.shape, cos_d.shape) != m11.shape:
            # first product, or a layer with more batch/angle axes: new arrays, updated in place from here on
            self.elements = (m11 * cos_d - x * b, m11 * a + x * cos_d, y * cos_d + m22 * b, m22 * cos_d - y * a)
            self._scratch = (np.empty(self.elements[0].shape), np.empty(self.elements[0].shape))
            return self
        first, second = self._scratch
        np.multiply(x, b, out=first)      # x b, for m11
        np.multiply(m11, a, out=second)   # m11 a, for x
        m11 *= cos_d
        m11 -= first
        x *= cos_d
        x += second
        np.multiply(y, a, out=first)      # y a, for m22
        np.multiply(m22, b, out=second)   # m22 b, for y
        m22 *= cos_d
        m22 -= first
        y *= cos_d
        y += second
        return self


def lossless_product(layers):
    """(m11, x, y, m22) of the product of lossless layers given as (cos_d, a, b), top to bottom."""
    product = LosslessProduct()
    for cos_d, a, b in layers:
        product.multiply(cos_d, a, b)
    return product.elements


def lossless_block_forward(eta_top, eta_bottom, product, with_t=True):
    """`block_forward` from a lossless product (m11, x, y, m22) (see `LosslessProduct`)."""
    m11, x, y, m22 = product
    b = np.multiply(x, -1j * eta_bottom)  # (B, C) = M (1, eta_bottom) = (m11 - i x eta, m22 eta - i y)
    c = np.multiply(m22, eta_bottom)
    shape = b.shape
    if c.shape != shape or np.broadcast_shapes(shape, np.shape(eta_top), m11.shape, y.shape) != shape:
        return _coefficients(eta_top, eta_bottom, b + m11, c - 1j * y, with_t)
    # `_coefficients` in place on the two new arrays: allocating a large array
    # costs about as much as the arithmetic on it (same operations, same numbers)
    b.real += m11
    c.imag -= y
    b *= eta_top
    denominator = b + c
    r = np.subtract(b, c, out=b)
    np.divide(r, denominator, out=r)
    t = np.divide(2.0 * eta_top, denominator, out=denominator) if with_t else None
    return BlockCoefficients(r, t, eta_top, eta_bottom)


def lossless_block_both_ways(eta_top, eta_bottom, product):
    """`block_both_ways` from a lossless product (m11, x, y, m22)."""
    m11, x, y, m22 = product
    m12, m21 = -1j * x, -1j * y
    front = _coefficients(eta_top, eta_bottom, m11 + m12 * eta_bottom, m21 + m22 * eta_bottom)
    back = _coefficients(eta_bottom, eta_top, m22 + m12 * eta_top, m21 + m11 * eta_top)
    front.r_back, front.t_back = back.r, back.t
    return front


class BlockCoefficients:
    """Amplitude coefficients of one coherent block between two thick media.

    Attributes per polarization (s: tangential E, p: tangential H):
    ``r``/``t`` for light arriving from above, ``r_back``/``t_back`` from below
    (None when not computed), and the admittances ``eta_top``/``eta_bottom``.
    """

    __slots__ = ("r", "t", "r_back", "t_back", "eta_top", "eta_bottom")

    def __init__(self, r, t, eta_top, eta_bottom, r_back=None, t_back=None):
        self.r, self.t = r, t
        self.eta_top, self.eta_bottom = eta_top, eta_bottom
        self.r_back, self.t_back = r_back, t_back


def block_forward(eta_top, eta_bottom, layers, with_t=True):
    """r, t for light from above through coherent `layers` (top to bottom).

    `layers` is a list of (cos_d, m12, m21) with m12 = -i sin(delta)/eta and
    m21 = -i eta sin(delta).  Only the vector (B, C) is propagated upward from
    the exit medium: half the work of the full matrix product.  Without
    `with_t`, t is None (not computed).
    """
    if not layers:
        return _coefficients(eta_top, eta_bottom, 1.0, eta_bottom, with_t)
    cos_d, m12, m21 = layers[-1]
    b, c = cos_d + m12 * eta_bottom, m21 + cos_d * eta_bottom
    for cos_d, m12, m21 in reversed(layers[:-1]):
        b, c = cos_d * b + m12 * c, m21 * b + cos_d * c
    return _coefficients(eta_top, eta_bottom, b, c, with_t)


def block_both_ways(eta_top, eta_bottom, layers):
    """r, t from above and r_back, t_back from below through coherent `layers`.

    The full product M = M_1 ... M_m is formed once; every layer matrix has
    equal diagonal elements, so the reversed stack's product is M with M11 and
    M22 swapped (a 2x2 identity: M_j^T = P M_j P with P the exchange matrix).
    """
    if not layers:
        m11 = m22 = 1.0
        m12 = m21 = 0.0
    else:
        m11, m12, m21 = layers[0]
        m22 = m11
        for cos_d, l12, l21 in layers[1:]:
            m11, m12, m21, m22 = (m11 * cos_d + m12 * l21, m11 * l12 + m12 * cos_d,
                                  m21 * cos_d + m22 * l21, m21 * l12 + m22 * cos_d)
    front = _coefficients(eta_top, eta_bottom, m11 + m12 * eta_bottom, m21 + m22 * eta_bottom)
    back = _coefficients(eta_bottom, eta_top, m22 + m12 * eta_top, m21 + m11 * eta_top)
    front.r_back, front.t_back = back.r, back.t
    return front


def _coefficients(eta_in, eta_out, b, c, with_t=True):
    """r and t (None without `with_t`: a caller that needs no transmission) from (B, C)."""
    eta_b = eta_in * b  # once, not twice (numerator and denominator)
    denominator = eta_b + c
    if eta_b.shape == denominator.shape and eta_b.dtype == denominator.dtype:  # in place on our own temporary
        r = np.subtract(eta_b, c, out=eta_b)
        r /= denominator
    else:
        r = (eta_b - c) / denominator
    t = 2.0 * eta_in / denominator if with_t else None
    return BlockCoefficients(r, t, eta_in, eta_out)
