"""trimtab.overlay: size a few hedge instruments to move a book's factor exposures at least risk."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError
from trimtab.hedge._instruments import Instruments, prepare_instruments
from trimtab.hedge._problem import quadratic, solve_capped, solve_exact
from trimtab.hedge._result import OverlayResult

MINIMIZE = ("active_risk", "total_risk")


def _targets(model: Any, targets: Mapping[str, float] | None) -> tuple[list[str], np.ndarray]:
    if targets is None:
        return [], np.zeros(0)
    if not isinstance(targets, Mapping):
        raise InputError(f"targets: expected a mapping of factor → exposure, got {type(targets).__name__}")
    unknown = [k for k in targets if k not in model.factors]
    if unknown:
        raise InputError(f"targets: unknown factors {list_labels(unknown)}; the model's factors are {list_labels(model.factors, 12)}")
    values = []
    for factor, value in targets.items():
        if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) or not math.isfinite(float(value)):
            raise InputError(f"targets[{factor!r}]: expected a finite number, got {value!r}")
        values.append(float(value))
    return [str(k) for k in targets], np.array(values)


def _contract_terms(contracts: Any, names: pd.Index, nav: float | None) -> pd.DataFrame | None:
    if contracts is None:
        return None
    table = pd.DataFrame(contracts).T if isinstance(contracts, Mapping) else pd.DataFrame(contracts)
    table.index = table.index.map(str)
    unknown = table.index.difference(names)
    if len(unknown):
        raise InputError(f"contracts: instruments not given: {list_labels(unknown)}; the instruments are {list_labels(names)}")
    allowed = {"price", "multiplier", "cost", "held"}
    extra = [c for c in table.columns if c not in allowed]
    if extra:
        raise InputError(f"contracts: unknown columns {list_labels(extra)}; allowed: price, multiplier, cost, held")
    for column in ("price", "multiplier"):
        if column not in table.columns:
            raise InputError(f"contracts: missing column {column!r} (columns: price, multiplier, optional cost)")
    for column in ("cost", "held"):
        if column not in table.columns:
            table[column] = 0.0
    table = table[["price", "multiplier", "cost", "held"]].apply(pd.to_numeric, errors="coerce")
    held = table["held"]
    fractional = held.index[~np.isfinite(held) | (held != held.round())]
    if len(fractional):
        raise InputError(f"contracts: held must be a whole number of contracts (negative for short); not for {list_labels(fractional)}")
    for column, lowest in (("price", "> 0"), ("multiplier", "> 0"), ("cost", ">= 0")):
        values = table[column]
        bad = values.index[~np.isfinite(values) | ((values <= 0) if lowest == "> 0" else (values < 0))]
        if len(bad):
            raise InputError(f"contracts: {column} must be a finite number {lowest}; not for {list_labels(bad)}")
    if nav is None:
        raise InputError("nav: needed with contract terms (contracts are rounded from notional × NAV)")
    return table


def _costs(costs: Any, names: pd.Index) -> pd.Series:
    if costs is None:
        return pd.Series(0.0, index=names)
    series = pd.Series(costs, dtype=object)
    series.index = series.index.map(str)
    unknown = series.index.difference(names)
    if len(unknown):
        raise InputError(f"costs: instruments not given: {list_labels(unknown)}")
    values = pd.to_numeric(series, errors="coerce").reindex(names).fillna(0.0).astype(float)
    bad = values.index[~np.isfinite(values) | (values < 0) | (values >= 1)]
    if len(bad):
        raise InputError(f"costs: a cost is a fraction of the notional traded, in [0, 1); not for {list_labels(bad)}")
    return values


def _risk_row(model: Any, inst: Instruments, w: np.ndarray, b: np.ndarray, h: np.ndarray) -> dict[str, float]:
    B, F, d, ppy = model._B, model._F, model._d, model.periods_per_year
    overlay = inst.baskets @ h
    out = {}
    for name, v in (("total", w), ("active", w - b)):
        x = B.T @ v + inst.exposures @ h
        factor = float(x @ F @ x) * ppy
        specific = (float(d @ np.square(v + overlay)) + float(inst.own_specific_variance @ np.square(h))) * ppy
        out[name] = math.sqrt(max(factor + specific, 0.0))
        out[f"{name}_factor"] = math.sqrt(max(factor, 0.0))
        out[f"{name}_specific"] = math.sqrt(max(specific, 0.0))
    return out


def overlay(
    model: Any,
    holdings: Any,
    instruments: Mapping[str, Any],
    *,
    benchmark: Any = None,
    targets: Mapping[str, float] | None = None,
    minimize: str = "active_risk",
    contracts: Any = None,
    nav: float | None = None,
    max_gross: float | None = None,
    costs: Any = None,
) -> OverlayResult:
    """Size hedge instruments (index futures, baskets) to reach target factor exposures at least risk.

    Parameters
    ----------
    model : FactorModel
        The risk model Σ = B·F·Bᵀ + diag(d).
    holdings : pandas.Series or array
        The book's weights w (by asset), fractions of NAV.
    instruments : Mapping[str, pandas.Series]
        Name → basket weights by asset (an index, a sector or style basket, a fund's holdings), or
        name → returns by date (a DatetimeIndex): a contract with no published holdings, whose
        exposures come from a time-series regression on the model's factor history (see Notes).
    benchmark : pandas.Series or array, optional
        Benchmark weights b. Without one, active figures equal total ones.
    targets : Mapping[str, float], optional
        Factor → exposure wanted after the overlay: active exposure Bᵀ(w + Xh − b) under
        ``minimize="active_risk"``, total Bᵀ(w + Xh) under ``"total_risk"``. Met exactly before
        rounding, or :class:`~trimtab.errors.InfeasibleError`.
    minimize : {"active_risk", "total_risk"}, default "active_risk"
        The variance minimised over the remaining freedom.
    contracts : pandas.DataFrame or Mapping, optional
        Per instrument: ``price``, ``multiplier``, optional ``cost`` (currency per contract) and
        optional ``held`` (contracts held today, negative short). Instruments with terms are rounded
        to whole contracts; needs ``nav``. ``.contracts`` is the position to hold; the "before"
        exposures and risk include the contracts held, and costs are charged on the difference.
    nav : float, optional
        Net asset value in currency.
    max_gross : float, optional
        Cap on Σⱼ|hⱼ| (fractions of NAV); solved with cvxpy/Clarabel.
    costs : Mapping[str, float], optional
        Cost per unit of notional traded (a fraction, e.g. 0.0002), charged in ``.cost``. Costs are
        reported, not traded off against risk: the overlay is sized for risk.

    Returns
    -------
    OverlayResult

    Raises
    ------
    InputError
        Unknown factor in ``targets``, unknown asset in a basket, a price or multiplier ≤ 0, …
    InfeasibleError
        The instruments cannot reach the targets together (or not within ``max_gross``).

    Notes
    -----
    The hedged book is w + X·h (X: N×M basket weights, h: notionals). With a = w − b (or w),

        minimise  (Bᵀa + E·h)ᵀ F (Bᵀa + E·h) + Σᵢ dᵢ(aᵢ + (Xh)ᵢ)² + Σⱼ sⱼhⱼ²
        subject to (Bᵀa + E·h)_k = target_k for each targeted factor k,

    with E = BᵀX (plus βⱼ for a return-series instrument j, whose X column is zero). The specific
    term sees the overlap of each basket with the book. The problem has M variables; it is solved
    exactly by the null-space method. With one instrument, no benchmark, no target and total risk,
    h* = −wᵀΣx / xᵀΣx, the minimum-variance hedge ratio.

    A return-series instrument is regressed on the model's factor-return history with the model's
    time-series settings (weights, window); its residual variance sⱼ is its specific variance,
    taken as uncorrelated with every asset's.

    Contracts: nⱼ = round(hⱼ·NAV / (priceⱼ·multiplierⱼ)), and the notional after rounding is
    nⱼ·priceⱼ·multiplierⱼ / NAV.

    References
    ----------
    Johnson, L. L. (1960). The theory of hedging and speculation in commodity futures. Review of
    Economic Studies 27(3), 139–151.
    Ederington, L. H. (1979). The hedging performance of the new futures markets. Journal of
    Finance 34(1), 157–170.

    Examples
    --------
    >>> import pandas as pd
    >>> from trimtab import FactorModel
    >>> B = pd.DataFrame({"market": [1.0, 1.2, 0.8]}, index=["AAA", "BBB", "CCC"])
    >>> F = pd.DataFrame([[0.0016]], index=["market"], columns=["market"])
    >>> d = pd.Series([0.0004, 0.0005, 0.0006], index=B.index)
    >>> m = FactorModel(B, F, d, periods_per_year=12)
    >>> w = pd.Series([0.5, 0.5, 0.0], index=B.index)
    >>> index = pd.Series(1 / 3, index=B.index)
    >>> r = overlay(m, w, {"future": index}, targets={"market": 0.0}, minimize="total_risk")
    >>> round(float(r.notional["future"]), 4)
    -1.1
    """
    if minimize not in MINIMIZE:
        raise InputError(f"minimize: expected one of {', '.join(MINIMIZE)}, got {minimize!r}")
    if nav is not None and (isinstance(nav, bool) or not isinstance(nav, (int, float)) or not math.isfinite(nav) or nav <= 0):
        raise InputError(f"nav: expected a positive number, got {nav!r}")
    if max_gross is not None and (isinstance(max_gross, bool) or not isinstance(max_gross, (int, float)) or not math.isfinite(max_gross) or max_gross < 0):
        raise InputError(f"max_gross: expected a non-negative number, got {max_gross!r}")
    w = model.weights_array(holdings, name="holdings")
    b = model.weights_array(benchmark, name="benchmark") if benchmark is not None else np.zeros(model.n_assets)
    inst = prepare_instruments(model, instruments)
    names = inst.names
    target_names, target_values = _targets(model, targets)
    terms = _contract_terms(contracts, names, nav)
    rate = _costs(costs, names)

    a = w - b if minimize == "active_risk" else w
    quad = quadratic(model._B, model._F, model._d, a, inst.exposures, inst.baskets, inst.own_specific_variance)
    rows = model.factors.get_indexer(target_names)
    x0 = model._B.T @ a
    A = inst.exposures[rows] if len(rows) else np.zeros((0, inst.n_instruments))
    r = target_values - x0[rows] if len(rows) else np.zeros(0)
    if max_gross is None:
        h = solve_exact(quad, A, r, target_names)
    else:
        h = solve_capped(quad, A, r, float(max_gross), target_names)

    notional = pd.Series(h, index=names, name="notional")
    contracts_out = pd.Series(pd.array([pd.NA] * len(names), dtype="Int64"), index=names, name="contracts")
    rounded = notional.copy().rename("notional_after_rounding")
    amount = pd.Series(np.nan, index=names)
    per_contract_cost = pd.Series(0.0, index=names)
    held = pd.Series(0.0, index=names)  # notional of the contracts already held
    held_contracts = pd.Series(pd.array([pd.NA] * len(names), dtype="Int64"), index=names, name="held")
    if terms is not None:
        assert nav is not None
        size = terms["price"] * terms["multiplier"]
        n = (notional.reindex(terms.index) * nav / size).round()
        for name in terms.index:
            contracts_out[name] = int(n[name])
            rounded[name] = int(n[name]) * float(size[name]) / nav
            held_contracts[name] = int(terms.loc[name, "held"])
            held[name] = float(terms.loc[name, "held"]) * float(size[name]) / nav
        per_contract_cost = (terms["cost"] * (n - terms["held"]).abs()).reindex(names).fillna(0.0) / nav
    if nav is not None:
        amount = rounded * nav
    h_rounded = rounded.to_numpy(dtype=float)
    h_held = held.to_numpy(dtype=float)
    cost_each = rate * (rounded - held).abs() + per_contract_cost

    x_before = x0 + inst.exposures @ h_held
    overlay_exposure = inst.exposures @ h_rounded
    target_column = pd.Series(np.nan, index=model.factors)
    target_column[target_names] = target_values
    exposures = pd.DataFrame({
        "before": x_before,
        "overlay": inst.exposures @ h,
        "after": x0 + inst.exposures @ h,
        "after_rounding": x0 + overlay_exposure,
        "target": target_column.to_numpy(),
    }, index=model.factors)
    exposures.index.name = "factor"
    risk = pd.DataFrame(
        [_risk_row(model, inst, w, b, h_held), _risk_row(model, inst, w, b, h), _risk_row(model, inst, w, b, h_rounded)],
        index=pd.Index(["before", "after", "after_rounding"], name="book"),
    )
    added = math.sqrt(max((float(model._d @ np.square(inst.baskets @ h_rounded))
                           + float(inst.own_specific_variance @ np.square(h_rounded))) * model.periods_per_year, 0.0))
    table = inst.exposure_table(model.factors).T
    table.insert(0, "kind", list(inst.kinds))
    table.index.name = "instrument"
    trades = pd.DataFrame({"kind": list(inst.kinds), "notional": notional, "contracts": contracts_out,
                           "notional_after_rounding": rounded, "amount": amount, "cost": cost_each}, index=names)
    if terms is not None and (terms["held"] != 0).any():
        trades.insert(3, "held", held_contracts)
        trades.insert(4, "trade", contracts_out - held_contracts)
    trades.index.name = "instrument"
    kind = "active" if minimize == "active_risk" and benchmark is not None else "total"
    notes = [f"Exposures are {kind}; targets met before rounding; risk minimised: {minimize.replace('_', ' ')}."]
    if "returns" in inst.kinds:
        fitted = [n for n, k in zip(names, inst.kinds, strict=True) if k == "returns"]
        notes.append(
            f"{', '.join(fitted)}: exposures from a time-series regression of the instrument's returns on the model's factor "
            "returns (the model's own estimator and weights); its residual variance is its specific variance, taken as "
            "uncorrelated with every asset's."
        )
    if terms is not None:
        notes.append("Contracts rounded to the nearest whole number: n = round(h·NAV / (price·multiplier)).")
    return OverlayResult(
        notional=notional, contracts=contracts_out, notional_after_rounding=rounded, exposures=exposures, risk=risk,
        added_specific_risk=added, cost=float(cost_each.sum()), instruments=table, trades=trades, minimize=minimize,
        nav=float(nav) if nav is not None else None, fit=inst.fit, notes=tuple(notes),
        settings={"minimize": minimize, "targets": dict(zip(target_names, target_values.tolist(), strict=True)),
                  "max_gross": max_gross, "benchmark": benchmark is not None},
    )
