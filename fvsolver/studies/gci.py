"""The grid convergence index of Celik et al., J. Fluids Eng. 130 (2008) 078001.

Three solutions of one quantity on systematically refined discretisations (grid 1 the finest)
give the apparent order, the Richardson-extrapolated value and the fine-grid convergence index:

.. math:: p = \\frac{1}{\\ln r_{21}} \\left| \\ln\\left|\\frac{\\varepsilon_{32}}{\\varepsilon_{21}}\\right|
          + \\ln\\frac{r_{21}^p - s}{r_{32}^p - s} \\right|, \\quad s = \\operatorname{sgn}
          \\frac{\\varepsilon_{32}}{\\varepsilon_{21}}, \\quad
          \\mathrm{GCI}^{21}_\\mathrm{fine} = \\frac{1.25\\, e_a^{21}}{r_{21}^p - 1}

with :math:`\\varepsilon_{21} = \\phi_2 - \\phi_1`, :math:`\\varepsilon_{32} = \\phi_3 - \\phi_2`, solved by
fixed-point iteration from :math:`q = 0`. The paper's cases are kept apart: s < 0 is oscillatory
convergence (the same formulas, with s = -1, and flagged); a difference "very close" to zero
means the procedure does not work (no order, no index: refine further, or report the values as
they are).
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from fvsolver.errors import CaseError

#: the factor of safety of the three-grid index
SAFETY_FACTOR = 1.25


@dataclass(frozen=True)
class GridConvergence:
    """The result of the three-grid procedure (1: finest, 3: coarsest).

    Attributes
    ----------
    values : (phi_1, phi_2, phi_3)
    sizes : (h_1, h_2, h_3), the representative cell sizes (or step measures)
    r21, r32 : refinement ratios h_2/h_1 and h_3/h_2
    convergence : "monotonic", "oscillatory", or "none" (a difference too close to zero for
        the procedure; the order and the index are then NaN)
    order : the apparent order p
    extrapolated : phi_ext^21, the Richardson-extrapolated value
    relative_error : e_a^21 = |(phi_1 - phi_2)/phi_1|
    extrapolated_relative_error : e_ext^21 = |(phi_ext^21 - phi_1)/phi_ext^21|
    gci_fine : GCI_fine^21 (a fraction: 0.021 is 2.1 %)
    note : a sentence on anything the reader must know (oscillation, a failed procedure, a
        ratio below 1.3)
    """

    values: tuple[float, float, float]
    sizes: tuple[float, float, float]
    r21: float
    r32: float
    convergence: str
    order: float
    extrapolated: float
    relative_error: float
    extrapolated_relative_error: float
    gci_fine: float
    note: str

    @property
    def uncertainty(self) -> float:
        """The fine-grid value's numerical uncertainty in the quantity's own unit (GCI |phi_1|)."""
        return self.gci_fine * abs(self.values[0])


def representative_size(cells: float, total: float = 1.0, dimension: int = 2) -> float:
    """h = (total / N)^(1/dimension): the paper's representative cell size, ``total`` being the
    domain's area (2D) or volume (3D)."""
    return (total / cells) ** (1.0 / dimension)


def apparent_order(eps21: float, eps32: float, r21: float, r32: float, max_iterations: int = 200,
                   tolerance: float = 1e-12) -> float:
    """The apparent order p by fixed-point iteration of the paper's Eq. (1) from q = 0."""
    s = math.copysign(1.0, eps32 / eps21)
    ratio = math.log(abs(eps32 / eps21))
    p = abs(ratio) / math.log(r21)
    for _ in range(max_iterations):
        a, b = r21 ** p - s, r32 ** p - s
        if a <= 0 or b <= 0:  # q undefined (p -> 0 with s = 1): no order from these three
            return math.nan
        new = abs(ratio + math.log(a / b)) / math.log(r21)
        if abs(new - p) <= tolerance * max(1.0, abs(new)):
            return new
        p = new
    return math.nan


def grid_convergence(values: Sequence[float], cells: Sequence[float] | None = None,
                     sizes: Sequence[float] | None = None, dimension: int = 2,
                     zero_tolerance: float = 1e-12) -> GridConvergence:
    """The three-grid procedure of Celik et al. (2008) for one quantity.

    Parameters
    ----------
    values : the quantity on three discretisations, in any order
    cells : their cell counts N (h = N^(-1/dimension)), or
    sizes : their representative sizes h directly (e.g. a time tolerance)
    dimension : 2 for an axisymmetric mesh (its cells are areas of the meridian plane)
    zero_tolerance : a difference below this times |phi| counts as zero ("very close to zero")

    Returns
    -------
    GridConvergence
    """
    if (cells is None) == (sizes is None):
        raise CaseError("grid_convergence: give either cells (cell counts) or sizes (representative sizes)")
    if len(values) != 3 or len(cells if sizes is None else sizes) != 3:
        raise CaseError(f"grid_convergence: expected three values and three sizes, got {len(values)} and "
                        f"{len(cells if sizes is None else sizes)}")
    h = [representative_size(n, dimension=dimension) for n in cells] if sizes is None else [float(x) for x in sizes]
    if any(not (x > 0 and math.isfinite(x)) for x in h) or any(not math.isfinite(v) for v in values):
        raise CaseError(f"grid_convergence: sizes {h} and values {list(values)} must be finite, sizes > 0")
    order = sorted(range(3), key=lambda i: h[i])
    (h1, h2, h3), (f1, f2, f3) = (tuple(h[i] for i in order), tuple(float(values[i]) for i in order))
    if not (h1 < h2 < h3):
        raise CaseError(f"grid_convergence: the three sizes {sorted(h)} must differ (a refinement)")
    r21, r32 = h2 / h1, h3 / h2
    eps21, eps32 = f2 - f1, f3 - f2
    notes = []
    if min(r21, r32) < 1.3:
        notes.append(f"a refinement ratio is below 1.3 (r21 = {r21:.3g}, r32 = {r32:.3g}), less than the paper asks")
    scale = max(abs(f1), abs(f2), abs(f3), 1e-300)
    nan = math.nan
    if abs(eps21) <= zero_tolerance * scale or abs(eps32) <= zero_tolerance * scale:
        notes.append("a difference between solutions is zero to round-off: the procedure does not work here "
                     "(the solution may have converged, or convergence is oscillatory); refine further or "
                     "report the values as they are")
        return GridConvergence((f1, f2, f3), (h1, h2, h3), r21, r32, "none", nan, nan,
                               abs(eps21 / f1) if f1 else nan, nan, nan, "; ".join(notes))
    s = math.copysign(1.0, eps32 / eps21)
    p = apparent_order(eps21, eps32, r21, r32)
    kind = "monotonic" if s > 0 else "oscillatory"
    if kind == "oscillatory":
        notes.append("oscillatory convergence (eps32/eps21 < 0): the order and index come from the same "
                     "formulas with s = -1; read them with care")
    if not math.isfinite(p) or p == 0.0:
        notes.append("no apparent order could be found from these three solutions; refine further")
        return GridConvergence((f1, f2, f3), (h1, h2, h3), r21, r32, kind, nan, nan,
                               abs(eps21 / f1) if f1 else nan, nan, nan, "; ".join(notes))
    rp = r21 ** p
    extrapolated = (rp * f1 - f2) / (rp - 1.0)
    ea = abs(eps21 / f1) if f1 else nan
    eext = abs((extrapolated - f1) / extrapolated) if extrapolated else nan
    gci = SAFETY_FACTOR * ea / (rp - 1.0)
    return GridConvergence((f1, f2, f3), (h1, h2, h3), r21, r32, kind, p, extrapolated, ea, eext, gci,
                           "; ".join(notes))
