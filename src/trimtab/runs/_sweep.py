"""Parameter sweeps: one scenario, a grid (or list) of parameter values, one table across the grid.

The rebalance problem is built once per chunk of points and re-solved with each point's values
(risk aversion, limits), so the build is paid once and not once per point. Chunks go through the
executor; a point that fails is recorded with its parameters and the others are kept.
"""

from __future__ import annotations

import copy
import itertools
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InfeasibleError, InputError, ScenarioError, SolverError, TrimtabError
from trimtab.model import FactorModel
from trimtab.runs._executors import Executor, InProcessExecutor, Outcome

#: Objective keys a bare name refers to (anything else is a constraint path).
OBJECTIVE_KEYS = ("risk_aversion", "cost_aversion", "maximize", "minimize")
STATUS_FAILED = "failed"
#: The figures every row has (NaN when the point did not solve).
FIGURES = ("built", "tracking_error", "total_risk", "turnover", "expected_alpha", "n_holdings")


# ---------------------------------------------------------------------------------------------
# Keys and points
# ---------------------------------------------------------------------------------------------
def key_path(key: str) -> tuple[str, ...]:
    """The full path of a sweep key inside a scenario mapping.

    ``risk_aversion`` → (objective, risk_aversion); ``tracking_error.max`` → (constraints,
    tracking_error, max); ``constraints.…`` and ``objective.…`` are taken as written.
    """
    if not isinstance(key, str) or not key or any(not part for part in key.split(".")):
        raise InputError(f"sweep: parameter names are dotted key paths like tracking_error.max, got {key!r}")
    parts = tuple(key.split("."))
    if parts[0] in ("objective", "constraints"):
        if len(parts) < 2:
            raise InputError(f"sweep: parameter {key!r} names a whole section; give a key inside it")
        return parts
    if parts[0] in OBJECTIVE_KEYS:
        return ("objective", *parts)
    return ("constraints", *parts)


def short_key(path: Sequence[str]) -> str:
    """The name shown in tables: the path without ``objective.`` / ``constraints.``."""
    return ".".join(path[1:])


def apply_point(scenario: Mapping[str, Any], point: Mapping[str, Any]) -> dict[str, Any]:
    """A deep copy of ``scenario`` with each dotted key set to its value (missing levels created;
    a numeric part indexes a list, as in ``factor_exposure.bounds.momentum.1``)."""
    out = copy.deepcopy(dict(scenario))
    for key, value in point.items():
        path = key_path(key)
        node: Any = out
        for depth, part in enumerate(path[:-1]):
            nxt = _child(node, part, key)
            if nxt is None:
                nxt = {}
                _set(node, part, nxt, key)
            elif not isinstance(nxt, (dict, list)):
                raise InputError(f"sweep: parameter {key}: {'.'.join(path[: depth + 1])} is a value, not a section")
            node = nxt
        _set(node, path[-1], copy.deepcopy(value), key)
    return out


def _child(node: Any, part: str, key: str) -> Any:
    if isinstance(node, list):
        return node[_list_index(node, part, key)]
    if part not in node:
        return None
    if isinstance(node[part], Mapping) and not isinstance(node[part], dict):
        node[part] = dict(node[part])
    return node[part]


def _set(node: Any, part: str, value: Any, key: str) -> None:
    if isinstance(node, list):
        node[_list_index(node, part, key)] = value
    else:
        node[part] = value


def _list_index(node: list, part: str, key: str) -> int:
    if part in ("min", "max") and len(node) == 2:  # the ends of an interval [lower, upper]
        return 0 if part == "min" else 1
    if not part.isdigit() or int(part) >= len(node):
        raise InputError(f"sweep: parameter {key}: {part!r} is not a position in a list of {len(node)}")
    return int(part)


def grid_points(grid: Mapping[str, Sequence[Any]] | Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """The points of a grid: the Cartesian product of a mapping key → values, or a list of points."""
    if isinstance(grid, Mapping):
        if not grid:
            raise InputError("sweep: the grid is empty; give parameter → list of values")
        keys = list(grid)
        values = []
        for key in keys:
            options = grid[key]
            if isinstance(options, (str, bytes)) or not isinstance(options, Sequence) or len(options) == 0:
                raise InputError(f"sweep: grid[{key!r}] must be a non-empty list of values, got {options!r}")
            values.append(list(options))
        points = [dict(zip(keys, combo)) for combo in itertools.product(*values)]
    else:
        points = [dict(p) for p in grid] if isinstance(grid, Sequence) and all(isinstance(p, Mapping) for p in grid) else []
        if not points:
            raise InputError("sweep: the grid must be a mapping parameter → values or a non-empty list of points (mappings)")
    for point in points:
        for key in point:
            key_path(key)
    labels = pd.Index([point_label(p) for p in points])
    if labels.has_duplicates:
        raise InputError(f"sweep: the grid repeats points: {list_labels(labels[labels.duplicated()].unique())}")
    return points


def point_label(point: Mapping[str, Any]) -> str:
    """``risk_aversion=5, tracking_error.max=0.02``."""
    return ", ".join(f"{short_key(key_path(k))}={_value_text(v)}" for k, v in point.items())


def _value_text(value: Any) -> str:
    """Floats with at most 10 significant digits (0.045, not 0.045000000000000005)."""
    if isinstance(value, (float, np.floating)):
        return f"{float(value):.10g}"
    return str(value)


# ---------------------------------------------------------------------------------------------
# Solving a chunk of points on one built problem
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class SweepTask:
    """A chunk of points sharing one built problem."""

    points: tuple[dict[str, Any], ...]


@dataclass(frozen=True, eq=False)
class SweepInputs:
    """What every chunk of a sweep reads alike (sent once to each worker)."""

    model: FactorModel
    scenario: Mapping[str, Any]
    inputs: Mapping[str, Any]
    reuse: bool = True
    keep_results: bool = False
    build: Callable[..., Any] | None = None


def _re_solve_arguments(base: Mapping[str, Any], point: Mapping[str, Any]) -> dict[str, Any]:
    """The re-solve keywords for a point: λ and a flat map of changed limits (dotted, under constraints)."""
    changes: dict[str, Any] = {}
    limits: dict[str, Any] = {}
    for key, value in point.items():
        path = key_path(key)
        if path == ("objective", "risk_aversion"):
            changes["risk_aversion"] = value
        elif path[0] == "constraints":
            limits[short_key(path)] = value
        else:
            raise _Rebuild(f"{short_key(path)} changes the problem's structure")
    if limits:
        changes["limits"] = limits
    return changes


class _Rebuild(Exception):
    """This point cannot be a re-solve of the built problem; build afresh."""


def _resolve(problem: Any, arguments: Mapping[str, Any]) -> Any:
    """Solve a built problem, with new values when given (``RebalanceProblem.solve(**changes)``)."""
    return problem.solve(**arguments)


def figures(model: FactorModel, result: Any, inputs: Mapping[str, Any]) -> dict[str, Any]:
    """The table row of one solved point, computed from its weights (not from the solver's report):
    forecast TE √(P·aᵀΣa), total risk, one-way turnover ½Σ|w − w₀|, expected active alpha αᵀa, and
    the objective's parts when the result carries them."""
    weights = model.weights_array(result.weights.reindex(model.assets).fillna(0.0), name="weights")
    bench = inputs.get("benchmark")
    b = model.weights_array(bench, name="benchmark") if bench is not None else np.zeros(model.n_assets)
    w0 = model.weights_array(inputs["holdings"], name="holdings")
    alpha = inputs.get("alpha")
    a = model.weights_array(alpha, name="alpha") if alpha is not None else np.zeros(model.n_assets)
    row: dict[str, Any] = {
        "tracking_error": model.volatility(weights - b),
        "total_risk": model.volatility(weights),
        "turnover": 0.5 * float(np.abs(weights - w0).sum()),
        "expected_alpha": float(a @ (weights - b)),
        "n_holdings": int((np.abs(weights) > 1e-8).sum()),
    }
    hedge = getattr(result, "overlay", None)
    if hedge is not None and inputs.get("overlay") is not None:
        # the hedged book w + Σⱼ hⱼ·basketⱼ, from the notionals and the baskets themselves
        hedged = weights.copy()
        for name, notional in hedge.notional.items():
            basket = inputs["overlay"]["instruments"][name].reindex(model.assets, fill_value=0.0)
            hedged = hedged + float(notional) * basket.to_numpy(dtype=np.float64)
        row["hedged_tracking_error"] = model.volatility(hedged - b)
        row["hedged_total_risk"] = model.volatility(hedged)
        row["overlay_gross"] = float(hedge.notional.abs().sum())
        for name, notional in hedge.notional.items():
            row[f"overlay.{name}"] = float(notional)
    parts = getattr(result, "objective", None)
    if isinstance(parts, (Mapping, pd.Series)):
        for name, value in dict(parts).items():
            try:
                row[f"objective.{name}"] = float(value)
            except (TypeError, ValueError):
                continue
    return row


def run_chunk(task: SweepTask, shared: SweepInputs) -> list[dict[str, Any]]:
    """Solve a chunk: build the problem for its first point, re-solve it for the others.

    A point whose values cannot be a re-solve (a structural change) is solved afresh; an
    infeasible point, a solver failure or bad values are recorded in its row.
    """
    build = shared.build
    if build is None:
        from trimtab.construct import build_problem

        build = build_problem

    rows: list[dict[str, Any]] = []
    problem = None
    unreachable: set[frozenset[str]] = set()  # parameter sets the built problem refused to re-solve
    for point in task.points:
        row: dict[str, Any] = {"label": point_label(point), **{short_key(key_path(k)): v for k, v in point.items()}}
        started = time.perf_counter()
        keys = frozenset(point)
        try:
            result = None
            if shared.reuse and problem is not None and keys not in unreachable:
                try:
                    result = _resolve(problem, _re_solve_arguments(shared.scenario, point))
                    row["built"] = False
                except (_Rebuild, ScenarioError):
                    # not a change the built problem can take (a structural change, or a key path
                    # its limits do not reach): build this point afresh, and the next ones like it
                    unreachable.add(keys)
                    result = None
            if result is None:
                problem = build(shared.model, apply_point(shared.scenario, point), **shared.inputs)
                result = _resolve(problem, {})
                row["built"] = True
            row.update(status="solved", **figures(shared.model, result, shared.inputs))
            if shared.keep_results:
                row["result"] = result
        except InfeasibleError as err:
            row.update(status="infeasible", error=_infeasible_line(err))
        except SolverError as err:
            row.update(status="solver failure", error=_first_line(err))
        except TrimtabError as err:
            row.update(status=STATUS_FAILED, error=_first_line(err))
        row["seconds"] = time.perf_counter() - started
        rows.append(row)
    return rows


def _check_point(scenario: Mapping[str, Any], point: Mapping[str, Any]) -> None:
    """Refuse a grid point whose values the scenario's own checks refuse (a 3 for a 3% cap, say).

    A bad value is the user's mistake in the grid, so it fails the whole sweep before anything is
    solved (exit 2 on the command line) instead of becoming one failed row among the others.
    """
    from trimtab.construct._spec import validate_scenario

    applied = apply_point(scenario, point)
    sections = {key: applied[key] for key in ("objective", "constraints") if key in applied}
    try:
        validate_scenario(sections, source="scenario")
    except ScenarioError as err:
        raise InputError(f"grid point {point_label(point)}: {_first_line(err).removeprefix('scenario: ')}") from None


def _first_line(err: BaseException) -> str:
    text = str(err).strip().splitlines()
    return text[0] if text else type(err).__name__


def _infeasible_line(err: InfeasibleError) -> str:
    """The conflict, pointing to what exists: a sweep writes no relaxation table, a rebalance does."""
    text = _first_line(err)
    tails = ("; any one of", "; the relaxation table")
    if not any(tail in text for tail in tails):
        return text
    text = text.split("infeasible: ", 1)[1] if "infeasible: " in text else text
    for tail in tails:
        text = text.split(tail, 1)[0]
    return f"{text} (trimtab rebalance at this point prints how far each must move)"


# ---------------------------------------------------------------------------------------------
# Result and entry point
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class SweepResult:
    """One table across the grid.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per point, in grid order, indexed by label: the parameter values, ``status``
        (solved, infeasible, solver failure, failed), the forecast ``tracking_error`` and
        ``total_risk`` (annualised), one-way ``turnover``, ``expected_alpha``, ``n_holdings``,
        the objective's parts (``objective.*``), ``built`` (the problem was built for this point,
        not re-solved), ``seconds`` and ``error``.
    parameters : list of str
        The swept parameters, as shown in the table.
    results : Mapping[str, Any]
        Label → RebalanceResult, when asked for with ``keep_results``.
    """

    table: pd.DataFrame
    parameters: list[str]
    results: Mapping[str, Any] = field(default_factory=dict)

    @property
    def failed(self) -> pd.DataFrame:
        """The rows that did not solve, with their parameters and error."""
        return self.table[self.table["status"] != "solved"]

    def summary(self) -> str:
        """Counts by status and the range of TE and expected alpha over the solved points."""
        counts = self.table["status"].value_counts()
        text = f"Sweep over {', '.join(self.parameters)}: {len(self.table)} points; " + ", ".join(
            f"{n} {status}" for status, n in counts.items()
        )
        solved = self.table[self.table["status"] == "solved"]
        if len(solved):
            text += (
                f"; tracking error {solved['tracking_error'].min():.2%}–{solved['tracking_error'].max():.2%}, "
                f"expected alpha {solved['expected_alpha'].min():.2%}–{solved['expected_alpha'].max():.2%}"
            )
        return text


def chunks(points: Sequence[dict[str, Any]], n_chunks: int) -> list[tuple[dict[str, Any], ...]]:
    """Split points into at most ``n_chunks`` contiguous runs (neighbours in the grid stay together)."""
    n = max(1, min(n_chunks, len(points)))
    bounds = np.linspace(0, len(points), n + 1).round().astype(int)
    return [tuple(points[bounds[i] : bounds[i + 1]]) for i in range(n) if bounds[i + 1] > bounds[i]]


def sweep(
    model: FactorModel,
    scenario: Mapping[str, Any],
    grid: Mapping[str, Sequence[Any]] | Sequence[Mapping[str, Any]],
    *,
    holdings: pd.Series,
    benchmark: pd.Series | None = None,
    alpha: pd.Series | None = None,
    attributes: pd.DataFrame | None = None,
    nav: float | None = None,
    executor: Executor | None = None,
    reuse: bool = True,
    keep_results: bool = False,
    build: Callable[..., Any] | None = None,
    progress: Callable[[Outcome], None] | None = None,
    overlay: Mapping[str, Any] | None = None,
) -> SweepResult:
    """Solve one scenario at every point of a parameter grid.

    Parameters
    ----------
    model : FactorModel
    scenario : Mapping
        ``objective`` and ``constraints`` sections, as :func:`trimtab.rebalance` takes them.
    grid : Mapping[str, sequence] or sequence of Mapping
        Parameter → values (every combination is solved), or an explicit list of points. A
        parameter is a dotted key path into the scenario: ``risk_aversion`` (objective),
        ``tracking_error.max``, ``turnover.max``, ``factor_exposure.bounds.momentum`` (constraints;
        a leading ``constraints.`` or ``objective.`` may be written).
    holdings, benchmark, alpha, attributes, nav, overlay
        As for :func:`trimtab.rebalance`; with an overlay the table adds the hedged book's
        ``hedged_tracking_error`` and ``hedged_total_risk``, ``overlay_gross`` and each
        instrument's notional (``overlay.<name>``).
    executor : Executor, optional
        Where chunks of points run (default: in this process, one chunk).
    reuse : bool, default True
        Build the problem once per chunk and re-solve it; False builds and solves every point
        afresh (the baseline of the speed benchmark).
    keep_results : bool, default False
        Keep every point's RebalanceResult in :attr:`SweepResult.results`.
    build : callable, optional
        The problem builder, with :func:`trimtab.construct.build_problem`'s signature (default:
        it); for ``processes`` a module-level function.
    progress : callable, optional
        Called with each chunk's :class:`Outcome` as it completes.

    Returns
    -------
    SweepResult

    Raises
    ------
    InputError
        On an empty or malformed grid or a parameter that is not a key path.

    Notes
    -----
    Each row's figures are recomputed from the returned weights w: tracking error √(P·aᵀΣa) with
    a = w − b, turnover ½Σ|w − w₀|, expected alpha αᵀa.

    Examples
    --------
    >>> result = sweep(model, scenario, {"tracking_error.max": [0.01, 0.02, 0.03]},
    ...                holdings=h, benchmark=b, alpha=a)  # doctest: +SKIP
    >>> result.table[["tracking_error", "expected_alpha"]]  # doctest: +SKIP
    """
    if not isinstance(scenario, Mapping) or "objective" not in scenario:
        raise InputError("sweep: scenario must be a mapping with an objective section")
    points = grid_points(grid)
    for point in points:
        # every path must be settable, and (for trimtab's own builder) every point a valid scenario,
        # before anything is solved
        _check_point(scenario, point) if build is None else apply_point(scenario, point)
    inputs = {"holdings": holdings, "benchmark": benchmark, "alpha": alpha, "attributes": attributes}
    if nav is not None:
        inputs["nav"] = nav
    if overlay is not None:
        inputs["overlay"] = overlay
    inputs = {k: v for k, v in inputs.items() if v is not None or k == "benchmark"}
    runner = executor if executor is not None else InProcessExecutor()
    parts = chunks(points, runner.n_workers)
    tasks = [SweepTask(part) for part in parts]
    shared = SweepInputs(model, dict(scenario), inputs, reuse, keep_results, build)
    order = {point_label(p): i for i, p in enumerate(points)}
    rows: list[dict[str, Any]] = []
    for outcome in runner.map(run_chunk, tasks, labels=[f"chunk{i}" for i in range(len(tasks))], progress=progress,
                              shared=shared):
        if outcome.ok:
            rows.extend(outcome.value)
        else:
            for point in outcome.params.points:
                rows.append({"label": point_label(point), **{short_key(key_path(k)): v for k, v in point.items()},
                             "status": STATUS_FAILED, "error": outcome.error})
    rows.sort(key=lambda r: order.get(r["label"], len(order)))
    results = {r["label"]: r.pop("result") for r in rows if "result" in r}
    table = pd.DataFrame(rows).set_index("label")
    for column in FIGURES:
        if column not in table.columns:
            table[column] = np.nan
    if "error" not in table.columns:
        table["error"] = None
    parameters = list(dict.fromkeys(short_key(key_path(k)) for p in points for k in p))
    return SweepResult(table=table, parameters=parameters, results=results)
