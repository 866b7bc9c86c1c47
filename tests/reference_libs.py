"""Reference libraries the tests compare against, set up the way the tests need them."""
from __future__ import annotations

import os

import pytest


def psychrolib_si():
    """psychrolib in SI units. psychrolib recompiles its functions with numba when the unit system
    is set, through their ``py_func``; under NUMBA_DISABLE_JIT=1 its functions are plain Python
    without one and SetUnitSystem raises: its checks are skipped there (they run in the default
    suite)."""
    import psychrolib

    try:
        psychrolib.SetUnitSystem(psychrolib.SI)
    except AttributeError:
        if os.environ.get("NUMBA_DISABLE_JIT", "0").strip() not in ("", "0"):
            pytest.skip("psychrolib cannot set its unit system under NUMBA_DISABLE_JIT=1 (it recompiles "
                        "through numba's py_func)")
        raise
    return psychrolib
