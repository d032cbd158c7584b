"""The hedge overlay part of a rebalance result: notionals, contracts, and the cash book, the overlay and
the hedged book side by side (exposures and annualised risk, from the factor model's structure)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from trimtab.construct._data import ProblemData
from trimtab.construct._overlay import Overlay
from trimtab.construct._variables import variance_numpy

#: The books a rebalance with an overlay reports, in display order.
BOOKS = ("cash_book", "overlay", "hedged")


@dataclass(frozen=True, eq=False)
class OverlayResult:
    """The overlay sized with the rebalance.

    Attributes
    ----------
    notional : pandas.Series
        h, fraction of NAV per instrument (negative: short), as verified with the weights.
    contracts : pandas.Series or None
        Whole contracts to hold, round(h·NAV / (price·multiplier)) (instruments with contract terms
        and a known NAV; nullable integers, <NA> for an instrument without terms).
    notional_after_rounding : pandas.Series or None
        contracts × price × multiplier / NAV (h itself for instruments without terms).
    exposures : pandas.DataFrame
        factor × cash_book, overlay, hedged (and hedged_after_rounding with contracts); active
        (against the benchmark) for the two books when there is one, the overlay's own otherwise.
    risk : pandas.DataFrame
        book × total_risk, tracking_error, factor and specific parts (annualised volatilities; the
        overlay's tracking error is its own volatility, it holds no benchmark).
    """

    notional: pd.Series
    contracts: pd.Series | None
    notional_after_rounding: pd.Series | None
    exposures: pd.DataFrame
    risk: pd.DataFrame

    @property
    def figures(self) -> dict[str, dict[str, float]]:
        """book → {total_risk, tracking_error, …} as plain floats."""
        return {book: {k: float(v) for k, v in row.items()} for book, row in self.risk.iterrows()}

    @property
    def table(self) -> pd.DataFrame:
        """One row per instrument: notional, contracts, notional_after_rounding (the overlay.csv table)."""
        out = pd.DataFrame({"notional": self.notional})
        if self.contracts is not None and self.notional_after_rounding is not None:
            out["contracts"] = self.contracts
            out["notional_after_rounding"] = self.notional_after_rounding
        out.index.name = "instrument"
        return out

    def to_dict(self) -> dict[str, object]:
        """JSON-ready: notionals, contracts, exposures and risk by book."""
        rows = []
        for name, row in self.table.iterrows():
            item: dict[str, object] = {"instrument": str(name), "notional": float(row["notional"])}
            if "contracts" in row.index:
                item["contracts"] = None if pd.isna(row["contracts"]) else int(row["contracts"])
                item["notional_after_rounding"] = float(row["notional_after_rounding"])
            rows.append(item)
        return {
            "instruments": rows,
            "exposures": {f: {k: float(v) for k, v in row.items()} for f, row in self.exposures.iterrows()},
            "risk": self.figures,
        }


def _figures(data: ProblemData, vector: np.ndarray, active: bool) -> dict[str, float]:
    ppy = data.periods_per_year
    tf, ts = variance_numpy(data, vector, False)
    af, asp = variance_numpy(data, vector, True) if active else (tf, ts)
    return {"total_risk": float(np.sqrt(ppy * (tf + ts))), "tracking_error": float(np.sqrt(ppy * (af + asp))),
            "factor_risk": float(np.sqrt(ppy * af)), "specific_risk": float(np.sqrt(ppy * asp))}


def _rounded(overlay: Overlay, h: np.ndarray, nav: float | None) -> tuple[pd.Series | None, pd.Series | None]:
    terms = overlay.contracts
    if terms is None or nav is None:
        return None, None
    names = pd.Index(overlay.names, name="instrument")
    contracts = pd.Series(pd.NA, index=names, dtype="Int64", name="contracts")
    after = pd.Series(h, index=names, name="notional_after_rounding")
    for name in terms.index:
        unit = float(terms.loc[name, "price"]) * float(terms.loc[name, "multiplier"])
        n = int(np.round(after[name] * nav / unit))
        contracts[name] = n
        after[name] = n * unit / nav
    return contracts, after


def overlay_result(data: ProblemData, weights: np.ndarray, h: np.ndarray) -> OverlayResult:
    """Notionals, contracts and the three books' exposures and risk (numpy, factor form)."""
    overlay: Overlay = data.overlay
    names = pd.Index(overlay.names, name="instrument")
    X, B = overlay.baskets, data.exposures
    xh = X @ h
    bench = data.bench_exposure if data.benchmark is not None else np.zeros(data.model.n_factors)
    contracts, after = _rounded(overlay, h, data.nav)
    books: Mapping[str, np.ndarray] = {"cash_book": weights, "overlay": xh, "hedged": weights + xh}
    if after is not None:
        books = {**books, "hedged_after_rounding": weights + X @ after.to_numpy()}
    active = data.benchmark is not None
    exposures = pd.DataFrame(
        {book: B.T @ vec - (0.0 if book == "overlay" else bench) for book, vec in books.items()},
        index=pd.Index(data.model.factors, name="factor"))
    risk = pd.DataFrame({book: _figures(data, vec, active and book != "overlay") for book, vec in books.items()}).T
    risk.index.name = "book"
    return OverlayResult(pd.Series(h, index=names, name="notional"), contracts, after, exposures, risk)
