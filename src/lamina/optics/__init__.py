"""Forward optics: transfer matrices, incoherent slabs, ellipsometric quantities,
instrument averaging and `simulate` (see docs/optics.md).

``solve(n_media, thickness_nm, coherent, wavelength_nm, angle_deg)`` is the
solver contract; ``lamina.simulate`` (optics/simulate.py) wraps it for a Stack.
"""
from .ellipsometry import delta_from_tmm, delta_to_tmm
from .solver import KEYS, solve

__all__ = ["solve", "KEYS", "delta_from_tmm", "delta_to_tmm"]
