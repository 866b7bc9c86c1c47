"""The compiled wing: every numba kernel lives here, with one place that sets the jit flags.

Each kernel has a plain NumPy twin in ``fvsolver.kernels.reference`` that the tests compare
against; the suite also runs with ``NUMBA_DISABLE_JIT=1``.
"""
from __future__ import annotations

import os
import sys

# One set of flags for the whole wing.  cache=True keeps the compiled kernels on disk.  numba's cache
# checks only a kernel's own file: a kernel that calls one from another module of the wing (the
# fused evaluation calls the conduction loops) keeps the old callee until its own file changes,
# so after editing a called kernel clear __pycache__/*.nbi (the twin tests catch a stale one).
JIT_OPTIONS = dict(cache=True, nogil=True, fastmath=False, boundscheck=False)

if "numba" not in sys.modules and os.environ.get("NUMBA_DISABLE_JIT", "0").strip() not in ("", "0"):
    # the kernels run as Python: numba (about 0.3 s to import) is not needed for that
    COMPILED = False

    def jit(function):
        """``function`` itself (the JIT is switched off)."""
        return function
else:
    import numba

    # False under NUMBA_DISABLE_JIT=1: callers that loop over faces in a kernel take their NumPy path
    COMPILED = not numba.config.DISABLE_JIT

    def jit(function):
        """Compile ``function`` with the wing's flags."""
        return numba.njit(**JIT_OPTIONS)(function)
