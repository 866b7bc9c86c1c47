"""Which written fields temperature_field.png draws."""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from fvsolver.pipeline import _chosen_fields


def _fields(times, uniform_first=True):
    rng = np.random.default_rng(0)
    out = []
    for i, t in enumerate(times):
        out.append((t, np.full(5, 297.15) if (i == 0 and uniform_first) else 296.0 + rng.random(5)))
    return SimpleNamespace(fields=out)


def test_a_field_written_a_step_after_the_crossing_is_not_drawn_twice():
    """The demo writes its field at the crossing (22.11 s) and at the run's end a step later
    (22.21 s or 22.40 s): both panels would read "t = 22 s"; the crossing's stands for both. The
    uniform initial field is left out too."""
    for end in (22.2117, 22.4024):
        chosen = _chosen_fields(_fields([0.0, 22.108, end]), {"time_to_target_s": 22.108})
        assert [t for t, _ in chosen] == [22.108]


def test_the_end_is_drawn_when_it_comes_well_after_the_crossing():
    chosen = _chosen_fields(_fields([0.0, 22.108, 23.0]), {"time_to_target_s": 22.108})
    assert [t for t, _ in chosen] == [22.108, 23.0]
    # and a run without a crossing keeps its last two fields, however close
    chosen = _chosen_fields(_fields([0.0, 22.108, 22.2117]), {"time_to_target_s": None})
    assert [t for t, _ in chosen] == [22.108, 22.2117]
