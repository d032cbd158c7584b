"""Side-by-side views: one attribution before and after a rebalance, or many scenarios at once."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import pandas as pd

from trimtab.attribution._result import RiskAttribution
from trimtab.errors import InputError


def compare(pre: RiskAttribution, post: RiskAttribution) -> pd.DataFrame:
    """Every headline figure before and after, with its change.

    Parameters
    ----------
    pre, post : RiskAttribution
        Attributions of the same kind of risk (typically ``result.pre_trade`` and ``result.post_trade``).

    Returns
    -------
    pandas.DataFrame
        Index figure (the keys of :data:`~trimtab.attribution.HEADLINE_FIGURES`); columns pre, post,
        change (post − pre). Figures that do not apply are NaN.

    Raises
    ------
    InputError
        If either argument is not a RiskAttribution.

    Examples
    --------
    >>> table = compare(result.pre_trade, result.post_trade)  # doctest: +SKIP
    >>> table.loc["risk", "change"]  # doctest: +SKIP
    """
    _check(pre, "compare: pre")
    _check(post, "compare: post")
    table = pd.DataFrame({"pre": pre.headline(), "post": post.headline()})
    table["change"] = table["post"] - table["pre"]
    table.index.name = "figure"
    return table


def compare_many(results: Mapping[str, Any]) -> pd.DataFrame:
    """Headline figures of several what-if scenarios, one column per scenario.

    Parameters
    ----------
    results : Mapping[str, RiskAttribution or RebalanceResult]
        Scenario name → an attribution, or a rebalance result whose post-trade attribution is used.

    Returns
    -------
    pandas.DataFrame
        Index figure; one column per scenario, in the mapping's order.

    Raises
    ------
    InputError
        If the mapping is empty, or a value is neither an attribution nor a result carrying one.
    """
    if not isinstance(results, Mapping) or not results:
        raise InputError("compare_many: expected a non-empty mapping scenario name → attribution or rebalance result")
    columns = {str(name): as_attribution(value, f"compare_many: scenario {name!r}").headline() for name, value in results.items()}
    table = pd.DataFrame(columns)
    table.index.name = "figure"
    return table


def as_attribution(value: Any, owner: str, *, which: str = "post_trade") -> RiskAttribution:
    """``value`` itself if it is a RiskAttribution, else its ``post_trade`` (or ``which``) attribution."""
    if isinstance(value, RiskAttribution):
        return value
    attr = getattr(value, which, None)
    if isinstance(attr, RiskAttribution):
        return attr
    raise InputError(
        f"{owner}: expected a RiskAttribution or a result with a {which} attribution, got {type(value).__name__}"
    )


def exposure_changes(pre: RiskAttribution, post: RiskAttribution, *, column: str = "active_exposure") -> pd.DataFrame:
    """Factor exposures before and after, sorted by the size of the change (largest first).

    Parameters
    ----------
    pre, post : RiskAttribution
    column : str, default "active_exposure"
        Which exposure: ``"active_exposure"``, ``"portfolio_exposure"`` or ``"benchmark_exposure"``.

    Returns
    -------
    pandas.DataFrame
        Index factor; columns group, pre, post, change. Factors present in one side only get NaN
        on the other and sort last.

    Raises
    ------
    InputError
        If ``column`` is not an exposure column, or an argument is not a RiskAttribution.
    """
    allowed = ("active_exposure", "portfolio_exposure", "benchmark_exposure")
    if column not in allowed:
        raise InputError(f"exposure_changes: column must be one of {', '.join(allowed)}, got {column!r}")
    return _changes(pre, post, column, "exposure_changes")


def contribution_changes(pre: RiskAttribution, post: RiskAttribution) -> pd.DataFrame:
    """Factor risk contributions before and after, sorted by the size of the change (largest first).

    Returns
    -------
    pandas.DataFrame
        Index factor; columns group, pre, post, change.

    Raises
    ------
    InputError
        If an argument is not a RiskAttribution.
    """
    return _changes(pre, post, "contribution", "contribution_changes")


def _changes(pre: RiskAttribution, post: RiskAttribution, column: str, owner: str) -> pd.DataFrame:
    _check(pre, f"{owner}: pre")
    _check(post, f"{owner}: post")
    table = pd.DataFrame({"pre": pre.by_factor[column], "post": post.by_factor[column]})
    group = post.by_factor["group"].combine_first(pre.by_factor["group"])
    table.insert(0, "group", group.reindex(table.index))
    table["change"] = table["post"] - table["pre"]
    order = table["change"].abs().sort_values(ascending=False, na_position="last", kind="stable").index
    table = table.loc[order]
    table.index.name = "factor"
    return table


def _check(value: Any, owner: str) -> None:
    if not isinstance(value, RiskAttribution):
        raise InputError(f"{owner}: expected a RiskAttribution, got {type(value).__name__}")
