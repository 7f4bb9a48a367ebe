"""The columns of a measurement file and the Dataset variables they become.

One table shared by the reader, the writer and anyone else who parses
measurement columns (the wafer-map reader).  Fractions (R, T, ...) are 0..1;
angles in degrees; one-sigma uncertainties in the unit of their quantity.
"""
from __future__ import annotations

#: Dataset variable -> (CSV column, units, long name)
VARIABLES: dict[str, tuple[str, str, str]] = {
    "psi": ("psi_deg", "deg", "ellipsometric angle Psi, tan(Psi) = |rp/rs|"),
    "psi_err": ("psi_err_deg", "deg", "one-sigma uncertainty of Psi"),
    "delta": ("delta_deg", "deg", "ellipsometric phase Delta = arg(rp/rs), in [0, 360)"),
    "delta_err": ("delta_err_deg", "deg", "one-sigma uncertainty of Delta"),
    "R": ("R", "1", "reflectance (unpolarized), fraction"),
    "R_err": ("R_err", "1", "one-sigma uncertainty of R"),
    "T": ("T", "1", "transmittance (unpolarized), fraction"),
    "T_err": ("T_err", "1", "one-sigma uncertainty of T"),
    "Rs": ("Rs", "1", "s-polarized reflectance, fraction"),
    "Rs_err": ("Rs_err", "1", "one-sigma uncertainty of Rs"),
    "Rp": ("Rp", "1", "p-polarized reflectance, fraction"),
    "Rp_err": ("Rp_err", "1", "one-sigma uncertainty of Rp"),
    "Ts": ("Ts", "1", "s-polarized transmittance, fraction"),
    "Ts_err": ("Ts_err", "1", "one-sigma uncertainty of Ts"),
    "Tp": ("Tp", "1", "p-polarized transmittance, fraction"),
    "Tp_err": ("Tp_err", "1", "one-sigma uncertainty of Tp"),
}

#: measured quantities (not uncertainties), in file order
QUANTITIES = ("psi", "delta", "R", "T", "Rs", "Rp", "Ts", "Tp")
#: fractions that must lie in [0, 1]
FRACTIONS = ("R", "T", "Rs", "Rp", "Ts", "Tp")
#: every variable, quantities each followed by its uncertainty
VARIABLE_ORDER = tuple(v for q in QUANTITIES for v in (q, f"{q}_err"))

COLUMN_OF_VARIABLE = {name: spec[0] for name, spec in VARIABLES.items()}
VARIABLE_OF_COLUMN = {spec[0]: name for name, spec in VARIABLES.items()}

#: abscissa columns: one of wavelength_nm / energy_ev is required; angle_deg defaults to 0
ABSCISSA_COLUMNS = ("wavelength_nm", "energy_ev", "angle_deg")
ACCEPTED_COLUMNS = ABSCISSA_COLUMNS + tuple(COLUMN_OF_VARIABLE[v] for v in VARIABLE_ORDER)


def error_of(quantity: str) -> str:
    """Variable name of the uncertainty of `quantity` (psi -> psi_err)."""
    return f"{quantity}_err"
