"""Validation of a rebalance scenario mapping (``objective`` and ``constraints``), in one place.

:func:`validate_scenario` checks every key and value without a model and returns a
:class:`RebalanceSpec` holding the normalised mapping (defaults filled in, intervals as
``[lower, upper]`` with ``None`` for unbounded). Checks that need the model or the data (factor
names, attribute columns, asset ids) happen when the problem is built, with the same message style.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from trimtab.construct import _spec_fields as f
from trimtab.construct._spec_fields import Path
from trimtab.errors import Problem, ScenarioError

#: Objective kinds: the key and the values it takes.
MAXIMIZE = ("utility", "alpha")
MINIMIZE = ("active_risk", "total_risk")
#: Default attribute columns for costs, liquidity and round lots.
COST_COLUMNS = {"spread": "spread", "commission": "commission", "impact": "impact"}
#: Constraints that risk budgeting can be combined with (the log formulation is exact only there).
RISK_BUDGET_COMPATIBLE = ("fully_invested", "long_only")
#: Largest plausible size of a limit that is a fraction of NAV: above it, the value was most likely
#: written as a percentage (3 for 3%) and is refused with a hint. A position, group or cash weight
#: beyond 100% of NAV, a one-way turnover or a single trade beyond 200%, an annualised risk beyond
#: 100% are not mandates an equity fund writes.
PLAUSIBLE_WEIGHT = 1.0
PLAUSIBLE_TRADE = 2.0
PLAUSIBLE_TURNOVER = 2.0


@dataclass(frozen=True, eq=False)
class RebalanceSpec:
    """A validated, normalised scenario.

    Attributes
    ----------
    objective : dict
        ``kind`` (utility, alpha, active_risk, total_risk, risk_budget), ``risk_aversion``,
        ``cost_aversion``, ``costs`` (column per cost term or None) and ``risk_budget`` options.
    constraints : dict
        Key → normalised options, in the order given.
    mapping : dict
        The normalised scenario as a plain mapping (``objective`` and ``constraints``).
    source : str
        What messages are prefixed with.
    """

    objective: dict[str, Any]
    constraints: dict[str, Any]
    mapping: dict[str, Any]
    source: str = "scenario"

    @property
    def scenario_hash(self) -> str:
        """SHA-256 of the canonical JSON (sorted keys) of :attr:`mapping`."""
        text = json.dumps(self.mapping, sort_keys=True, default=str, separators=(",", ":"))
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

    def path(self, *parts: str) -> Path:
        """The key path ``parts`` under this spec's source, for messages raised at build time."""
        return Path(self.source, tuple(parts))

    def with_limits(self, limits: Mapping[str, Any]) -> RebalanceSpec:
        """A copy with limits replaced: ``{"tracking_error.max": 0.02, "turnover.max": 0.1}``.

        Limits held in lists are reached too: ``group.bounds.default`` (a whole band ``[lo, hi]``),
        ``group.bounds.default.max`` or ``.1`` (its upper end; ``.min`` or ``.0`` the lower),
        ``group.1.bounds.tech`` (the second grouping of a list), ``factor_exposure.bounds.size.min``.
        """
        constraints = json.loads(json.dumps(self.mapping["constraints"]))
        for dotted, value in limits.items():
            parts = dotted.split(".")
            node: Any = constraints
            for part in parts[:-1]:
                node = _step(node, part)
                if node is None:
                    raise self.path("constraints", *parts).fail("no such limit in this scenario")
            if not _assign(node, parts[-1], value):
                raise self.path("constraints", *parts).fail("no such limit in this scenario")
        return validate_scenario({**self.mapping, "constraints": constraints}, source=self.source)

    def with_risk_aversion(self, risk_aversion: float) -> RebalanceSpec:
        """A copy with a new λ (utility objectives only)."""
        objective = dict(self.mapping["objective"])
        if "risk_aversion" not in objective:
            raise self.path("objective", "risk_aversion").fail("only the utility objective takes a risk aversion")
        objective["risk_aversion"] = risk_aversion
        return validate_scenario({**self.mapping, "objective": objective}, source=self.source)


#: Ends of an interval [lower, upper] by name.
_ENDS = {"min": 0, "max": 1}


def _position(node: list[Any], part: str) -> int | None:
    """A list position from ``0``, ``1``, … or, for an interval, ``min``/``max``."""
    if part.isdigit() and int(part) < len(node):
        return int(part)
    if part in _ENDS and len(node) == 2:
        return _ENDS[part]
    return None


def _step(node: Any, part: str) -> Any:
    """One level down a normalised constraints mapping (a one-element list is looked through)."""
    if isinstance(node, list):
        at = _position(node, part)
        if at is not None:
            return node[at]
        if len(node) == 1 and isinstance(node[0], dict):
            return node[0].get(part)
        return None
    return node.get(part) if isinstance(node, dict) else None


def _assign(node: Any, part: str, value: Any) -> bool:
    if isinstance(node, list):
        at = _position(node, part)
        if at is None:
            if len(node) == 1 and isinstance(node[0], dict) and part in node[0]:
                node[0][part] = value
                return True
            return False
        node[at] = value
        return True
    if isinstance(node, dict) and part in node:
        node[part] = value
        return True
    return False


def validate_scenario(mapping: Any, *, source: str = "scenario") -> RebalanceSpec:
    """Check a rebalance scenario's ``objective`` and ``constraints`` sections.

    Parameters
    ----------
    mapping : Mapping
        ``{"objective": {...}, "constraints": {...}}`` in the vocabulary of docs/construction.md.
        ``constraints`` may be omitted (no limits).
    source : str, default "scenario"
        Prefix of every message (a file name, say).

    Returns
    -------
    RebalanceSpec

    Raises
    ------
    ScenarioError
        One line ``<source>: <key path>: <what was expected> (got ...)`` for unknown keys, wrong
        types, lower > upper, negative caps and conflicting choices.

    Examples
    --------
    >>> spec = validate_scenario({"objective": {"minimize": "active_risk"},
    ...                           "constraints": {"long_only": True, "turnover": {"max": 0.2}}})
    >>> spec.objective["kind"]
    'active_risk'
    """
    top = Path(source)
    body = f.mapping(top, mapping, ["objective", "constraints", "stress", "replay", "alpha_factor", "orders"], ["objective"])
    problems: list[Problem] = []
    objective = _collect(problems, _objective, top / "objective", body["objective"])
    raw = body.get("constraints") or {}
    cpath = top / "constraints"
    if not isinstance(raw, Mapping):
        raise cpath.fail(f"expected a mapping, got {f.describe(raw)}")
    unknown = [k for k in raw if k not in VALIDATORS]
    if unknown:
        problems.extend(f.unknown_keys(cpath, unknown, VALIDATORS).problems)
    constraints: dict[str, Any] = {}
    for key, value in raw.items():
        if key in VALIDATORS:
            checked = _collect(problems, VALIDATORS[key], cpath / key, value)
            if checked is not None:
                constraints[key] = checked
    if problems:
        raise ScenarioError.of(problems)
    _cross_checks(cpath, objective, constraints)
    normalised: dict[str, Any] = {"objective": {k: v for k, v in objective.items() if k != "kind"}, "constraints": constraints}
    if body.get("stress") is not None:
        normalised["stress"] = _stress_list(top / "stress", body["stress"], constraints.get("stress_loss"))
    if body.get("replay") is not None:
        normalised["replay"] = _replay(top / "replay", body["replay"])
    if body.get("alpha_factor") is not None:
        if objective.get("kind") not in ("utility", "alpha"):
            raise (top / "alpha_factor").fail("prices the alpha the factors miss; the objective must maximize alpha or utility")
        normalised["alpha_factor"] = _alpha_factor(top / "alpha_factor", body["alpha_factor"])
    if body.get("orders") is not None:
        from trimtab.construct._spec_orders import validate_orders

        normalised["orders"] = validate_orders(top / "orders", body["orders"])
    return RebalanceSpec(objective, constraints, json.loads(json.dumps(normalised, default=str)), source)


def _collect(problems: list[Problem], check: Callable[[Path, Any], Any], path: Path, value: Any) -> Any:
    """``check(path, value)``, its problems added to ``problems`` instead of raised."""
    try:
        return check(path, value)
    except ScenarioError as err:
        problems.extend(err.problems or [Problem(path.source, str(path), str(err))])
        return None


# ---------------------------------------------------------------------- objective
def _objective(path: Path, value: Any) -> dict[str, Any]:
    keys = ["maximize", "minimize", "risk_budget", "risk_aversion", "cost_aversion", "costs"]
    body = f.mapping(path, value, keys)
    chosen = [k for k in ("maximize", "minimize", "risk_budget") if k in body]
    if len(chosen) != 1:
        raise path.fail(
            "give exactly one of maximize (utility, alpha), minimize (active_risk, total_risk) or "
            f"risk_budget (got {', '.join(chosen) or 'none'})"
        )
    out: dict[str, Any] = {}
    if "maximize" in body:
        out["maximize"] = f.text(path / "maximize", body["maximize"], MAXIMIZE)
    elif "minimize" in body:
        out["minimize"] = f.text(path / "minimize", body["minimize"], MINIMIZE)
    else:
        out["risk_budget"] = _risk_budget(path / "risk_budget", body["risk_budget"])
    kind = out.get("maximize", out.get("minimize", "risk_budget"))
    out["kind"] = kind
    if out["kind"] == "utility":
        if "risk_aversion" not in body:
            raise (path / "risk_aversion").fail("required with maximize: utility (λ on annualised active variance)")
        out["risk_aversion"] = f.number(path / "risk_aversion", body["risk_aversion"], minimum=0.0)
    elif "risk_aversion" in body:
        raise (path / "risk_aversion").fail(f"only maximize: utility takes a risk aversion (objective is {out['kind']})")
    if out["kind"] == "risk_budget":
        for key in ("cost_aversion", "costs"):
            if key in body:
                raise (path / key).fail("risk budgeting takes no costs")
        return out
    out["cost_aversion"] = f.number(path / "cost_aversion", body.get("cost_aversion", 1.0), minimum=0.0)
    out["costs"] = _costs(path / "costs", body.get("costs"))
    return out


def _costs(path: Path, value: Any) -> dict[str, str] | None:
    if value is None or value is False:
        return None
    if value is True:
        return dict(COST_COLUMNS)
    body = f.mapping(path, value, list(COST_COLUMNS))
    if not body:
        raise path.fail("name at least one of spread, commission, impact (attribute columns)")
    return {k: f.text(path / k, v) for k, v in body.items()}


def _risk_budget(path: Path, value: Any) -> dict[str, Any]:
    if value is True or value == "equal":
        value = {}
    body = f.mapping(path, value, ["by", "budgets"])
    out: dict[str, Any] = {"by": None, "budgets": None}
    if body.get("by") is not None:
        out["by"] = f.text(path / "by", body["by"])
    if body.get("budgets") is not None:
        budgets = body["budgets"]
        if not isinstance(budgets, Mapping) or not budgets:
            raise (path / "budgets").fail(f"expected a mapping label → share of risk, got {f.describe(budgets)}")
        out["budgets"] = {
            str(k) if k == "default" else k: f.number(path / "budgets" / k, v, minimum=0.0, strict=True)
            for k, v in budgets.items()
        }
    return out


# ---------------------------------------------------------------------- constraints
def _switch(path: Path, value: Any) -> dict[str, Any] | None:
    """``true`` / ``false`` or ``{soft: {penalty: p}}``."""
    if value is False:
        return None
    if value is True:
        return {"soft": None}
    body = f.mapping(path, value, ["soft"])
    return {"soft": _soft_of(path, body)}


def _soft_of(path: Path, body: Mapping[str, Any]) -> dict[str, float] | None:
    return f.soft(path / "soft", body["soft"]) if body.get("soft") is not None else None


def _range(path: Path, value: Any, *, minimum: float | None = None, need_one: bool = True,
           plausible: float | None = None) -> dict[str, Any]:
    body = f.mapping(path, value, ["min", "max", "soft"])
    lower = f.number(path / "min", body.get("min"), minimum=minimum, allow_none=True, plausible=plausible)
    upper = f.number(path / "max", body.get("max"), minimum=minimum, allow_none=True, plausible=plausible)
    if need_one and lower is None and upper is None:
        raise path.fail("give min, max or both")
    f.ordered(path, lower, upper, "min", "max")
    return {"min": lower, "max": upper, "soft": _soft_of(path, body)}


def _cap(path: Path, value: Any, extra: Mapping[str, Callable[[Path, Any], Any]] | None = None,
         defaults: Mapping[str, Any] | None = None, plausible: float = 1.0) -> dict[str, Any]:
    extra = dict(extra or {})
    body = f.mapping(path, value, ["max", "soft", *extra], ["max"])
    out: dict[str, Any] = {"max": f.number(path / "max", body["max"], minimum=0.0, plausible=plausible)}
    for key, check in extra.items():
        out[key] = check(path / key, body[key]) if key in body else (defaults or {}).get(key)
    out["soft"] = _soft_of(path, body)
    return out


def _bounds_with_overrides(path: Path, value: Any, plausible: float = PLAUSIBLE_WEIGHT) -> dict[str, Any]:
    body = f.mapping(path, value, ["min", "max", "overrides", "soft"])
    out = _range(path, {k: v for k, v in body.items() if k != "overrides"}, need_one="overrides" not in body,
                 plausible=plausible)
    out["overrides"] = f.overrides(path / "overrides", body["overrides"], plausible) if "overrides" in body else {}
    return out


def _trade(path: Path, value: Any) -> dict[str, Any]:
    return _bounds_with_overrides(path, value, PLAUSIBLE_TRADE)


def _cash(path: Path, value: Any) -> dict[str, Any]:
    return _range(path, value, minimum=None, plausible=PLAUSIBLE_WEIGHT)


def _leverage(path: Path, value: Any) -> dict[str, Any]:
    body = f.mapping(path, value, ["gross", "net", "short", "soft"])
    if all(body.get(k) is None for k in ("gross", "net", "short")):
        raise path.fail("give gross, net, short or several")
    return {
        "gross": f.number(path / "gross", body.get("gross"), minimum=0.0, allow_none=True),
        "net": f.interval(path / "net", body["net"]) if body.get("net") is not None else None,
        "short": f.number(path / "short", body.get("short"), minimum=0.0, allow_none=True),
        "soft": _soft_of(path, body),
    }


def _bounds_table(path: Path, value: Any, plausible: float | None = None) -> dict[Any, list[float | None]]:
    if not isinstance(value, Mapping) or not value:
        raise path.fail(f"expected a mapping name → [lower, upper] (default allowed), got {f.describe(value)}")
    return {k: f.interval(path / k, v, plausible) for k, v in value.items()}


def _group_one(path: Path, value: Any) -> dict[str, Any]:
    body = f.mapping(path, value, ["by", "active", "bounds", "soft"], ["by", "bounds"])
    return {
        "by": f.text(path / "by", body["by"]),
        "active": f.flag(path / "active", body.get("active", False)),
        "bounds": _bounds_table(path / "bounds", body["bounds"], PLAUSIBLE_WEIGHT),
        "soft": _soft_of(path, body),
    }


def _group(path: Path, value: Any) -> list[dict[str, Any]]:
    items = value if isinstance(value, list) else [value]
    if not items:
        raise path.fail("expected a mapping or a non-empty list of mappings")
    out = [_group_one(path / str(i) if isinstance(value, list) else path, v) for i, v in enumerate(items)]
    columns = [g["by"] for g in out]
    if len(set(columns)) != len(columns):
        raise path.fail(f"each attribute column may be grouped once (got {', '.join(columns)})")
    return out


def _factor_exposure(path: Path, value: Any) -> dict[str, Any]:
    body = f.mapping(path, value, ["active", "bounds", "soft"], ["bounds"])
    return {
        "active": f.flag(path / "active", body.get("active", False)),
        "bounds": _bounds_table(path / "bounds", body["bounds"]),
        "soft": _soft_of(path, body),
    }


def _beta(path: Path, value: Any) -> dict[str, Any]:
    return _range(path, value)


#: The smallest positive risk cap (annualised volatility) taken: 1e-6, 0.0001% a year. A variance of
#: 1e-12 sits below what float64 resolves beside asset variances of 1e-2 to 1e-1 (relative 1e-11 or
#: less, near the solver's tolerances), so a smaller positive cap cannot be honoured or refuted;
#: judgement. 0 stays allowed: no risk at all.
MIN_RISK_CAP = 1e-6


def _meaningful(path: Path, out: dict[str, Any]) -> dict[str, Any]:
    cap = out["max"]
    if 0.0 < cap < MIN_RISK_CAP:
        raise (path / "max").fail(
            f"{cap:g} is below the smallest risk cap trimtab can honour, {MIN_RISK_CAP:g} (0.0001% a year); "
            "write 0 for no risk at all"
        )
    return out


def _risk_cap(path: Path, value: Any) -> dict[str, Any]:
    return _meaningful(path, _cap(path, value))


def _turnover(path: Path, value: Any) -> dict[str, Any]:
    return _cap(path, value, plausible=PLAUSIBLE_TURNOVER)


def _part_risk_cap(path: Path, value: Any) -> dict[str, Any]:
    return _meaningful(path, _cap(path, value, {"active": f.flag}, {"active": True}))


def _shocks(path: Path, value: Any) -> dict[str, dict[str, Any]]:
    """Named shocks ``{name: {factors: {factor: move}, description, specific}}``; a shock file's path is
    replaced by its shocks when a scenario file is read (trimtab.scenario), before this check."""
    from trimtab.stresstest._entries import shock_entries

    if isinstance(value, str):
        raise path.fail(
            f"a shock file ({value}) is read when a scenario file is loaded; in Python pass the shocks as a "
            "mapping name → {factors: {factor: move}}"
        )

    def fail(keys: tuple[str, ...], message: str) -> Exception:
        where = path
        for key in keys:
            where = where / key
        return where.fail(message)

    return shock_entries(value, fail)


def _stress_loss(path: Path, value: Any) -> dict[str, Any]:
    """``{shocks, max, active, conditional, soft}``: the loss under each shock at most max."""
    body = f.mapping(path, value, ["shocks", "max", "active", "conditional", "soft"], ["shocks", "max"])
    entries = _shocks(path / "shocks", body["shocks"])
    with_specific = [name for name, entry in entries.items() if entry["specific"]]
    if with_specific:
        raise (path / "shocks" / with_specific[0] / "specific").fail(
            "a stress limit moves factors only; specific moves are for stress reports (the scenario's stress: list)"
        )
    return {
        "shocks": {name: {"factors": entry["factors"], "description": entry["description"]} for name, entry in entries.items()},
        "max": f.number(path / "max", body["max"], minimum=0.0),
        "active": f.flag(path / "active", body.get("active", True)),
        "conditional": f.flag(path / "conditional", body.get("conditional", True)),
        "soft": _soft_of(path, body),
    }


def _stress_list(path: Path, value: Any, stress_loss: Mapping[str, Any] | None) -> dict[str, Any]:
    """The ``stress`` section: shocks reported before and after the trade (no limit)."""
    entries = _shocks(path, value)
    limited = (stress_loss or {}).get("shocks", {})
    for name, entry in entries.items():
        if name in limited and limited[name]["factors"] != entry["factors"]:
            raise (path / name).fail("a stress_loss shock has this name with other moves; give the two different names")
    return entries


def _replay(path: Path, value: Any) -> dict[str, int]:
    """``{length: periods, count: k}``: the k worst windows of the model's history, before and after."""
    body = f.mapping(path, value, ["length", "count"], ["length"])
    return {"length": f.integer(path / "length", body["length"], minimum=1),
            "count": f.integer(path / "count", body.get("count", 3), minimum=1)}


def _alpha_factor(path: Path, value: Any) -> dict[str, float]:
    """``{volatility: σ}``: risk the part of alpha the factors do not span as one more factor of
    annualised volatility σ (Ceria, Saxena and Stubbs 2012; :func:`trimtab.model.with_alpha_factor`)."""
    body = f.mapping(path, value, ["volatility"], ["volatility"])
    sigma = f.number(path / "volatility", body["volatility"], minimum=0.0, strict=True, plausible=PLAUSIBLE_WEIGHT)
    return {"volatility": float(sigma)}  # type: ignore[arg-type]


def _liquidity(path: Path, value: Any) -> dict[str, Any]:
    body = f.mapping(path, value, ["max_adv_fraction", "days", "adv_column", "price_column", "soft"], ["max_adv_fraction"])
    return {
        "max_adv_fraction": f.number(path / "max_adv_fraction", body["max_adv_fraction"], minimum=0.0, plausible=1.0),
        "days": f.number(path / "days", body.get("days", 1), minimum=0.0, strict=True),
        "adv_column": f.text(path / "adv_column", body.get("adv_column", "adv")),
        "price_column": f.text(path / "price_column", body.get("price_column", "price")),
        "soft": _soft_of(path, body),
    }


def _asset_list(path: Path, value: Any) -> list[Any]:
    return f.labels(path, value)


def _must_hold(path: Path, value: Any) -> dict[str, Any]:
    body = f.mapping(path, value, ["assets", "min_weight"], ["assets", "min_weight"])
    return {
        "assets": f.labels(path / "assets", body["assets"]),
        "min_weight": f.number(path / "min_weight", body["min_weight"], minimum=0.0, strict=True, plausible=PLAUSIBLE_WEIGHT),
    }


def _min_trade(path: Path, value: Any) -> dict[str, Any]:
    body = f.mapping(path, value, ["weight"], ["weight"])
    return {"weight": f.number(path / "weight", body["weight"], minimum=0.0, strict=True, plausible=PLAUSIBLE_WEIGHT)}


def _round_lots(path: Path, value: Any) -> dict[str, Any]:
    if value is True:
        value = {}
    body = f.mapping(path, value, ["lot_column", "price_column"])
    return {
        "lot_column": f.text(path / "lot_column", body.get("lot_column", "lot")),
        "price_column": f.text(path / "price_column", body.get("price_column", "price")),
    }


def _max_names(path: Path, value: Any) -> dict[str, Any]:
    if isinstance(value, Mapping):
        body = f.mapping(path, value, ["max"], ["max"])
        return {"max": f.integer(path / "max", body["max"], minimum=1)}
    return {"max": f.integer(path, value, minimum=1)}


#: Scenario key → validator. The constraint registry (trimtab.construct.constraints) has the same keys.
VALIDATORS: dict[str, Callable[[Path, Any], Any]] = {
    "fully_invested": _switch,
    "cash": _cash,
    "long_only": _switch,
    "leverage": _leverage,
    "weight": _bounds_with_overrides,
    "active_weight": _bounds_with_overrides,
    "group": _group,
    "factor_exposure": _factor_exposure,
    "beta": _beta,
    "tracking_error": _risk_cap,
    "total_risk": _risk_cap,
    "factor_risk": _part_risk_cap,
    "specific_risk": _part_risk_cap,
    "turnover": _turnover,
    "trade": _trade,
    "liquidity": _liquidity,
    "stress_loss": _stress_loss,
    "no_buy": _asset_list,
    "no_sell": _asset_list,
    "no_trade": _asset_list,
    "must_hold": _must_hold,
    "min_trade": _min_trade,
    "round_lots": _round_lots,
    "max_names": _max_names,
}


def _cross_checks(path: Path, objective: Mapping[str, Any], constraints: Mapping[str, Any]) -> None:
    if "fully_invested" in constraints and "cash" in constraints:
        raise (path / "cash").fail("give fully_invested or a cash range, not both")
    if "long_only" in constraints:
        weight = constraints.get("weight")
        if weight is not None and weight["min"] is not None and weight["min"] < 0:
            raise (path / "weight" / "min").fail(f"must be ≥ 0 with long_only (got {weight['min']:g})")
        leverage = constraints.get("leverage")
        if leverage is not None and leverage["short"] not in (None, 0.0):
            raise (path / "leverage" / "short").fail(f"must be 0 with long_only (got {leverage['short']:g})")
    if objective["kind"] == "risk_budget":
        extra = [k for k in constraints if k not in RISK_BUDGET_COMPATIBLE]
        if extra:
            raise path.fail(
                f"risk budgeting combines only with {', '.join(RISK_BUDGET_COMPATIBLE)} (got {f.list_labels(extra)})"
            )
