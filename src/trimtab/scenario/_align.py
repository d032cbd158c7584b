"""Align asset ids across the risk model, holdings, benchmark, alpha and attributes.

The model's assets are the universe. What happens to every other id is a documented rule, and each
application of a rule is a row in the :class:`AlignmentReport`:

* holdings or benchmark assets the model lacks: an error naming them (``unknown_assets: error``,
  the default); or dropped with their weight reported (``drop``: a dropped benchmark is scaled back
  to its original total); or, for holdings, sold to zero outside the optimizer (``zero``: the sale
  counts as turnover);
* alpha scores for assets the model lacks: dropped; model assets without a score: alpha 0;
* attribute rows for assets the model lacks: dropped; model assets without a row: reported (a
  constraint that needs the attribute then names them).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property

import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError

_COLUMNS = ["input", "asset", "action", "reason", "weight"]


@dataclass(frozen=True, eq=False)
class AlignmentReport:
    """Every asset id that was dropped or filled while aligning inputs to the model, and why.

    Attributes
    ----------
    table : pandas.DataFrame
        Columns ``input`` (holdings, benchmark, alpha, attributes), ``asset``, ``action``
        (``dropped``, ``filled`` or ``sold``), ``reason`` and ``weight`` (the weight dropped or sold,
        for holdings and benchmark rows).
    sizes : pandas.DataFrame
        Per input: rows read, rows kept, rows dropped, model assets filled.
    """

    table: pd.DataFrame
    sizes: pd.DataFrame

    @cached_property
    def n_dropped(self) -> int:
        """Rows dropped over all inputs."""
        return int((self.table["action"] == "dropped").sum())

    def summary(self, *, changes_only: bool = False) -> str:
        """One line per input: kept, dropped (with the reasons) and filled counts.

        With ``changes_only``, inputs kept whole are left out.
        """
        lines = []
        for name, row in self.sizes.iterrows():
            if changes_only and not (row["dropped"] or row["filled"]):
                continue
            text = f"{name}: {int(row['kept'])} of {int(row['read'])} assets kept"
            sub = self.table[self.table["input"] == name]
            for (action, reason), group in sub.groupby(["action", "reason"], sort=False):
                verb = {"dropped": "dropped", "filled": "filled", "sold": "sold to zero outside the optimizer"}[action]
                text += f"; {len(group)} {verb} ({reason}: {list_labels(group['asset'], 3)})"
            lines.append(text)
        return "\n".join(lines)


def _rows(input_name: str, assets: pd.Index, action: str, reason: str, weights: pd.Series | None = None) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "input": input_name,
            "asset": [str(a) for a in assets],
            "action": action,
            "reason": reason,
            "weight": weights.reindex(assets).to_numpy(dtype=float) if weights is not None else float("nan"),
        },
        columns=_COLUMNS,
    )


@dataclass(frozen=True, eq=False)
class AlignedInputs:
    """Holdings, benchmark, alpha and attributes restricted to the model's assets."""

    holdings: pd.Series
    benchmark: pd.Series | None
    alpha: pd.Series | None
    attributes: pd.DataFrame | None
    report: AlignmentReport
    sold_outside: pd.Series = field(default_factory=lambda: pd.Series(dtype=float))


def align_inputs(
    model_assets: pd.Index,
    *,
    holdings: pd.Series,
    benchmark: pd.Series | None = None,
    alpha: pd.Series | None = None,
    attributes: pd.DataFrame | None = None,
    unknown_assets: str = "error",
    files: Mapping[str, str] | None = None,
    model_dropped: pd.Series | None = None,
) -> AlignedInputs:
    """Restrict every input to ``model_assets`` by the rules in the module docstring.

    Parameters
    ----------
    model_assets : pandas.Index
        The risk model's assets (the universe).
    holdings, benchmark : pandas.Series
        Weights by asset.
    alpha : pandas.Series, optional
        Annualised alpha by asset.
    attributes : pandas.DataFrame, optional
        Attributes by asset.
    unknown_assets : {"error", "drop", "zero"}
        What to do with holdings and benchmark assets the model lacks (``zero`` applies to holdings;
        a benchmark is then dropped and scaled as with ``drop``).
    files : Mapping[str, str], optional
        Input name → file, for messages.
    model_dropped : pandas.Series, optional
        Asset → reason the model's fit left it out, so a message can say why an asset is missing.

    Returns
    -------
    AlignedInputs

    Raises
    ------
    InputError
        ``unknown_assets="error"`` and holdings or benchmark name assets the model lacks.
    """
    if unknown_assets not in ("error", "drop", "zero"):
        raise InputError(f"align_inputs: unknown_assets must be 'error', 'drop' or 'zero', got {unknown_assets!r}")
    files = dict(files or {})
    universe = pd.Index(model_assets)
    pieces: list[pd.DataFrame] = []
    sizes: dict[str, dict[str, int]] = {}
    dropped_by_fit = model_dropped if model_dropped is not None else pd.Series(dtype=object)

    def weights(name: str, series: pd.Series) -> pd.Series:
        unknown = series.index.difference(universe, sort=False)
        if len(unknown) and unknown_assets == "error":
            where = files.get(name, name)
            because = ""
            known = [a for a in unknown if a in dropped_by_fit.index]
            if known:
                because = f" (the model fit dropped {known[0]}: {dropped_by_fit[known[0]]})"
            raise InputError(
                f"{where}: {len(unknown)} {name} asset{'s' if len(unknown) > 1 else ''} not in the risk model: "
                f"{list_labels(unknown)}{because}; add them to the model or set data.unknown_assets: drop (or zero)"
            )
        action = "sold" if unknown_assets == "zero" and name == "holdings" else "dropped"
        for reason_assets, reason in _split_by_fit(unknown, dropped_by_fit):
            pieces.append(_rows(name, reason_assets, action, reason, series))
        kept = series.drop(unknown)
        if name == "benchmark" and len(unknown) and kept.sum() != 0:
            kept = kept * (series.sum() / kept.sum())
        sizes[name] = {"read": len(series), "kept": len(kept), "dropped": len(unknown), "filled": 0}
        return kept

    held = weights("holdings", holdings)
    bench = weights("benchmark", benchmark) if benchmark is not None else None

    def per_asset(name: str, labels: pd.Index, filled_reason: str) -> pd.Index:
        """Drop rows the model lacks and note the model assets without a row; return the drops."""
        unknown = labels.difference(universe, sort=False)
        if len(unknown):
            pieces.append(_rows(name, unknown, "dropped", "not in the risk model"))
        missing = universe.difference(labels, sort=False)
        if len(missing):
            pieces.append(_rows(name, missing, "filled", filled_reason))
        sizes[name] = {"read": len(labels), "kept": len(labels) - len(unknown), "dropped": len(unknown), "filled": len(missing)}
        return unknown

    scores = None
    if alpha is not None:
        unknown = per_asset("alpha", alpha.index, "no alpha score, set to 0")
        scores = alpha.drop(unknown).reindex(universe).fillna(0.0).rename("alpha")
    attrs = None
    if attributes is not None:
        unknown = per_asset("attributes", attributes.index, "no attributes row, left empty")
        attrs = attributes.drop(unknown).reindex(universe)

    table = pd.concat(pieces, ignore_index=True) if pieces else pd.DataFrame(columns=_COLUMNS)
    size_table = pd.DataFrame.from_dict(sizes, orient="index", columns=["read", "kept", "dropped", "filled"])
    sold = holdings.loc[holdings.index.difference(universe, sort=False)] if unknown_assets == "zero" else pd.Series(dtype=float)
    return AlignedInputs(held, bench, scores, attrs, AlignmentReport(table, size_table), sold)


def _split_by_fit(unknown: pd.Index, dropped_by_fit: pd.Series) -> list[tuple[pd.Index, str]]:
    if not len(unknown):
        return []
    out: list[tuple[pd.Index, str]] = []
    by_fit = [a for a in unknown if a in dropped_by_fit.index]
    for reason in dict.fromkeys(str(dropped_by_fit[a]) for a in by_fit):
        out.append((pd.Index([a for a in by_fit if str(dropped_by_fit[a]) == reason]), f"dropped by the model fit: {reason}"))
    rest = pd.Index([a for a in unknown if a not in dropped_by_fit.index])
    if len(rest):
        out.append((rest, "not in the risk model"))
    return out
