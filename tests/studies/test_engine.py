"""Sweeps on Dask: the same bits as local runs, a failed run is a row, a dead worker's run is
retried elsewhere. The clusters are LocalClusters started in this process (small and quick)."""
from __future__ import annotations

import pytest

pytest.importorskip("distributed")

from fvsolver.errors import CaseError  # noqa: E402
from fvsolver.studies.engine import DaskEngine  # noqa: E402
from fvsolver.sweeps import Vary, sweep  # noqa: E402
from tests.device.helpers import device_case  # noqa: E402

KEYS = ("run", "room.relative_humidity", "room.air_speed", "status", "time_to_target_s", "max_pressure_drop_pa",
        "min_temperature_k", "n_steps", "energy_balance_relative_error")


@pytest.fixture(scope="module")
def threads():
    """Two workers as threads of this process (monkeypatches reach them)."""
    with DaskEngine(workers=2, processes=False) as engine:
        yield engine


def test_a_sweep_on_dask_gives_the_same_bits_as_local_runs(tmp_path, threads):
    case = device_case(time={"end": 10.0})
    varies = [Vary("room.relative_humidity", (0.3, 0.6)), Vary("room.air_speed", (0.4,))]
    local = sweep(case, varies, tmp_path / "local")
    seen = []
    dask = sweep(case, varies, tmp_path / "dask", engine=threads, progress=lambda *a: seen.append(a[0]))
    assert [[r[k] for k in KEYS] for r in dask] == [[r[k] for k in KEYS] for r in local]
    assert sorted(seen) == [0, 1]
    assert (tmp_path / "dask" / "runs" / "001" / "summary.json").exists()
    assert (tmp_path / "dask" / "sweep.csv").read_text().count("\n") == 3
    assert threads.running() == 0


def test_a_failed_run_on_dask_is_a_row(tmp_path, threads, monkeypatch):
    import fvsolver.pipeline as pipeline

    real = pipeline.run

    def broken(case, out=None, **kw):
        if case["room"]["air_speed"] == 0.3:
            raise ZeroDivisionError("a bug, not a solver failure")
        return real(case, out, **kw)

    monkeypatch.setattr(pipeline, "run", broken)
    rows = sweep(device_case(time={"end": 8.0}), [Vary("room.air_speed", (0.1, 0.3))], tmp_path / "s",
                 engine=threads)
    assert [r["status"] for r in rows] == ["complete", "failed"]
    assert "ZeroDivisionError" in rows[1]["reason"]


def test_a_dead_workers_call_is_retried_and_one_that_keeps_killing_is_a_failure(tmp_path):
    from tests.studies.dying import always_die, die_once

    results, failures = {}, {}
    with DaskEngine(workers=2, allowed_failures=1) as engine:
        calls = [(str(tmp_path / "mark"), 21.0)]
        engine.map(die_once, calls, results.__setitem__, lambda i, exc: failures.setdefault(i, exc))
        assert results == {0: 42.0} and not failures  # retried on a fresh worker
        engine.map(always_die, [(1.0,)], results.__setitem__, lambda i, exc: type(exc).__name__)
    assert results[0] == "KilledWorker"


def test_the_engine_asks_for_one_of_scheduler_or_workers():
    with pytest.raises(CaseError, match="give one of them"):
        DaskEngine()
    with pytest.raises(CaseError, match="--workers: got 0"):
        DaskEngine(workers=0)


def test_a_missing_extra_is_named(monkeypatch):
    import builtins

    real_import = builtins.__import__

    def no_dask(name, *args, **kwargs):
        if name.split(".")[0] in ("dask", "distributed"):
            raise ImportError(f"No module named {name!r}", name=name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_dask)
    with pytest.raises(CaseError, match=r"optional extra 'distributed'.*fvsolver\[distributed\]"):
        DaskEngine(workers=1)
