"""Package-level smoke tests: import, version, CLI entry point."""
import subprocess
import sys

import lamina


def test_version_is_exposed():
    assert lamina.__version__.count(".") >= 2


def test_fit_is_callable_and_a_package():
    import lamina.fit as fit_pkg
    assert callable(lamina.fit)
    assert fit_pkg is lamina.fit


def test_cli_help_runs():
    out = subprocess.run([sys.executable, "-m", "lamina.cli", "--help"], capture_output=True, text=True)
    assert out.returncode == 0
    assert "lamina" in out.stdout
