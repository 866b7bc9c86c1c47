"""The grid convergence index of Celik et al., J. Fluids Eng. 130 (2008) 078001, Table 1."""
from __future__ import annotations

import math

import pytest

from fvsolver.errors import CaseError
from fvsolver.studies.gci import apparent_order, grid_convergence

# Celik et al. (2008), Table 1, first column: N = 18000, 8000, 4500 cells of a 2D grid
# (r21 = 1.5, r32 = 1.333), phi = 6.063, 5.972, 5.863. The inputs agree with a published
# GCI worked example script; the tabulated results below are quoted from memory:
# p = 1.53, phi_ext^21 = 6.1685, e_a^21 = 1.5 %, e_ext^21 = 1.7 %, GCI_fine^21 = 2.2 %.
PAPER_CELLS = (18000, 8000, 4500)
PAPER_VALUES = (6.063, 5.972, 5.863)


def test_the_papers_worked_example():
    g = grid_convergence(PAPER_VALUES, cells=PAPER_CELLS, dimension=2)
    assert g.r21 == pytest.approx(1.5) and g.r32 == pytest.approx(4 / 3)
    assert g.convergence == "monotonic"
    assert round(g.order, 2) == 1.53
    assert round(g.extrapolated, 4) == 6.1685
    assert round(100 * g.relative_error, 1) == 1.5
    assert round(100 * g.extrapolated_relative_error, 1) == 1.7
    assert round(100 * g.gci_fine, 1) == 2.2
    assert g.note == ""


def test_the_order_does_not_depend_on_the_order_the_grids_are_given_in():
    a = grid_convergence(PAPER_VALUES, cells=PAPER_CELLS)
    b = grid_convergence(PAPER_VALUES[::-1], cells=PAPER_CELLS[::-1])
    assert a == b


@pytest.mark.parametrize("p_exact", [0.8, 1.0, 2.0, 3.1])
def test_an_exact_power_law_is_recovered_with_unequal_ratios(p_exact):
    """phi(h) = phi0 + C h^p exactly (a manufactured sequence): the iteration of Eq. (1) with
    q(p) != 0 (r21 != r32) must return p and the extrapolated value phi0."""
    h = (0.1, 0.17, 0.23)
    phi = [2.5 - 0.7 * x ** p_exact for x in h]
    g = grid_convergence(phi, sizes=h)
    assert g.order == pytest.approx(p_exact, rel=1e-9)
    assert g.extrapolated == pytest.approx(2.5, rel=1e-9)
    assert g.convergence == "monotonic"
    # the true relative error of the finest value lies inside its index (safety factor 1.25)
    assert abs(phi[0] - 2.5) / abs(phi[0]) <= g.gci_fine


def test_oscillatory_convergence_is_flagged():
    # the differences change sign: eps32/eps21 < 0
    g = grid_convergence((6.0042, 5.9624, 6.0909), cells=PAPER_CELLS)
    assert g.convergence == "oscillatory"
    assert math.isfinite(g.order) and g.order > 0
    assert "oscillatory" in g.note


def test_a_difference_of_zero_means_the_procedure_does_not_work():
    g = grid_convergence((1.25, 1.25, 1.3), cells=PAPER_CELLS)
    assert g.convergence == "none"
    assert math.isnan(g.order) and math.isnan(g.gci_fine) and "does not work" in g.note


def test_a_small_refinement_ratio_is_noted():
    g = grid_convergence((1.0, 1.01, 1.03), sizes=(1.0, 1.1, 1.25))
    assert "below 1.3" in g.note


def test_constant_ratio_needs_no_iteration():
    # with r21 = r32, q(p) = 0: p = ln|eps32/eps21| / ln r
    assert apparent_order(0.01, 0.04, 2.0, 2.0) == pytest.approx(2.0)


@pytest.mark.parametrize("kwargs, message", [
    ({"values": (1, 2, 3)}, "either cells"),
    ({"values": (1, 2), "cells": (1, 2)}, "three values"),
    ({"values": (1, 2, 3), "cells": (10, 10, 20)}, "must differ"),
])
def test_bad_input_is_refused(kwargs, message):
    with pytest.raises(CaseError, match=message):
        grid_convergence(**kwargs)
