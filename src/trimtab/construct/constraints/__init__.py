"""The constraint registry: one class per scenario key, each in the module of its kind.

Every class turns its options into rows that (a) add themselves to the cvxpy problem in factor form,
(b) check a weight vector with plain numpy and (c) describe themselves in the constraint table.
The post-solve practicalities (min_trade, round_lots, max_names) are not convex and are handled by
:mod:`trimtab.construct._heuristics`.
"""

from __future__ import annotations

from trimtab.construct.constraints._base import Constraint, Rows
from trimtab.construct.constraints.beta import Beta
from trimtab.construct.constraints.budget import Cash, FullyInvested
from trimtab.construct.constraints.factor_exposure import FactorExposure
from trimtab.construct.constraints.group import Group
from trimtab.construct.constraints.leverage import Leverage, LongOnly
from trimtab.construct.constraints.liquidity import Liquidity
from trimtab.construct.constraints.lists import MustHold, NoBuy, NoSell, NoTrade
from trimtab.construct.constraints.risk import FactorRisk, SpecificRisk, TotalRisk, TrackingError
from trimtab.construct.constraints.stress_loss import StressLoss
from trimtab.construct.constraints.trade import Trade
from trimtab.construct.constraints.turnover import Turnover
from trimtab.construct.constraints.weight import ActiveWeight, Weight

#: Scenario key → constraint class.
REGISTRY: dict[str, type[Constraint]] = {
    cls.key: cls
    for cls in (
        FullyInvested, Cash, LongOnly, Leverage, Weight, ActiveWeight, Group, FactorExposure, Beta,
        TrackingError, TotalRisk, FactorRisk, SpecificRisk, Turnover, Trade, Liquidity,
        NoBuy, NoSell, NoTrade, MustHold, StressLoss,
    )
}
#: Scenario keys handled after the convex solve.
HEURISTIC_KEYS = ("min_trade", "round_lots", "max_names")

__all__ = ["REGISTRY", "HEURISTIC_KEYS", "Constraint", "Rows"]
