"""Input checks shared by the property modules: every refusal names the argument, the value
received, the interval expected and a hint."""
from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from fvsolver.errors import PropertyError


def describe(values: NDArray[np.float64]) -> str:
    """Summarise offending values for an error message."""
    flat = np.ravel(values).astype(float)
    if flat.size == 1:
        return f"{flat[0]:.10g}"
    finite = flat[np.isfinite(flat)]
    text = f"{flat.size} offending values (first {flat[0]:.10g}"
    if finite.size:
        text += f", finite ones from {finite.min():.10g} to {finite.max():.10g}"
    return text + ")"


def checked(value: ArrayLike, name: str, low: float, high: float, hint: str, unit: str = "",
            low_open: bool = False) -> NDArray[np.float64]:
    """Return ``value`` as a float array, raising PropertyError if any entry is outside its interval."""
    arr = np.asarray(value, dtype=float)
    # the common case in two reductions, no temporaries: min/max are NaN if any entry is, and
    # every comparison with NaN is false, so a NaN or an infinity falls to the full check below
    if arr.size:
        lo, hi = (float(arr), float(arr)) if arr.ndim == 0 else (float(arr.min()), float(arr.max()))
        if (lo > low if low_open else lo >= low) and hi <= high and -np.inf < lo and hi < np.inf:
            return arr
    else:
        return arr
    below = arr <= low if low_open else arr < low
    bad = ~np.isfinite(arr) | below | (arr > high)
    if np.any(bad):
        interval = f"({low}, {high}]" if low_open else f"[{low}, {high}]"
        u = f" {unit}" if unit else ""
        raise PropertyError(f"{name} = {describe(arr[bad])}{u} received; expected finite values in "
                            f"{interval}{u}; {hint}")
    return arr
