"""Shared fixtures. Tests import the package from the checkout."""
from __future__ import annotations

import numpy as np
import pytest

from planner.timebase import astropy_offline

# The tests use astropy directly as the outside reference: set it offline first, as
# hiplan does before its own first use of astropy.
astropy_offline()
from planner.site import load_site


@pytest.fixture(scope="session")
def club():
    """The northern example site (3 m transit dish)."""
    return load_site("hollowmere")


@pytest.fixture(scope="session")
def school():
    """The southern example site (2 m alt-az dish)."""
    return load_site("saltbush-ridge")


@pytest.fixture
def full_disk(monkeypatch):
    """Every write to a file fails as on a full disk (the terminal's descriptors still work)."""
    import errno
    import os
    real_write = os.write

    def write(fd, data):
        if fd > 2:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_write(fd, data)

    monkeypatch.setattr(os, "write", write)


@pytest.fixture
def rng():
    return np.random.default_rng(20270301)


# MJD range inside the bundled IERS table (2020-01-01 .. 2027-06-01), for astropy comparisons.
MJD_LO, MJD_HI = 58849.0, 61557.0
