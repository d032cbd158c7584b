"""Infeasibility diagnosis: the conflict set first, then the fewest limits to move and how far.

On an infeasible problem :func:`diagnose` finds the conflict set (:mod:`trimtab.construct._conflict`)
and then, for each limit of the set that is a number (not a yes/no rule such as long only), solves
the *elastic* problem in which only that limit may move: every element of it gets a slack s ≥ 0
(``value ≤ upper + s``, ``value ≥ lower − s``), every other limit of the scenario holds as written,
and Σs is minimised. When that problem is feasible, moving that one limit by its slack is a way
out on its own (an *option*); the relaxation table lists each option. When no single limit is
enough, the limits of the conflict set move together (weighted by 1/|limit| so each is measured
relative to its own size), and failing that every numeric limit of the scenario.

A limit is never proposed beyond its meaningful range: a weight, trade or band beyond ±100% of NAV
is discarded; risk caps, turnover and liquidity only ever rise from their values, so never below 0.
The table is in the user's units: weights and risk as fractions (shown as %), liquidity as the
fraction of ADV the scenario sets (``max_adv_fraction``) asset by asset.
"""

from __future__ import annotations

import contextlib
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab.construct import _diagnosis_ipm, _diagnosis_memo, _elastic_ipm, _solve
from trimtab.construct._assembly import Assembly
from trimtab.construct._conflict import (
    ELASTIC_TOL,
    FEASIBILITY_SETTINGS,
    Conflict,
    LazySolvers,
    LimitGroup,
    conflict_set,
    feasible,
    cvxpy_solvers,
    limit_groups,
    penalty,
)
from trimtab.construct._cvxpy import cp
from trimtab.construct._overlay import take_notionals
from trimtab.construct._variables import Variables
from trimtab.construct.constraints._base import Rows
from trimtab.errors import InfeasibleError

if TYPE_CHECKING:
    from trimtab.construct._problem import RebalanceProblem

COLUMNS = ["option", "constraint", "kind", "side", "limit", "needed", "relax_by", "unit"]
#: Kinds whose limits are fractions of NAV: never proposed beyond ±100%.
WEIGHT_RANGE = ("weight", "active_weight", "trade", "group", "active_group", "must_hold")
#: A relaxed limit is loosened by this much beyond the elastic optimum, so a re-solve at the
#: relaxed limits is not on the edge of feasibility (relative to the limit, at least 1e-7).
RELAX_MARGIN = 1e-6


def diagnose(problem: RebalanceProblem, extra: Sequence[Rows], attempts: list[Any], changed: Sequence[str] = (),
             seed: np.ndarray | None = None) -> None:
    """Find the conflict set and the relaxation options; raise InfeasibleError with both when infeasible.

    Returns without raising when the limits turn out to be satisfiable together (the solver's
    infeasibility was numerical). ``seed``: weights to remember as a first point (FACTOR_IPM's last
    iterate when it certified infeasibility): the elastic problems start from it with their slacks
    covering what it breaches (:func:`trimtab.construct._elastic_ipm.elastic`).
    """
    # answers one solve implies are not solved for again; not with a hedge overlay, whose points are
    # (w, h) pairs: a remembered w would be judged with another solve's notionals
    memory = contextlib.nullcontext() if getattr(problem, "hedge", None) is not None else _diagnosis_memo.remembering()
    with memory:
        _diagnosis_memo.point(seed)
        conflict = conflict_set(problem, extra, changed or getattr(problem, "changed", ()), elastic_filter(problem, extra))
        if conflict is None:
            return
        table, moves = relaxation(problem, extra, conflict)
    from trimtab.construct._conflict_text import member_sentences

    reasons = member_sentences(problem, extra, conflict, table)
    source = problem.spec.source
    head = f"{source}: infeasible: {conflict.sentence()}"
    if not table.empty:
        alone = table.loc[table["option"] != "together", "option"].nunique()
        tail = (f"; any one of {alone} moves alone restores feasibility (see the relaxation table)" if alone > 1
                else "; the relaxation table shows how far to move")
    else:
        tail = "; no relaxation of the numeric limits restores feasibility"
    raise InfeasibleError(head + tail, table, conflict=conflict.paths, reasons=reasons,
                          relaxed=(lambda: problem.relaxed(moves).solve()) if moves else None)


# ---------------------------------------------------------------------------------------------
# Elastic problems
# ---------------------------------------------------------------------------------------------
def elastic_weights(problem: RebalanceProblem, extra: Sequence[Rows], movable: Sequence[LimitGroup]) -> np.ndarray | None:
    """The weights minimising the weighted moves of ``movable`` with every other hard limit as written."""
    memo = _diagnosis_memo.current()
    known = None if memo is None else memo.moved_alone([g.path for g in movable])
    if known is not None:
        return known  # an earlier elastic optimum, over more movable limits, moved one of these alone
    weights = _elastic_weights(problem, extra, movable)
    _diagnosis_memo.point(weights)
    return weights


def _elastic_weights(problem: RebalanceProblem, extra: Sequence[Rows], movable: Sequence[LimitGroup]) -> np.ndarray | None:
    """:func:`elastic_weights` by solving."""
    if len(movable) == 1 and _diagnosis_ipm.available(problem):
        weights = _extreme(problem, extra, movable[0])
        if weights is not _diagnosis_ipm.UNANSWERED:
            return weights  # type: ignore[return-value]
    free: dict[int, list[LimitGroup]] = {}
    for g in movable:
        free.setdefault(id(g.rows), []).append(g)
    if _diagnosis_ipm.available(problem):
        weights = _elastic_ipm.elastic(problem, [r for r in problem.all_rows(extra) if r.soft is None],
                                       _movable_elements(problem, extra, free))
        if weights is not _diagnosis_ipm.UNANSWERED:
            return weights  # type: ignore[return-value]
    variables = Variables(problem.data)
    assembly = Assembly(variables)
    for rows in problem.all_rows(extra):
        if rows.soft is not None:
            continue  # a soft limit never blocks
        groups = free.get(id(rows))
        if not groups:
            assembly.add(rows)
            continue
        whole = any(g.index is None for g in groups)
        index = None if whole else np.concatenate([g.index for g in groups])  # type: ignore[misc]
        soft = replace(rows, soft=penalty(rows, index))
        if whole:
            assembly.add(soft)
            continue
        mask = np.zeros(rows.size, dtype=bool)
        mask[index] = True
        assembly.add(replace(rows, lower=np.where(mask, -np.inf, rows.lower), upper=np.where(mask, np.inf, rows.upper)))
        assembly.add(replace(soft, lower=np.where(mask, rows.lower, -np.inf), upper=np.where(mask, rows.upper, np.inf)))
    cvx = cp.Problem(cp.Minimize(assembly.penalty), assembly.finish())
    solvers = cvxpy_solvers(problem)
    # each solver's own tolerances (1e-8) first, as for the feasibility tests: which groups moved, and
    # by how much to the displayed digits, needs no 1e-10; the tight settings remain as the fall-back
    for solver, settings in [(s, FEASIBILITY_SETTINGS.get(s, {})) for s in solvers] + _solve.plan(solvers):
        attempt = _solve.run(cvx, solver, settings)
        if attempt.status == cp.OPTIMAL and variables.w.value is not None:
            take_notionals(problem, variables)
            return np.asarray(variables.w.value, dtype=np.float64)
        if attempt.status in _solve.INFEASIBLE:
            return None
    return None


def _movable_elements(problem: RebalanceProblem, extra: Sequence[Rows],
                      free: dict[int, list[LimitGroup]]) -> dict[int, tuple[np.ndarray, float]]:
    """id(rows) → (its movable elements, their price), as elastic_weights prices them."""
    out: dict[int, tuple[np.ndarray, float]] = {}
    for rows in problem.all_rows(extra):
        groups = free.get(id(rows))
        if not groups or rows.soft is not None:
            continue
        whole = any(g.index is None for g in groups)
        index = None if whole else np.concatenate([g.index for g in groups])  # type: ignore[misc]
        mask = np.ones(rows.size, dtype=bool) if index is None else np.isin(np.arange(rows.size), index)
        out[id(rows)] = (mask, penalty(rows, index))
    return out


def _extreme(problem: RebalanceProblem, extra: Sequence[Rows], group: LimitGroup) -> object:
    """One group movable, in factor form (:func:`trimtab.construct._diagnosis_ipm.extreme`): the
    other hard limits as written, the group's own elements free in its block."""
    others: list[Rows] = []
    for rows in problem.all_rows(extra):
        if rows.soft is not None:
            continue
        if rows is not group.rows:
            others.append(rows)
        elif group.index is not None:
            mask = np.zeros(rows.size, dtype=bool)
            mask[group.index] = True
            others.append(replace(rows, lower=np.where(mask, -np.inf, rows.lower), upper=np.where(mask, np.inf, rows.upper)))
    return _diagnosis_ipm.extreme(problem, others, group.restricted())


def elastic_filter(problem: RebalanceProblem, extra: Sequence[Rows]) -> list[str] | None:
    """Groups that are infeasible together, by the elastic filter (Chinneck 2008, ch. 6): solve the
    elastic problem, make every group it had to move hard, repeat until the hard groups alone are
    infeasible. The result holds a conflict set, usually with few other groups, so the deletion
    filter that follows need not visit every group of the scenario. None when it finds nothing."""
    groups = limit_groups(problem, extra)
    enforced: list[LimitGroup] = []
    memo = _diagnosis_memo.current()
    for _ in range(len(groups)):
        if len(enforced) > 1 and feasible(problem, [g.restricted() for g in enforced], LazySolvers(problem)) is False:
            # the hard groups alone cannot hold, so the next elastic problem has no solution: its answer,
            # from a feasibility test (a Farkas certificate) the deletion filter then asks again for free
            return [g.path for g in enforced]
        movable = [g for g in groups if g not in enforced]
        weights = elastic_weights(problem, extra, movable) if movable else None
        if weights is None:
            return [g.path for g in enforced] or None
        moved = [g for g in movable if _moves(problem, g, weights)]
        if not moved:
            return None
        if len(moved) == 1 and memo is not None and _one_element(moved[0]):
            memo.remember_alone(moved[0].path, [g.path for g in movable], weights)
        enforced.extend(moved)
    return None


def _one_element(group: LimitGroup) -> bool:
    """The group bounds one number (a cap, one row, one band): its elastic optimum's move is unique.
    A group of many elements (per-asset caps) has many optimal ways to share a move between them."""
    rows = group.restricted()
    return not rows.box and int(np.count_nonzero(np.isfinite(rows.lower) | np.isfinite(rows.upper))) == 1


def relaxation(problem: RebalanceProblem, extra: Sequence[Rows], conflict: Conflict) -> tuple[pd.DataFrame, list[dict[str, Any]]]:
    """The relaxation table (options, each alone enough) and the moves of the first option."""
    numeric = [g for g in conflict.groups if not g.rule]
    records: list[dict[str, Any]] = []
    first: list[dict[str, Any]] = []
    option = 0
    for group in numeric:
        weights = elastic_weights(problem, extra, [group])
        if weights is None:
            continue
        moves = _moves(problem, group, weights)
        if not moves or not _meaningful(moves):
            continue
        option += 1
        records.extend({"option": str(option), **m} for m in moves)
        first = first or moves
    if records and len(numeric) > 1:  # beside the single-limit options, the joint one (issue #19)
        weights = elastic_weights(problem, extra, numeric)
        moves = [m for g in numeric for m in _moves(problem, g, weights)] if weights is not None else []
        if len({m["constraint"].split("[")[0] for m in moves}) > 1 and _meaningful(moves):
            records.extend({"option": "together", **m} for m in moves)
    if not records:
        for movable in (numeric, [g for g in limit_groups(problem, extra) if not g.rule]):
            weights = elastic_weights(problem, extra, movable) if movable else None
            if weights is None:
                continue
            moves = [m for g in movable for m in _moves(problem, g, weights)]
            if moves and _meaningful(moves):
                records = [{"option": "together", **m} for m in moves]
                first = moves
                break
    table = pd.DataFrame.from_records([{k: r[k] for k in COLUMNS} for r in records], columns=COLUMNS)
    return table, first


def _moves(problem: RebalanceProblem, group: LimitGroup, weights: np.ndarray) -> list[dict[str, Any]]:
    """One record per element of the group breached at ``weights``: limit, needed value, move, in user units."""
    rows = group.rows
    value = np.asarray(rows.evaluate(weights), dtype=np.float64)
    elements = range(rows.size) if group.index is None else group.index
    per_unit = _liquidity_per_fraction(problem) if group.key == "liquidity" else None
    out: list[dict[str, Any]] = []
    for i in elements:
        for side, gap, limit in (("upper", value[i] - rows.upper[i], rows.upper[i]),
                                 ("lower", rows.lower[i] - value[i], rows.lower[i])):
            if not np.isfinite(limit) or gap <= ELASTIC_TOL * max(1.0, abs(limit)):
                continue
            label = rows.labels[i] if group.label is None and (rows.per_asset or rows.size > 1) else None
            record = {
                "constraint": group.path if label is None else f"{group.path}[{label}]",
                "kind": rows.kind, "side": side, "limit": float(limit), "needed": float(value[i]),
                "relax_by": float(gap), "unit": rows.unit, "rows": rows, "element": int(i),
                "raw_side": side, "raw_by": float(gap),
            }
            if per_unit is not None and per_unit[i] > 0:
                # the cap is fraction·days·ADV·price/NAV: the user's number is the fraction of ADV
                record.update(side="max", limit=abs(limit) / per_unit[i], needed=abs(value[i]) / per_unit[i],
                              relax_by=gap / per_unit[i], unit="fraction of ADV")
            out.append(record)
    order = sorted(out, key=lambda r: -r["relax_by"] / max(abs(r["limit"]), 0.01))
    return order


def _liquidity_per_fraction(problem: RebalanceProblem) -> np.ndarray | None:
    """Weight of NAV that one unit of ``max_adv_fraction`` allows, per asset (days·ADV·price/NAV)."""
    for c in problem.constraints:
        if c.key == "liquidity":
            cap = np.asarray(c.rows[0].upper, dtype=np.float64)
            return cap / float(c.options["max_adv_fraction"]) if c.options["max_adv_fraction"] > 0 else None
    return None


def _meaningful(moves: Sequence[dict[str, Any]]) -> bool:
    """False when a proposed limit leaves its meaningful range (a weight or band beyond ±100% of NAV)."""
    return all(abs(m["needed"]) <= 1.0 + 1e-9 for m in moves if m["kind"] in WEIGHT_RANGE)


def loosen(rows: Rows, moves: Sequence[Mapping[str, Any]]) -> Rows:
    """The rows with each moved element's limit loosened to the needed value (plus RELAX_MARGIN)."""
    lower, upper = rows.lower.copy(), rows.upper.copy()
    for m in moves:
        if m["rows"] is not rows:
            continue
        i = m["element"]
        if m["raw_side"] == "upper":
            upper[i] += m["raw_by"] + RELAX_MARGIN * max(1.0, abs(upper[i]))
        else:
            lower[i] -= m["raw_by"] + RELAX_MARGIN * max(1.0, abs(lower[i]))
    return replace(rows, lower=lower, upper=upper)
