"""Repairing a book rounded to whole lots: the MILP (scipy.optimize.milp, HiGHS) against the greedy
search, side by side on the same optimizer's book (invented demo fund, nothing downloaded).

The fund: ``trimtab demo``'s 300 names in a universe of 1,500 (seed 7), lots of 100 shares, the demo's
base mandate plus momentum held neutral, beta in [0.98, 1.02] and active industry bands of ±1%, at
several NAVs. For each NAV the optimizer solves once; each repair then starts from the same rounded
book. Printed per NAV and method: seconds, limits breached beyond tolerance after the repair (and the
Σ excess/tolerance), lots moved by the repair, the objective lost (bp of NAV), the cash after costs,
and the ratio of the two methods' times.

Run: ``PYTHONPATH=src python benchmarks/rounding_repair.py [--navs 50e6 5e6 1e6]``.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from trimtab.construct._lots import fixes as _fixes
from trimtab.construct._lots import hard_box as _hard_box
from trimtab.construct._lots import rounded_weights
from trimtab.construct._orders import min_cash
from trimtab.construct._repair import ROUNDING_TOLERANCE, total_excess
from trimtab.construct._rounded_book import book_limits, book_model, repair_book
from trimtab.demo import make_demo_fund
from trimtab.scenario import fit_model, load_fit_config, load_inputs, load_scenario, write_demo
from trimtab.scenario._run import build

MANDATE = """extends: base.yaml
data:
  holdings: {{path: data/holdings_w.csv, kind: weights, nav: {nav}}}
  benchmark: data/benchmark.csv
  alpha: data/alpha.csv
  attributes: data/attributes_lots.csv
constraints:
  factor_exposure: {{active: true, bounds: {{momentum: [0, 0]}}}}
  beta: {{min: 0.98, max: 1.02}}
  group: {{by: industry, active: true, bounds: {{default: [-0.01, 0.01]}}}}
"""


def demo_folder(folder: Path) -> Path:
    """The demo fund with a lot column (100 shares) and its holdings as weights."""
    write_demo(make_demo_fund(seed=7), folder)
    config = folder / "fit.yaml"
    fit_model(load_fit_config(config), config).save(folder / "model")
    attrs = pd.read_csv(folder / "data" / "attributes.csv")
    attrs["lot"] = 100
    attrs.to_csv(folder / "data" / "attributes_lots.csv", index=False)
    shares = pd.read_csv(folder / "data" / "holdings.csv").set_index("asset")["shares"]
    value = shares * attrs.set_index("asset")["price"].reindex(shares.index)
    (value / (value.sum() + 6e6)).rename("weight").to_csv(folder / "data" / "holdings_w.csv")
    return folder


def compare(folder: Path, nav: float) -> None:
    path = folder / f"mandate_{int(nav)}.yaml"
    path.write_text(MANDATE.format(nav=nav), encoding="utf-8")
    problem = build(load_inputs(load_scenario(path)))
    outcome = problem.solve_convex()
    data = problem.data
    attrs = data.attributes
    lot_w = (attrs["lot"] * attrs["price"]).to_numpy(dtype=np.float64) / data.nav
    lower, upper = _hard_box(problem, _fixes(outcome.rows))
    w0 = data.holdings
    start = rounded_weights(w0, outcome.weights, lot_w, lower, upper)
    model = book_model(problem)
    room = float(np.max(lot_w[start + lot_w <= upper + 1e-12], initial=0.0))
    limits, _ = book_limits(outcome.rows, model, w0, min_cash=min_cash(problem), fully_invested_lot=room,
                            tolerances=ROUNDING_TOLERANCE)
    exits = (np.abs(start) <= 1e-10) & (np.abs(w0) > 1e-10)
    movable = ~exits
    print(f"\nNAV {nav:,.0f}: rounded book before the repair breaches "
          f"{sum(not lim.excess(np.asarray(lim.evaluate(start))).max(initial=0) <= 0 for lim in limits)} limit blocks "
          f"(Σ excess/tol {total_excess(limits, start):.3g})")
    print(f"{'method':8} {'seconds':>8} {'breached':>8} {'Σexcess/tol':>12} {'lots moved':>10} {'objective lost bp':>18} {'cash after costs':>17}")
    times = {}
    utility = problem.objective.breakdown
    base = utility(start)["total"]
    for method in ("milp", "greedy"):
        t0 = time.perf_counter()
        w = repair_book(start, w0, lot_w, lower, upper, movable, limits, model, method=method)
        times[method] = time.perf_counter() - t0
        breached = sum(lim.excess(np.asarray(lim.evaluate(w))).max(initial=0) > 0 for lim in limits)
        lots = float(np.abs(np.round((w - start) / np.where(lot_w > 0, lot_w, 1.0))).sum())
        lost = 1e4 * (base - utility(w)["total"])
        cash = data.nav * float(limits[-1].evaluate(w)[0])
        print(f"{method:8} {times[method]:8.2f} {breached:8d} {total_excess(limits, w):12.3g} {lots:10.0f} {lost:18.3f} {cash:17,.2f}")
    print(f"greedy / milp time: {times['greedy'] / times['milp']:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--navs", type=float, nargs="+", default=[50e6, 5e6, 1e6])
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = demo_folder(Path(tmp))
        for nav in args.navs:
            compare(folder, nav)


if __name__ == "__main__":
    main()
