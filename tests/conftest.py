"""Shared test set-up: strict floating point, a headless plotting backend, a seeded generator."""
from __future__ import annotations

import os

os.environ.setdefault("MPLBACKEND", "Agg")

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pytest


@pytest.fixture(autouse=True)
def _strict_floating_point():
    old = np.seterr(all="raise", under="ignore")
    yield
    np.seterr(**old)


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261201)
