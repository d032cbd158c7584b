"""Carino linking at the edges of floating point, against 50-digit arithmetic (issue #24).

Reference: Python's standard ``decimal`` module at 50 significant digits (``Decimal.ln`` and
``Decimal.exp`` are correctly rounded), fed the exact binary values of the float inputs
(``Decimal(float)`` is exact). Formula: Carino (1999), k_t = [ln(1+R_t) − ln(1+Rb_t)]/(R_t − Rb_t)
and k = [ln(1+R) − ln(1+Rb)]/(R − Rb) over the compounded returns; the linked parts Σ_t (k_t/k)·c_t.
"""

from __future__ import annotations

from decimal import Decimal, localcontext

import numpy as np
import pandas as pd
import pytest

from trimtab.attribution import link
from trimtab.attribution._linking import log_ratio

DIGITS = 50


def exact_link(book: list[float], bench: list[float]) -> tuple[list[Decimal], Decimal, Decimal]:
    """(k_t, k, R − Rb) in 50-digit decimal arithmetic."""
    with localcontext() as ctx:
        ctx.prec = DIGITS
        one = Decimal(1)
        r = [Decimal(x) for x in book]
        b = [Decimal(x) for x in bench]
        k_t = [((one + x).ln() - (one + y).ln()) / (x - y) if x != y else one / (one + x) for x, y in zip(r, b)]
        growth_r, growth_b = one, one
        for x, y in zip(r, b):
            growth_r *= one + x
            growth_b *= one + y
        active = growth_r - growth_b
        k = (growth_r.ln() - growth_b.ln()) / active if active != 0 else one / growth_r
        return k_t, k, active


def exact_linked_parts(components: pd.DataFrame, book: list[float], bench: list[float]) -> dict[str, Decimal]:
    k_t, k, _ = exact_link(book, bench)
    with localcontext() as ctx:
        ctx.prec = DIGITS
        return {c: sum((kt / k * Decimal(v) for kt, v in zip(k_t, components[c])), Decimal(0)) for c in components}


def test_linked_parts_reconcile_near_a_total_loss() -> None:
    # twelve months of −90% against a benchmark at −89%: the book keeps 1e-12 of its value
    n = 12
    dates = pd.date_range("2020-01-31", periods=n, freq="ME")
    book = pd.Series(-0.9, index=dates)
    bench = pd.Series(-0.89, index=dates)
    active = book - bench
    components = pd.DataFrame({"market": 0.3 * active, "specific": 0.7 * active})
    linked, scale = link(components, book, bench, "carino")
    _, k, exact_active = exact_link(list(book), list(bench))
    parts = exact_linked_parts(components, list(book), list(bench))
    # the total is R − Rb to 1e-12 (absolute, as a fraction of NAV), and the parts add up to it
    assert abs(Decimal(linked["total"]) - exact_active) < Decimal("1e-12")
    assert linked.drop("total").sum() == pytest.approx(linked["total"], abs=1e-12)
    for name, value in parts.items():
        assert abs(Decimal(linked[name]) - value) < Decimal("1e-12"), name
    # k itself to 1e-12 relative (k_t/k with k_t from the stable per-period form)
    k_ours = Decimal(float(log_ratio(np.array([-0.9]), np.array([-0.89]))[0])) / Decimal(scale.iloc[0])
    assert abs(k_ours / k - 1) < Decimal("1e-12")


@pytest.mark.parametrize("gap", [1e-11, -1e-11, 1e-14, 0.0], ids=["1e-11", "-1e-11", "1e-14", "equal"])
@pytest.mark.parametrize("level", [0.0123, -0.35, 0.8], ids=["1.23%", "-35%", "80%"])
def test_link_factor_is_exact_when_book_and_benchmark_nearly_agree(level: float, gap: float) -> None:
    book, bench = level + gap, level
    k_t, _, _ = exact_link([book], [bench])
    ours = float(log_ratio(np.array([book]), np.array([bench]))[0])
    assert abs(Decimal(ours) / k_t[0] - 1) < Decimal("1e-12")


def test_link_factors_over_a_span_with_a_near_tie() -> None:
    dates = pd.date_range("2021-01-31", periods=4, freq="ME")
    book = pd.Series([0.021, -0.013, 0.0040000000001, 0.017], index=dates)
    bench = pd.Series([0.018, -0.011, 0.004, 0.017], index=dates)
    active = book - bench
    components = pd.DataFrame({"factor": 0.5 * active, "specific": 0.5 * active})
    linked, scale = link(components, book, bench, "carino")
    k_t, k, exact_active = exact_link(list(book), list(bench))
    for ours, exact in zip(scale, (kt / k for kt in k_t)):
        assert abs(Decimal(ours) / exact - 1) < Decimal("1e-12")
    assert abs(Decimal(linked["total"]) / exact_active - 1) < Decimal("1e-12")
    assert linked.drop("total").sum() == pytest.approx(linked["total"], rel=1e-13)
