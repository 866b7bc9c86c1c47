"""The command line's exit codes, in a module of their own so that ``--help`` and ``check``
need not import the solver (numpy, scipy, numba) to know them."""
from __future__ import annotations

EXIT_OK, EXIT_CASE, EXIT_SOLVER, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 2, 3, 4, 130
