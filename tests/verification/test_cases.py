"""The verification cases of `fvsolver verify`, run by the suite (default refinement levels).

Each case states its PDE, conditions, exact solution and source in fvsolver/verification/cases.py.
The finest refinement level of each case carries the slow marker.
"""
from __future__ import annotations

import pytest

from fvsolver.verification.cases import CASES
from fvsolver.verification.runner import run_case


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_verification_case_passes(case):
    report = run_case(case)
    failed = [c for c in report.checks if not c.passed]
    assert not failed, failed
    assert len(report.h) >= 3


@pytest.mark.slow
@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_verification_case_passes_with_finest_level(case):
    report = run_case(case, slow=True)
    assert all(c.passed for c in report.checks), [c for c in report.checks if not c.passed]
