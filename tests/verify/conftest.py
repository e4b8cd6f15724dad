"""Shared fixtures for the differential (compile and run) checks."""

import pytest

from rewrite.verify.gfortran import find_gfortran, gfortran_version


@pytest.fixture(scope="session")
def gfortran():
    """Path of gfortran; skips the test when there is none."""
    exe = find_gfortran()
    if exe is None:
        pytest.skip("gfortran is not installed (set $SAMEBITS_GFORTRAN or put gfortran on PATH)")
    return exe


@pytest.fixture(scope="session")
def gfortran_banner(gfortran):
    return gfortran_version(gfortran)
