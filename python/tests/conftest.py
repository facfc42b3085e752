"""Shared fixtures of the Python module's tests (run by ctest as python.pytest)."""

import os
import pathlib

import pytest

SOURCE_DIR = pathlib.Path(os.environ.get("STEPLEDGER_SOURCE_DIR", pathlib.Path(__file__).resolve().parents[2]))
EXAMPLES = SOURCE_DIR / "examples"
LAPTOPS = EXAMPLES / "data" / "laptops.csv"
STEPWISE_BIC = EXAMPLES / "plans" / "stepwise_bic.json"


@pytest.fixture
def stepledger_exe():
    """The command line built beside the module (ctest sets STEPLEDGER_EXE)."""
    exe = os.environ.get("STEPLEDGER_EXE")
    assert exe and os.path.exists(exe), "STEPLEDGER_EXE must name the built stepledger program (run through ctest)"
    return exe


@pytest.fixture
def laptops_frame():
    """examples/data/laptops.csv as pandas reads it, with doubles read exactly (round_trip)."""
    import pandas
    return pandas.read_csv(LAPTOPS, float_precision="round_trip")
