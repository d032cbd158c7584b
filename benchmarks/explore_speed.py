"""Speed of one change on the ``trimtab explore`` page and API; prints figures, asserts nothing.

    python benchmarks/explore_speed.py [--quick] [--changes 8]

Two instances, each written to a temporary folder as a scenario with its files and model, and opened
the way ``trimtab explore`` opens it (scenario loaded once, problem built once):

1. the demo's size: the invented demo fund (1,500 stocks, 15 factors) and its base scenario;
2. N = 5,000, K = 50: the seeded speed instance of benchmarks/_instances.py.

For each, ``--changes`` moves of the tracking-error cap (alternating around the scenario's value),
timed from request to updated document through the web application in process (FastAPI's test
client: routing, validation, solve, document, JSON), medians:

- the page's change (``POST /page/solve``): the solve (warm re-solve through ``update``,
  verification and result) and the rest (the page's figures and HTML sections, JSON);
- the API's change (``POST /api/solve``): the solve and the rest (the result.json document, JSON);
- the baseline: a fresh ``build_problem(...).solve()`` of the same changed scenario, in this run.

Ratios are against the fresh solve. The issue's aim: under 0.3 s a change at the demo's size.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import yaml

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _instances import speed_instance  # noqa: E402

from trimtab.app import Explorer  # noqa: E402
from trimtab.app._limits import apply  # noqa: E402
from trimtab.app._server import create_app  # noqa: E402
from trimtab.construct import build_problem  # noqa: E402


def demo_scenario(folder: Path, quick: bool) -> Path:
    """The demo fund and its fitted model in ``folder``; its base scenario."""
    from trimtab.demo import make_demo_fund
    from trimtab.scenario import fit_model, load_fit_config, write_demo

    fund = make_demo_fund(n_assets=600, n_holdings=120, n_days=600, seed=3) if quick else make_demo_fund()
    write_demo(fund, folder)
    config = folder / "fit.yaml"
    fit_model(load_fit_config(config), config).save(folder / "model")
    return folder / "base.yaml"


def speed_scenario(folder: Path, n_assets: int, n_factors: int) -> Path:
    """The speed instance written as files and a scenario that names them."""
    instance = speed_instance(n_assets, n_factors)
    instance.model.save(folder / "model")
    instance.holdings.rename("weight").rename_axis("asset").to_csv(folder / "holdings.csv")
    instance.benchmark.rename("weight").rename_axis("asset").to_csv(folder / "benchmark.csv")
    instance.alpha.rename("alpha").rename_axis("asset").to_csv(folder / "alpha.csv")
    instance.attributes.rename_axis("asset").to_csv(folder / "attributes.csv")
    scenario = {
        "description": f"speed instance {n_assets} x {n_factors}",
        "model": "model",
        "data": {"holdings": "holdings.csv", "benchmark": "benchmark.csv", "alpha": "alpha.csv",
                 "attributes": "attributes.csv"},
        **instance.scenario(),
    }
    path = folder / "speed.yaml"
    path.write_text(yaml.safe_dump(scenario, sort_keys=False), encoding="utf-8")
    return path


def median(values: list[float]) -> float:
    return statistics.median(values) if values else float("nan")


def measure(path: Path, n_changes: int) -> dict[str, Any]:
    from fastapi.testclient import TestClient

    started = time.perf_counter()
    explorer = Explorer.open(path)
    app = create_app(explorer)  # the run's own host and token, as the printed URL carries them
    client = TestClient(app, base_url="http://127.0.0.1:8765", headers={"X-Trimtab-Token": app.state.token})
    opened = time.perf_counter() - started
    cap = explorer.limits["tracking_error.max"].value
    assert cap is not None
    caps = [round(cap * factor, 6) for factor in (0.8, 0.9, 0.85, 0.95, 0.75, 0.88, 0.82, 0.92)[:n_changes]]
    rows: dict[str, list[float]] = {k: [] for k in ("page", "page_solve", "api", "api_solve", "fresh")}
    for value in caps:
        body = {"limits": {"tracking_error.max": value}}
        t0 = time.perf_counter()
        view = client.post("/page/solve", json=body).json()
        rows["page"].append(time.perf_counter() - t0)
        rows["page_solve"].append(view["seconds"]["solve"])
        assert view["status"] == "solved", view
        # the API: the solve inside the request is timed by wrapping the explorer's solve
        solve_seconds: list[float] = []
        original: Callable[..., Any] = explorer.solve

        def timed(changes: Any, _original: Callable[..., Any] = original) -> Any:
            variant = _original(changes)
            solve_seconds.append(variant.seconds["solve"])
            return variant

        explorer.solve = timed  # type: ignore[method-assign]
        t0 = time.perf_counter()
        document = client.post("/api/solve", json={"limits": {"tracking_error.max": round(value * 1.01, 6)}}).json()
        rows["api"].append(time.perf_counter() - t0)
        explorer.solve = original  # type: ignore[method-assign]
        rows["api_solve"].append(solve_seconds[0])
        assert document["kind"] == "rebalance", document.get("run")
        # the baseline: the same changed scenario built and solved afresh
        mapping = apply(explorer.mapping, {"tracking_error.max": value})
        t0 = time.perf_counter()
        build_problem(explorer.inputs.model, mapping, **explorer.inputs.rebalance_kwargs()).solve()
        rows["fresh"].append(time.perf_counter() - t0)
    return {"opened": opened, **{k: median(v) for k, v in rows.items()}}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="a 600-stock demo and 1,000 x 20 instead of 5,000 x 50")
    parser.add_argument("--changes", type=int, default=8, help="changes timed per instance (at most 8)")
    args = parser.parse_args()
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores; medians of {args.changes} changes of the TE cap")
    print(f"{'instance':<22}{'open':>8}{'page change':>13}{'solve':>8}{'rest':>8}{'API change':>12}{'solve':>8}{'rest':>8}"
          f"{'fresh solve':>13}{'page/fresh':>12}{'API/fresh':>11}")
    with tempfile.TemporaryDirectory(prefix="trimtab-explore-bench-") as tmp:
        instances = [("demo (1,500 x 15)" if not args.quick else "demo (600 x 15)", lambda f: demo_scenario(f, args.quick))]
        size = (1000, 20) if args.quick else (5000, 50)
        instances.append((f"{size[0]:,} x {size[1]}", lambda f: speed_scenario(f, *size)))
        for label, make in instances:
            folder = Path(tmp) / label.split()[0].replace(",", "")
            folder.mkdir()
            r = measure(make(folder), args.changes)
            print(f"{label:<22}{r['opened']:>7.2f}s{r['page']:>12.3f}s{r['page_solve']:>7.3f}s{r['page'] - r['page_solve']:>7.3f}s"
                  f"{r['api']:>11.3f}s{r['api_solve']:>7.3f}s{r['api'] - r['api_solve']:>7.3f}s{r['fresh']:>12.3f}s"
                  f"{r['page'] / r['fresh']:>11.2f}x{r['api'] / r['fresh']:>10.2f}x")
    print("open: load the scenario and its files, build, solve as written; a change: request to updated document; "
          "solve: warm re-solve with verification and result; rest: the page's figures and HTML (or the result.json "
          "document) and JSON; fresh solve: build_problem + solve of the same limits.")


if __name__ == "__main__":
    main()
