"""rebalance_accounts: many accounts on one model, their pooled trades priced fairly and capped together."""

from __future__ import annotations

import uuid
import warnings
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import ConvergenceWarning, InputError
from trimtab.runs._executors import Executor, InProcessExecutor, Outcome
from trimtab.runs.accounts._inputs import Account, Aggregate, check_accounts, check_aggregate
from trimtab.runs.accounts._pool import damped_prices, impact_price, pooled_shares, share_caps
from trimtab.runs.accounts._result import AccountsResult, build_result
from trimtab.runs.accounts._worker import STATUS_SOLVED, SharedInputs, Task, _Where, solve_account, solve_chunk

#: Chunks per worker: small enough that a slow chunk does not hold up a round, large enough that
#: each task carries many accounts.
CHUNKS_PER_WORKER = 4
#: A name's pooled gross above cap·(1 + CAP_SLACK) has its cap shared out (solver noise below).
CAP_SLACK = 1e-9


def rebalance_accounts(
    model: Any,
    scenario: Mapping[str, Any] | Any,
    accounts: Mapping[str, Mapping[str, Any]],
    *,
    alpha: pd.Series | None = None,
    benchmark: pd.Series | None = None,
    attributes: pd.DataFrame | None = None,
    aggregate: Mapping[str, Any] | None = None,
    executor: Executor | None = None,
    solvers: tuple[str, ...] | None = None,
    unknown_assets: str = "error",
    progress: Callable[[Outcome], None] | None = None,
) -> AccountsResult:
    """Rebalance many accounts on one model, alpha and benchmark, their pooled trades priced and capped.

    Parameters
    ----------
    model : FactorModel
    scenario : Mapping or RebalanceSpec
        The shared ``objective`` and ``constraints`` (as :func:`trimtab.rebalance` takes them).
    accounts : Mapping[str, Mapping]
        Account name → ``{"holdings": Series, "nav": float, "limits": {...}, "exclude": [...]}``.
        ``holdings`` are weights of NAV, or shares with ``"kind": "shares"`` (priced from the
        attributes' ``price`` column; ``nav`` then defaults to Σ shares·price + ``cash``).
        ``limits`` are dotted key paths under ``constraints`` (``{"tracking_error.max": 0.02}``),
        as :func:`trimtab.sweep` takes them; ``exclude`` lists assets the account must end at zero.
    alpha, benchmark, attributes
        Shared by every account, as for :func:`trimtab.rebalance`.
    aggregate : Mapping, optional
        ``max_adv_fraction`` (cap on the gross shares traded per name over all accounts, a fraction
        of ADV), ``impact`` (square-root impact coefficient η, a number or an attribute column),
        ``adv_column``, ``price_column``, ``tolerance`` (default 1e-7 of the price) and ``max_rounds``
        (default 60).
    executor : Executor, optional
        Where the chunks of accounts run (:func:`trimtab.get_executor`; default in this process).
    solvers, unknown_assets
        As for :func:`trimtab.rebalance`.
    progress : callable, optional
        Called with each chunk's outcome as it completes.

    Returns
    -------
    AccountsResult

    Raises
    ------
    ScenarioError, InputError, ModelError
        Bad scenario, shared inputs, aggregate section or accounts mapping. One account's own bad
        data, infeasible limits or solver failure is reported in its summary row instead.

    Notes
    -----
    With pooled impact, round r solves every account with the impact price πʳ added to its linear
    cost rate; the pooled gross Gᵢ = Σₖ|qₖᵢ| then sets π̂ᵢ = ηᵢ·√(Gᵢ/ADVᵢ), and the rounds stop when
    max |π̂ − πʳ| ≤ tolerance (the pooled trades have settled: :mod:`trimtab.runs.accounts._pool`).
    When the first round's pooled gross exceeds the cap in any name, every name's cap is shared out
    (:func:`~trimtab.runs.accounts._pool.share_caps`: pro rata to demand where it binds, forced trades
    first; the room left by NAV where it does not) and the accounts are held to their shares in every
    later round.

    Examples
    --------
    >>> result = rebalance_accounts(model, scenario, {"a1": {"holdings": h1, "nav": 5e6}},
    ...                             alpha=alpha, benchmark=b, attributes=attrs,
    ...                             aggregate={"max_adv_fraction": 0.05})  # doctest: +SKIP
    >>> result.summary[["status", "tracking_error"]]  # doctest: +SKIP
    """
    from trimtab.construct._data import prepare
    from trimtab.construct._problem import _long_book
    from trimtab.construct._spec import RebalanceSpec, validate_scenario
    from trimtab.construct._stress_table import check_listed_shocks

    spec = scenario if isinstance(scenario, RebalanceSpec) else validate_scenario(scenario, source="scenario")
    if spec.objective["kind"] in ("utility", "alpha") and alpha is None:
        raise InputError(f"rebalance_accounts: objective {spec.objective['kind']} needs alpha (pass alpha=...)")
    check_listed_shocks(model, spec.mapping, spec.source)
    listed = check_accounts(accounts)
    agg = check_aggregate(aggregate)
    # the shared inputs are checked once here, before any account is solved
    base = prepare(model, holdings=None, benchmark=benchmark, alpha=alpha, attributes=attributes, nav=None,
                   unknown_assets=unknown_assets, long_book=_long_book(spec))
    prices = _column(base, agg.price_column, "aggregate.price_column", positive=True, needed=agg.active)
    adv = _column(base, agg.adv_column, "aggregate.adv_column", positive=False, needed=agg.active)
    eta = _impact(base, agg, spec)
    shared = SharedInputs(uuid.uuid4().hex, model, spec, benchmark, alpha, attributes,
                          tuple(solvers) if solvers else None, unknown_assets, prices)
    runner = executor if executor is not None else InProcessExecutor()
    keep = False  # an account's full result is built on request (AccountsResult[name])
    with runner.sharing(shared) as handle:
        state = _equilibrium(runner, handle, listed, agg, prices, adv, eta, keep, progress, model.assets)
    by_name = {a.name: a for a in listed}
    final_price = state["price"]
    allot = state["allot"]

    def resolve(name: str) -> Any:
        answer = solve_account(shared, by_name[name], final_price, allot.get(name), True)
        if answer["status"] != STATUS_SOLVED:
            raise InputError(f"accounts: account {name!r} did not solve again here: {answer['reason']}")
        return answer["result"]

    cap = None if agg.max_adv_fraction is None or adv is None else agg.max_adv_fraction * adv
    settings = {"aggregate": {k: getattr(agg, k) for k in ("max_adv_fraction", "impact", "tolerance", "max_rounds")},
                "executor": runner.kind, "n_accounts": len(listed)}
    result = build_result(state["answers"], [a.name for a in listed], model, prices, adv, cap, state["capped"],
                          final_price, state["given_up"], state["rounds"], state["converged"], state["log"],
                          settings, resolve)
    if not result.converged:
        warnings.warn(f"rebalance_accounts: the pooled trades did not settle in {agg.max_rounds} rounds "
                      f"(last price change {state['log'][-1]['price_change']:.2e} > tolerance {agg.tolerance:g})",
                      ConvergenceWarning, stacklevel=2)
    return result


def _column(data: Any, name: str, path: str, *, positive: bool, needed: bool) -> np.ndarray | None:
    if data.attributes is None or name not in data.attributes.columns:
        if needed:
            data.column(name, _Where(path))  # raises, naming the key and the columns there are
        return None
    return data.column(name, _Where(path), positive=positive).to_numpy(dtype=np.float64)


def _impact(data: Any, agg: Aggregate, spec: Any) -> np.ndarray | None:
    if agg.impact is None:
        return None
    costs = spec.objective.get("costs") or {}
    if "impact" in costs:
        raise InputError("aggregate.impact: the scenario already prices impact per book (objective.costs.impact); "
                         "give one or the other, not both")
    if isinstance(agg.impact, str):
        return data.column(agg.impact, _Where("aggregate.impact")).to_numpy(dtype=np.float64)
    return np.full(data.n_assets, float(agg.impact))


def _chunks(accounts: list[Account], n_workers: int) -> list[tuple[Account, ...]]:
    n = max(1, min(len(accounts), n_workers * CHUNKS_PER_WORKER if n_workers > 1 else 1))
    bounds = np.linspace(0, len(accounts), n + 1).round().astype(int)
    return [tuple(accounts[bounds[i]:bounds[i + 1]]) for i in range(n) if bounds[i + 1] > bounds[i]]


def _round(runner: Executor, handle: Any, active: list[Account], price: np.ndarray | None,
           allot: Mapping[str, np.ndarray], keep: bool, progress: Any, warm: bool) -> dict[str, dict[str, Any]]:
    parts = _chunks(active, runner.n_workers)
    tasks = [Task(part, price, {a.name: allot[a.name] for a in part if a.name in allot}, keep, warm) for part in parts]
    answers: dict[str, dict[str, Any]] = {}
    for outcome in runner.map(solve_chunk, tasks, labels=[f"chunk{i}" for i in range(len(tasks))],
                              progress=progress, shared=handle):
        if outcome.ok:
            answers.update({a["account"]: a for a in outcome.value})
        else:  # the chunk itself was lost (a dead worker): its accounts fail, the others go on
            for account in outcome.params.accounts:
                answers[account.name] = {"account": account.name, "status": "failed", "conflict": None,
                                         "reason": f"its chunk failed: {outcome.error}"}
    return answers


def _equilibrium(runner: Executor, handle: Any, listed: list[Account], agg: Aggregate, prices: np.ndarray | None,
                 adv: np.ndarray | None, eta: np.ndarray | None, keep: bool, progress: Any,
                 assets: pd.Index) -> dict[str, Any]:
    """Rounds of solves until the pooled trades settle; the caps shared out as they bind."""
    n = 0 if adv is None else len(adv)
    price = None
    allot: dict[str, np.ndarray] = {}
    capped = np.zeros(n, dtype=bool)
    cap = None if agg.max_adv_fraction is None or adv is None else agg.max_adv_fraction * adv
    answers: dict[str, dict[str, Any]] = {}
    active = list(listed)
    log: list[dict[str, Any]] = []
    given: list[dict[str, Any]] = []
    memory: tuple[np.ndarray, np.ndarray] | None = None
    converged, rounds, warm = False, 0, True
    seen = price
    for rounds in range(1, agg.max_rounds + 1):
        seen = price  # the prices this round's solves see
        answers.update(_round(runner, handle, active, price, allot, keep, progress, warm))
        warm = True
        active = [a for a in active if answers[a.name]["status"] == STATUS_SOLVED]
        if not agg.active or not active:
            converged = True
            break
        assert prices is not None and adv is not None
        navs = np.array([answers[a.name]["nav"] for a in active])
        trades = np.vstack([answers[a.name]["weights"] - answers[a.name]["holdings"] for a in active])
        shares = pooled_shares(trades, navs, prices)
        gross = np.abs(shares).sum(axis=0)
        newly = np.zeros(n, dtype=bool)
        if cap is not None and not allot and (gross > cap * (1.0 + CAP_SLACK) + 1e-6).any():
            newly = gross > cap
            forced = np.zeros_like(shares)
            for k, a in enumerate(active):
                for i, need in answers[a.name].get("forced", {}).items():
                    forced[k, i] = need * navs[k] / prices[i]
            shared_out = share_caps(cap, shares, forced, navs)
            allot.update({a.name: shared_out[k] for k, a in enumerate(active)})
            rows, cols = np.nonzero(newly[None, :] & (np.abs(shares) > 0))
            given.extend({"account": active[k].name, "asset": int(i), "demand": abs(float(shares[k, i])),
                          "allotted": float(shared_out[k, i])} for k, i in zip(rows, cols, strict=True))
            capped |= newly
            warm = False  # the next round's bounds are new: its solves start cold
        change = 0.0
        if eta is not None:
            target = impact_price(eta, gross, adv)
            current = np.zeros(n) if price is None else price
            change = float(np.max(np.abs(target - current))) if n else 0.0
            price, memory = damped_prices(current, target, memory)
        log.append({"round": rounds, "price_change": change, "capped": int(capped.sum()), "solved": len(active)})
        if not newly.any() and change <= agg.tolerance:
            converged = True
            break
    return {"answers": answers, "price": seen, "allot": allot, "capped": capped, "rounds": rounds,
            "converged": converged, "log": log, "given_up": _given_up(given, prices, assets)}


def _given_up(given: list[dict[str, Any]], prices: np.ndarray | None, assets: pd.Index) -> pd.DataFrame:
    columns = ["account", "asset", "demand", "allotted", "given_up", "given_up_notional"]
    if not given or prices is None:
        return pd.DataFrame(columns=columns)
    frame = pd.DataFrame(given)
    frame["given_up"] = (frame["demand"] - frame["allotted"]).clip(lower=0.0)
    frame["given_up_notional"] = frame["given_up"] * prices[frame["asset"].to_numpy()]
    frame["asset"] = assets[frame["asset"].to_numpy()]
    return frame[columns]
