"""Fixtures of the fitting tests: the tmm-based data generator (tmm_data.py) as a module."""
import importlib.util
import pathlib

import pytest


def _load_tmm_data():
    spec = importlib.util.spec_from_file_location("lamina_tests_fit_tmm_data",
                                                  pathlib.Path(__file__).with_name("tmm_data.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="session")
def tmm_data():
    return _load_tmm_data()
