"""The one seam where many runs are dispatched: in this process, a local process pool, or Dask.

Every sweep point, frontier point and backtest scenario path goes through :func:`get_executor`.
An executor's :meth:`~Executor.map` streams :class:`Outcome` objects back as the runs complete; a run
that raises is reported with its parameters and the error text, and the other runs go on.

Sending work warm (how sweeps, frontiers and backtests use the seam; the same recipe serves any
caller with many similar solves):

1. Make each *item* a chunk of neighbouring runs, not one run: ``sweep`` cuts its grid into
   ``executor.n_workers`` contiguous runs of points (``_sweep.chunks``), a backtest sends one
   scenario's dates in order. Inside a chunk, build the problem once and re-solve it for each run
   (``RebalanceProblem.solve(**changes)``): each re-solve starts FACTOR_IPM from its neighbour's
   point (the problem's ``warm`` box), 20–35% fewer iterations than a cold start.
2. Pass what every chunk reads alike (the model, the book, the scenario) as ``shared``: a Dask
   cluster receives it once, scattered to every worker, not once inside every task; across several
   ``map`` calls, hold it with ``with executor.sharing(value) as shared:``.
3. Keep items and results small and picklable (figures, weights), and the function a module-level
   name (workers import it).

Dask workers of a LocalCluster started here run without glibc's ``MALLOC_TRIM_THRESHOLD_`` (see
:func:`worker_environment`), and this process's environment is left as it was found.
"""

from __future__ import annotations

import concurrent.futures as cf
import logging
import multiprocessing
import os
import uuid
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, Literal

from trimtab.errors import InputError

ExecutorKind = Literal["inprocess", "processes", "dask"]
KINDS: tuple[str, ...] = ("inprocess", "processes", "dask")
DISTRIBUTED_HINT = 'pip install "trimtab[distributed]"'


@dataclass(frozen=True, eq=False)
class Outcome:
    """One run's outcome.

    Attributes
    ----------
    label : str
        The run's label (its position when no labels were given).
    value : Any
        What the function returned; None when it failed.
    error : str or None
        ``"ErrorType: message"`` (first line) when the run raised, else None.
    params : Any
        The item the function was called with, so a failure can be re-run or reported.
    index : int
        The item's position in the input.
    """

    label: str
    value: Any
    error: str | None
    params: Any
    index: int

    @property
    def ok(self) -> bool:
        """True when the run returned a value."""
        return self.error is None


def _describe(err: BaseException) -> str:
    text = str(err).strip().splitlines()
    return f"{type(err).__name__}: {text[0]}" if text else type(err).__name__


#: ``shared`` not given (None is a value a caller may share)
NOTHING: Any = object()


def call_safely(func: Callable[..., Any], item: Any, shared: Any = NOTHING) -> tuple[bool, Any]:
    """Run ``func(item)`` (``func(item, shared)`` with ``shared``); return ``(True, value)`` or
    ``(False, "Type: message")``.

    Runs where the work runs (a pool process, a Dask worker), so an exception that does not pickle
    still comes back as text.
    """
    try:
        return True, (func(item) if shared is NOTHING else func(item, shared))
    except Exception as err:  # noqa: BLE001 - every failure becomes a reported outcome
        return False, _describe(err)


class Executor:
    """Base class: dispatch ``func`` over items and stream :class:`Outcome` objects back.

    Use as a context manager (or call :meth:`close`) so pools and clusters are shut down.
    """

    kind: str = "inprocess"

    def __enter__(self) -> Executor:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Release workers (nothing to do in process)."""

    @property
    def n_workers(self) -> int:
        """How many runs can go at once."""
        return 1

    @contextmanager
    def sharing(self, shared: Any) -> Iterator[Any]:
        """What to pass as ``shared`` to several :meth:`map` calls so it travels once: on Dask, a
        handle to the value scattered to every worker (released on exit); elsewhere the value."""
        yield shared

    def map(
        self,
        func: Callable[..., Any],
        items: Iterable[Any],
        *,
        labels: Sequence[str] | None = None,
        progress: Callable[[Outcome], None] | None = None,
        shared: Any = NOTHING,
    ) -> Iterator[Outcome]:
        """Run ``func`` on every item; yield each :class:`Outcome` as it completes.

        Parameters
        ----------
        func : callable
            A function of one argument (two with ``shared``); for ``processes`` and ``dask`` it
            must be importable by name (a module-level function) and its items and results picklable.
        items : iterable
            The parameters of each run.
        labels : sequence of str, optional
            One label per item (default: the positions ``"0"``, ``"1"``, ...).
        progress : callable, optional
            Called with each outcome as it arrives (a progress bar's ``advance``).
        shared : optional
            What every run needs alike (the return history of a backtest, the model of a sweep):
            called as ``func(item, shared)``. A Dask cluster receives it once, scattered to every
            worker, instead of once inside every task; a process pool still pickles it per run.

        Returns
        -------
        iterator of Outcome
            In completion order (in input order in process).

        Raises
        ------
        InputError
            If ``labels`` does not have one label per item.
        """
        listed = list(items)
        names = _labels(labels, len(listed))
        for outcome in self._run(func, listed, names, shared):
            if progress is not None:
                progress(outcome)
            yield outcome

    def _run(self, func: Callable[..., Any], items: list[Any], labels: list[str], shared: Any) -> Iterator[Outcome]:
        for i, item in enumerate(items):
            ok, value = call_safely(func, item, shared)
            yield _outcome(labels, items, i, ok, value)


def _labels(labels: Sequence[str] | None, n_items: int) -> list[str]:
    if labels is None:
        return [str(i) for i in range(n_items)]
    names = [str(x) for x in labels]
    if len(names) != n_items:
        raise InputError(f"Executor.map: labels must have one entry per item ({n_items}), got {len(names)}")
    return names


def _outcome(labels: list[str], items: list[Any], i: int, ok: bool, value: Any) -> Outcome:
    return Outcome(labels[i], value if ok else None, None if ok else str(value), items[i], i)


class InProcessExecutor(Executor):
    """Runs one after another in this process: no start-up cost, easiest to debug."""

    kind = "inprocess"


class ProcessPoolRunner(Executor):
    """A local :class:`concurrent.futures.ProcessPoolExecutor` (spawned processes, one run each)."""

    kind = "processes"

    def __init__(self, workers: int | None = None) -> None:
        self._workers = workers or max(1, multiprocessing.cpu_count())
        # spawn, not fork: the parent may hold solver or BLAS threads that a fork would copy mid-state
        self._pool = cf.ProcessPoolExecutor(max_workers=self._workers, mp_context=multiprocessing.get_context("spawn"))

    @property
    def n_workers(self) -> int:
        return self._workers

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)

    def _run(self, func: Callable[..., Any], items: list[Any], labels: list[str], shared: Any) -> Iterator[Outcome]:
        # NOTHING does not survive pickling as itself: pass ``shared`` only when there is one
        extra = () if shared is NOTHING else (shared,)
        futures = {self._pool.submit(call_safely, func, item, *extra): i for i, item in enumerate(items)}
        for future in cf.as_completed(futures):
            i = futures[future]
            try:
                ok, value = future.result()
            except Exception as err:  # noqa: BLE001 - a dead worker or an unpicklable item or result
                ok, value = False, _describe(err)
            yield _outcome(labels, items, i, ok, value)


class DaskRunner(Executor):
    """A ``dask.distributed`` client: a new LocalCluster, or an existing scheduler by address."""

    kind = "dask"

    def __init__(self, workers: int | None = None, scheduler: str | None = None, *, connect_timeout: float = 30.0) -> None:
        distributed = _import_distributed()
        self._cluster = None
        self._closed = False
        if scheduler is not None:
            try:
                self._client = distributed.Client(scheduler, timeout=f"{connect_timeout}s")
            except (OSError, TimeoutError) as err:
                raise InputError(f"--scheduler {scheduler}: could not connect to a Dask scheduler ({_describe(err)})") from None
        else:
            n_workers = workers or 2
            with worker_environment():
                self._cluster = distributed.LocalCluster(**local_cluster_options(n_workers))
                try:
                    self._client = distributed.Client(self._cluster, timeout=f"{connect_timeout}s")
                    # Worker processes import numpy, pandas and trimtab: slow on a loaded machine.
                    self._client.wait_for_workers(n_workers, timeout=max(connect_timeout, STARTUP_TIMEOUT))
                except BaseException:
                    self._cluster.close(timeout=CLOSE_TIMEOUT)
                    raise
        self._as_completed = distributed.as_completed

    @property
    def client(self) -> Any:
        """The ``distributed.Client`` in use."""
        return self._client

    @property
    def n_workers(self) -> int:
        return max(1, len(self._client.scheduler_info().get("workers", {})))

    def close(self) -> None:
        """Close the client, then the cluster this runner started (also when closing the client fails)."""
        if self._closed:
            return
        self._closed = True
        try:
            self._client.close(timeout=CLOSE_TIMEOUT)
        finally:
            if self._cluster is not None:
                self._cluster.close(timeout=CLOSE_TIMEOUT)

    @contextmanager
    def sharing(self, shared: Any) -> Iterator[Any]:
        handle = self._client.scatter(shared, broadcast=True, hash=False)
        try:
            yield _Scattered(handle)
        finally:
            handle.release()

    def _run(self, func: Callable[..., Any], items: list[Any], labels: list[str], shared: Any) -> Iterator[Outcome]:
        # the shared part travels once to each worker, not inside every task of the graph
        handle = None
        if isinstance(shared, _Scattered):  # scattered once by sharing() for several map calls
            yield from self._submit(func, items, labels, (shared.future,))
            return
        if shared is not NOTHING:
            try:
                handle = self._client.scatter(shared, broadcast=True, hash=False)
            except Exception as err:  # noqa: BLE001 - e.g. it does not pickle: every run fails alike
                for i in range(len(items)):
                    yield _outcome(labels, items, i, False, f"the shared inputs could not be sent: {_describe(err)}")
                return
        try:
            yield from self._submit(func, items, labels, () if handle is None else (handle,))
        finally:
            if handle is not None:
                handle.release()

    def _submit(self, func: Callable[..., Any], items: list[Any], labels: list[str], extra: tuple[Any, ...]) -> Iterator[Outcome]:
        # a fresh key per call: a key repeated by a later map() could be served the earlier result
        call = uuid.uuid4().hex[:12]
        futures = [self._client.submit(call_safely, func, item, *extra, pure=False,
                                       key=f"trimtab-{labels[i]}-{call}-{i}") for i, item in enumerate(items)]
        index = {f.key: i for i, f in enumerate(futures)}
        for future in self._as_completed(futures):
            i = index[future.key]
            try:
                ok, value = future.result()
            except Exception as err:  # noqa: BLE001 - a lost worker or a pickling failure
                ok, value = False, _describe(err)
            future.release()
            yield _outcome(labels, items, i, ok, value)


class _Scattered:
    """A value scattered to every worker by :meth:`DaskRunner.sharing`."""

    def __init__(self, future: Any) -> None:
        self.future = future


#: Seconds to wait for a new LocalCluster's workers, and for a client or cluster to close. Generous:
#: on a machine whose cores are busy, starting a worker process takes many seconds.
STARTUP_TIMEOUT = 120.0
CLOSE_TIMEOUT = 60.0


#: Variables of dask's ``distributed.nanny.pre-spawn-environ`` that trimtab's workers start without.
#: ``MALLOC_TRIM_THRESHOLD_=65536`` makes glibc return freed memory to the system at every free of a
#: block over 64 KiB: a re-solve allocates and frees N×K work arrays each iteration, so a worker paid
#: about 330k page faults a 24-point sweep at 5,000 × 50 and re-solved at 64–69 ms a point against
#: 44–48 ms in the parent process (#21). A value the user set in the environment is still inherited.
WORKER_ENV_UNSET = ("MALLOC_TRIM_THRESHOLD_",)


@contextmanager
def worker_environment() -> Iterator[None]:
    """Start a LocalCluster's workers without :data:`WORKER_ENV_UNSET`, and leave this process's
    environment as it was found.

    Dask's nanny writes ``pre-spawn-environ`` into ``os.environ`` of the process that starts the
    workers (``Nanny.start`` in distributed/nanny.py: ``os.environ.update(self.pre_spawn_env)``), so
    a LocalCluster changes its parent's environment (and every process the parent starts later). The
    variables are dropped from the config (a ``None`` value unsets one, ``_get_env_variables`` in the
    same file), and the environment is put back as it was once the workers have started.
    """
    import dask

    before = dict(os.environ)
    unset = {f"distributed.nanny.pre-spawn-environ.{name}": None for name in WORKER_ENV_UNSET}
    try:
        with dask.config.set(unset):
            yield
    finally:
        _restore_environment(before)


def _restore_environment(before: dict[str, str]) -> None:
    for name in [k for k in os.environ if k not in before]:
        del os.environ[name]
    for name, value in before.items():
        if os.environ.get(name) != value:
            os.environ[name] = value


def local_cluster_options(n_workers: int) -> dict[str, Any]:
    """Keyword arguments of a private LocalCluster: worker processes with one thread each, everything
    on the loopback interface, no dashboard and no fixed port.

    ``dashboard_address=None`` alone still starts the scheduler's HTTP server (health and metrics
    routes) on port 8787, which clashes with any other cluster on the machine ("Port 8787 is already in
    use"); ``scheduler_kwargs`` turns the dashboard off and lets the system pick a free port.
    """
    return {
        "n_workers": n_workers,
        "threads_per_worker": 1,
        "processes": True,
        "host": "127.0.0.1",
        "scheduler_port": 0,
        "dashboard_address": None,
        "scheduler_kwargs": {"dashboard": False, "dashboard_address": "127.0.0.1:0"},
        "silence_logs": logging.ERROR,  # Dask's own notices would break the one-line rule
    }


def _import_distributed() -> Any:
    try:
        import distributed
    except ImportError:
        raise InputError(f"--executor dask needs dask.distributed, which is not installed; run: {DISTRIBUTED_HINT}") from None
    return distributed


def get_executor(
    kind: str = "inprocess", *, workers: int | None = None, scheduler: str | None = None, connect_timeout: float = 30.0
) -> Executor:
    """The executor that dispatches runs: in process, a process pool, or a Dask cluster.

    Parameters
    ----------
    kind : {"inprocess", "processes", "dask"}
        Where the runs go.
    workers : int, optional
        ``processes``: pool size (default: the CPU count). ``dask``: the number of worker processes
        of a new LocalCluster (one thread each; default 2).
    scheduler : str, optional
        ``dask`` only: the address of an existing scheduler (``tcp://host:8786``); no cluster is
        started. Cannot be combined with ``workers``.
    connect_timeout : float, default 30
        ``dask``: seconds to wait for the scheduler (a new cluster's workers get at least
        :data:`STARTUP_TIMEOUT`).

    Returns
    -------
    Executor
        Use it as a context manager so the pool or cluster is shut down.

    Raises
    ------
    InputError
        On an unknown kind, a non-positive worker count, a scheduler with a kind other than dask or
        together with workers, when dask.distributed is not installed, or when the scheduler cannot be
        reached.

    Examples
    --------
    >>> with get_executor("inprocess") as ex:
    ...     [o.value for o in ex.map(abs, [-1, 2])]
    [1, 2]
    """
    if kind not in KINDS:
        raise InputError(f"--executor: expected one of {', '.join(KINDS)}, got {kind!r}")
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise InputError(f"--workers: expected a whole number ≥ 1, got {workers!r}")
    if scheduler is not None and kind != "dask":
        raise InputError(f"--scheduler: only used with --executor dask, got --executor {kind}")
    if scheduler is not None and workers is not None:
        raise InputError("--scheduler and --workers: give one (an existing cluster has its own workers), not both")
    if kind == "inprocess":
        return InProcessExecutor()
    if kind == "processes":
        return ProcessPoolRunner(workers)
    return DaskRunner(workers, scheduler, connect_timeout=connect_timeout)


def resolve_kind(executor: str | None, workers: int | None, scheduler: str | None) -> str:
    """The command line's rule: ``--scheduler`` or ``--workers`` alone mean Dask; default in process."""
    if executor is not None:
        return executor
    if scheduler is not None or workers is not None:
        return "dask"
    return "inprocess"


def format_failure(outcome: Outcome) -> str:
    """One line for a failed run: its label, parameters and error."""
    return f"{outcome.label} (parameters {outcome.params!r}): {outcome.error}"


__all__ = [
    "DISTRIBUTED_HINT",
    "DaskRunner",
    "Executor",
    "InProcessExecutor",
    "Outcome",
    "ProcessPoolRunner",
    "call_safely",
    "format_failure",
    "get_executor",
    "resolve_kind",
]
