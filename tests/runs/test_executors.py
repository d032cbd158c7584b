"""The executor seam: the same outcomes in process, in a process pool and on a two-worker Dask cluster."""

from __future__ import annotations

import sys
import threading
import time

import pytest

from tests.conftest import random_model
from tests.runs._tasks import portfolio_risk, portfolio_risk_on
from trimtab.errors import InputError
from trimtab.runs import Outcome, get_executor
from trimtab.runs._executors import CLOSE_TIMEOUT, STARTUP_TIMEOUT, format_failure, local_cluster_options, resolve_kind

SEEDS = [0, 1, -3, 2, 3]  # -3 raises inside the task


def _collect(executor) -> dict[str, Outcome]:
    labels = [f"seed{s}" for s in SEEDS]
    seen: list[str] = []
    outcomes = {o.label: o for o in executor.map(portfolio_risk, SEEDS, labels=labels, progress=lambda o: seen.append(o.label))}
    assert sorted(seen) == sorted(labels)  # the progress callback saw every run once
    return outcomes


def _check(outcomes: dict[str, Outcome]) -> None:
    assert set(outcomes) == {f"seed{s}" for s in SEEDS}
    bad = outcomes["seed-3"]
    assert not bad.ok and bad.value is None and bad.params == -3 and bad.index == 2
    assert bad.error == "InputError: portfolio_risk: seed must be ≥ 0, got -3"
    assert "seed-3 (parameters -3): InputError" in format_failure(bad)
    for s in (0, 1, 2, 3):
        o = outcomes[f"seed{s}"]
        assert o.ok and o.params == s
        # w'Σw from the factor form equals the dense quadratic form (textbook identity Σ = BFBᵀ + D)
        assert o.value["variance"] == pytest.approx(o.value["dense"], rel=1e-12)


SHARED = random_model(n_assets=40, n_factors=3, seed=11)


def _collect_shared(executor) -> dict[str, Outcome]:
    """The same seeds on one model passed once as ``shared`` (scattered to Dask workers)."""
    return {o.label: o for o in executor.map(portfolio_risk_on, SEEDS, labels=[f"seed{s}" for s in SEEDS], shared=SHARED)}


def _check_shared(outcomes: dict[str, Outcome], executor_kind: str) -> None:
    expected = {f"seed{s}": portfolio_risk_on(s, SHARED) for s in SEEDS if s >= 0}
    for label, value in expected.items():
        assert outcomes[label].ok and outcomes[label].value == value, executor_kind
        # the factor form against the dense quadratic form (textbook identity Σ = BFBᵀ + D)
        assert value["variance"] == pytest.approx(value["dense"], rel=1e-12)
    assert outcomes["seed-3"].error == "InputError: portfolio_risk_on: seed must be ≥ 0, got -3"


@pytest.fixture(scope="module")
def reference() -> dict[str, Outcome]:
    with get_executor("inprocess") as ex:
        outcomes = _collect(ex)
        _check_shared(_collect_shared(ex), "inprocess")
    _check(outcomes)
    return outcomes


def _same(outcomes: dict[str, Outcome], reference: dict[str, Outcome]) -> None:
    _check(outcomes)
    for label, ref in reference.items():
        assert outcomes[label].value == ref.value
        assert outcomes[label].error == ref.error


def test_inprocess_streams_in_input_order(reference: dict[str, Outcome]) -> None:
    with get_executor("inprocess") as ex:
        order = [o.index for o in ex.map(portfolio_risk, SEEDS)]
        assert ex.n_workers == 1
    assert order == list(range(len(SEEDS)))


def test_process_pool_gives_identical_outcomes(reference: dict[str, Outcome]) -> None:
    with get_executor("processes", workers=2) as ex:
        assert ex.n_workers == 2
        _same(_collect(ex), reference)
        _check_shared(_collect_shared(ex), "processes")


@pytest.fixture
def held_dashboard_port():  # noqa: ANN201 - yields the socket or None
    """Hold 127.0.0.1:8787 (the scheduler's default HTTP port), as another cluster on the machine would."""
    import socket

    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    try:
        sock.bind(("127.0.0.1", 8787))
        sock.listen(1)
    except OSError:
        sock.close()  # already held by someone else: the clash is there anyway
        sock = None
    try:
        yield sock
    finally:
        if sock is not None:
            sock.close()


def test_dask_cluster_on_loopback_gives_identical_outcomes(reference: dict[str, Outcome], held_dashboard_port) -> None:
    distributed = pytest.importorskip("distributed")
    # With the port 8787 taken, a cluster started with dashboard_address=None alone warned
    # "Port 8787 is already in use" (an error under pytest's warnings-as-errors): the failure seen under load.
    cluster = distributed.LocalCluster(**local_cluster_options(2))
    try:
        with get_executor("dask", scheduler=cluster.scheduler_address, connect_timeout=STARTUP_TIMEOUT) as ex:
            ex.client.wait_for_workers(2, timeout=STARTUP_TIMEOUT)
            assert ex.n_workers == 2
            _same(_collect(ex), reference)
            _check_shared(_collect_shared(ex), "dask")
            # the scattered model is released with the run (the scheduler forgets it a moment later)
            deadline = time.monotonic() + STARTUP_TIMEOUT
            while any(key.startswith("FactorModel") for key in ex.client.who_has()) and time.monotonic() < deadline:
                time.sleep(0.05)
            assert not any(key.startswith("FactorModel") for key in ex.client.who_has())
            # shared inputs that cannot be sent fail every run with the reason, not with a traceback
            failed = list(ex.map(portfolio_risk_on, [0, 1], shared=threading.Lock()))
            assert [o.ok for o in failed] == [False, False]
            assert all(o.error.startswith("the shared inputs could not be sent: ") for o in failed)
            hosts = {w.split("://")[1].rsplit(":", 1)[0] for w in ex.client.scheduler_info()["workers"]}
            assert hosts == {"127.0.0.1"}
        assert ex.client.status == "closed"
    finally:
        cluster.close(timeout=CLOSE_TIMEOUT)
    assert cluster.status.name == "closed"


def test_labels_must_match_items() -> None:
    with get_executor() as ex, pytest.raises(InputError, match=r"labels must have one entry per item \(2\), got 1"):
        list(ex.map(abs, [1, 2], labels=["a"]))


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"kind": "threads"}, r"--executor: expected one of inprocess, processes, dask, got 'threads'"),
        ({"kind": "processes", "workers": 0}, r"--workers: expected a whole number ≥ 1, got 0"),
        ({"kind": "processes", "scheduler": "tcp://127.0.0.1:1"}, r"--scheduler: only used with --executor dask"),
        ({"kind": "dask", "scheduler": "tcp://127.0.0.1:1", "workers": 2}, r"--scheduler and --workers: give one"),
    ],
)
def test_bad_settings(kwargs: dict, message: str) -> None:
    with pytest.raises(InputError, match=message):
        get_executor(**kwargs)


def test_missing_dask_names_the_extra(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(sys.modules, "distributed", None)  # makes `import distributed` raise ImportError
    with pytest.raises(InputError, match=r'needs dask.distributed.*pip install "trimtab\[distributed\]"'):
        get_executor("dask", workers=1)


def test_unreachable_scheduler_is_an_input_error() -> None:
    pytest.importorskip("distributed")
    # port 9 on loopback (discard) has no scheduler: the connection is refused or times out
    with pytest.raises(InputError, match=r"--scheduler tcp://127.0.0.1:9: could not connect to a Dask scheduler"):
        get_executor("dask", scheduler="tcp://127.0.0.1:9", connect_timeout=1)


def test_resolve_kind_rule() -> None:
    assert resolve_kind(None, None, None) == "inprocess"
    assert resolve_kind(None, 2, None) == "dask"
    assert resolve_kind(None, None, "tcp://127.0.0.1:8786") == "dask"
    assert resolve_kind("processes", 2, None) == "processes"


def test_dask_with_workers_starts_and_stops_its_own_cluster(reference: dict[str, Outcome], held_dashboard_port) -> None:
    pytest.importorskip("distributed")
    ex = get_executor("dask", workers=1)
    try:
        assert ex.n_workers == 1
        values = {o.label: o.value for o in ex.map(portfolio_risk, [0, 1], labels=["seed0", "seed1"])}
        http_port = ex._cluster.scheduler.http_server.port  # type: ignore[attr-defined]
    finally:
        ex.close()
    ex.close()  # a second close is harmless
    assert values == {"seed0": reference["seed0"].value, "seed1": reference["seed1"].value}
    assert ex.client.status == "closed" and ex._cluster.status.name == "closed"  # type: ignore[attr-defined]
    assert http_port != 8787  # no fixed port to clash on


def test_local_cluster_options_fix_no_port() -> None:
    options = local_cluster_options(3)
    assert options["n_workers"] == 3 and options["host"] == "127.0.0.1" and options["scheduler_port"] == 0
    assert options["scheduler_kwargs"] == {"dashboard": False, "dashboard_address": "127.0.0.1:0"}


def test_dask_workers_start_without_the_trim_threshold_and_leave_the_parent_alone(held_dashboard_port) -> None:
    # #21: dask's nanny sets MALLOC_TRIM_THRESHOLD_=65536 in its workers (distributed.yaml,
    # nanny.pre-spawn-environ) and writes its pre-spawn variables into the parent's os.environ
    pytest.importorskip("distributed")
    import os

    from tests.runs._tasks import allocator_setting

    os.environ.pop("MALLOC_TRIM_THRESHOLD_", None)
    before = dict(os.environ)
    with get_executor("dask", workers=1) as ex:
        seen = [o.value for o in ex.map(allocator_setting, [0])]
        during = dict(os.environ)
    assert seen == [None]
    assert during == before and dict(os.environ) == before
