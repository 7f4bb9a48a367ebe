"""`lamina materials`: listing, n, k of one material, input errors (exit 2, one line)."""
import pytest

from lamina import materials
from lamina.cli.main import main


def test_list_shows_every_material_with_law_range_and_source(capsys):
    assert main(["materials"]) == 0
    out = capsys.readouterr().out
    for name in materials.names():
        assert any(line.startswith(name + " ") for line in out.splitlines())
    sio2_line = next(line for line in out.splitlines() if line.startswith("SiO2 "))
    assert "sellmeier" in sio2_line and "210-6700 nm" in sio2_line and "Malitson" in sio2_line


def test_full_sources(capsys):
    assert main(["materials", "--sources"]) == 0
    assert "main/SiO2/Malitson" in capsys.readouterr().out


def test_one_material_at_given_wavelengths(capsys):
    # Malitson 1965: fused silica n(587.56 nm) = 1.4585
    assert main(["materials", "fused silica", "--wavelengths", "587.56, 1000"]) == 0
    out = capsys.readouterr().out
    row = next(line for line in out.splitlines() if line.strip().startswith("587.56"))
    assert float(row.split()[1]) == pytest.approx(1.4585, abs=1e-4)
    assert "Malitson" in out


def test_default_wavelengths_stay_inside_the_range(capsys):
    assert main(["materials", "Si"]) == 0
    out = capsys.readouterr().out
    assert " 1550 " not in out and "632.8" in out   # Si table ends at 1450 nm


@pytest.mark.parametrize("argv, fragment", [
    (["materials", "unobtainium"], "unknown material 'unobtainium'"),
    (["materials", "Si02"], "SiO2"),
    (["materials", "Si", "--wavelengths", "200"], "--wavelengths"),
    (["materials", "Si", "--wavelengths", "4x0"], "'4x0' is not a number"),
    (["materials", "Si", "--wavelengths", "-5"], "not a positive wavelength"),
    (["materials", "--wavelengths", "500"], "needs a material name"),
])
def test_bad_input_exits_2_with_one_line(argv, fragment, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("lamina: error:") and fragment in err[0]
