"""Calls for the Dask engine tests that take their worker process down with them."""
from __future__ import annotations

import os
from pathlib import Path


def die_once(marker: str, value: float) -> float:
    """Kill the worker on the first call (leaving ``marker``), then answer on the retry."""
    mark = Path(marker)
    if not mark.exists():
        mark.write_text("the first worker died here")
        os._exit(1)
    return 2.0 * value


def always_die(value: float) -> float:
    os._exit(1)
