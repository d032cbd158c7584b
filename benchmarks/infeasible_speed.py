"""An infeasible rebalance against a feasible one of the same fund, in the same run (#21).

    python benchmarks/infeasible_speed.py [--quick] [--repeat 3] [--sizes demo,1500x15,5000x50]

For each fund: the feasible rebalance (its scenario as written) and the infeasible one (a TE cap below
what the turnover cap lets the book reach), timed alternately ``--repeat`` times in one process
after a first run of each (imports, cvxpy's first compile), so the ratio is taken under the same
load. The infeasible run is timed twice: on the default path (FACTOR_IPM, then the diagnosis with
its feasibility tests and one-limit relaxations in factor form) and on the cvxpy/Clarabel path
(``solvers=["CLARABEL"]``: the diagnosis as it ran before #21, apart from the FACTOR_IPM attempt).
Both must name the same conflict set, which is printed. Beside the wall-clock ratio: the ratio of
this process's CPU seconds (steadier on shared cores) and FACTOR_IPM's iterations in each run
(noise-free: the infeasible run's diagnosis makes several solves). The issue's figures (measured before #21,
2 shared cores, load under 1.1) are printed beside them. Asserts nothing but the equal conflict sets.

Funds: the demo (1,500 stocks, 15 factors, scenarios/base.yaml and infeasible.yaml: TE cap 0.5%,
turnover 2%; ``--quick``: 600 stocks), and benchmarks/_instances.py's speed instance at 1,500 × 15
and 5,000 × 50 with a 2% turnover cap (feasible: TE cap 2%; infeasible: TE cap 0.2% at 1,500, 0.02% at
5,000, where 0.2% is within reach). Invented data.
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

sys.path.insert(0, os.path.dirname(__file__))
from _instances import speed_instance  # noqa: E402

from trimtab.construct import _ipm, rebalance  # noqa: E402
from trimtab.errors import InfeasibleError  # noqa: E402

#: issue #21's table: (infeasible s, feasible s, ratio) before #21
BEFORE = {"demo": ("2.4–2.9", "0.045", "~58×"), "1500x15": ("3.9", "0.052", "75×"),
          "5000x50": ("11.4–13.3", "0.29", "41×")}


def demo_cases(quick: bool) -> tuple[Callable[..., Any], Callable[..., Any]]:
    from trimtab.demo import make_demo_fund
    from trimtab.scenario import fit_model, load_fit_config, load_inputs, load_scenario, write_demo

    folder = Path(tempfile.mkdtemp(prefix="trimtab-infeasible-"))
    fund = make_demo_fund(n_assets=600, n_holdings=120, n_days=600, seed=3) if quick else make_demo_fund()
    write_demo(fund, folder)
    config = folder / "fit.yaml"
    fit_model(load_fit_config(config), config).save(folder / "model")

    def case(name: str) -> Callable[..., Any]:
        scenario = load_scenario(folder / f"{name}.yaml")
        inputs = load_inputs(scenario)
        mapping, kwargs = scenario.rebalance_mapping(), inputs.rebalance_kwargs()
        return lambda solvers=None: rebalance(inputs.model, mapping, solvers=solvers, **kwargs)

    return case("base"), case("infeasible")


def speed_cases(n: int, k: int) -> tuple[Callable[..., Any], Callable[..., Any]]:
    inst = speed_instance(n, k)
    book = inst.book()

    def case(te: float) -> Callable[..., Any]:
        scenario = inst.scenario(tracking_error_max=te, turnover_max=0.02)
        return lambda solvers=None: rebalance(inst.model, scenario, solvers=solvers, **book)

    return case(0.02), case(0.002 if n < 5000 else 0.0002)


#: FACTOR_IPM iterations of the run being timed (counted by a wrapper around _ipm.solve)
ITERATIONS = [0]


def _counting() -> None:
    original = _ipm.solve

    def counted(qp: Any, **kwargs: Any) -> Any:
        solution = original(qp, **kwargs)
        ITERATIONS[0] += solution.iterations
        return solution

    _ipm.solve = counted


def timed(run: Callable[[], Any]) -> tuple[float, list[str] | None, float, int]:
    """Wall seconds, the conflict set (None: solved), CPU seconds of this process, FACTOR_IPM iterations."""
    ITERATIONS[0] = 0
    start, cpu = time.perf_counter(), time.process_time()
    try:
        run()
        conflict = None
    except InfeasibleError as err:
        conflict = err.conflict
    return time.perf_counter() - start, conflict, time.process_time() - cpu, ITERATIONS[0]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--sizes", default="demo,1500x15,5000x50")
    args = parser.parse_args()
    _counting()
    print("| fund | feasible | infeasible | ratio | CPU ratio | FACTOR_IPM iterations (inf / feas) | cvxpy/Clarabel path "
          "| its ratio | before #21 (inf / feas / ratio) | conflict set |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for size in args.sizes.split(","):
        if size == "demo":
            feasible, infeasible = demo_cases(args.quick)
        else:
            n, k = (int(x) for x in size.split("x"))
            feasible, infeasible = speed_cases(n, k)
        timed(feasible)
        timed(infeasible)
        timed(lambda: infeasible(["CLARABEL"]))
        times: dict[str, list[float]] = {"feasible": [], "infeasible": [], "clarabel": []}
        cpu: dict[str, list[float]] = {"feasible": [], "infeasible": []}
        iterations: dict[str, int] = {}
        conflicts = set()
        for _ in range(args.repeat):
            t, _, c, iterations["feasible"] = timed(feasible)
            times["feasible"].append(t)
            cpu["feasible"].append(c)
            t, conflict, c, iterations["infeasible"] = timed(infeasible)
            times["infeasible"].append(t)
            cpu["infeasible"].append(c)
            conflicts.add(tuple(conflict or ()))
            t, conflict, _, _ = timed(lambda: infeasible(["CLARABEL"]))
            times["clarabel"].append(t)
            conflicts.add(tuple(conflict or ()))
        assert len(conflicts) == 1, f"the paths name different conflict sets: {conflicts}"
        assert next(iter(conflicts)), f"{size}: the infeasible case solved"
        med = {key: statistics.median(v) for key, v in times.items()}
        spread = {key: f"{min(v):.3f}–{max(v):.3f}" for key, v in times.items()}
        before = BEFORE.get(size, ("", "", ""))
        print(f"| {size} | {med['feasible']:.3f} s ({spread['feasible']}) | {med['infeasible']:.3f} s ({spread['infeasible']})"
              f" | {med['infeasible'] / med['feasible']:.1f}×"
              f" | {statistics.median(cpu['infeasible']) / statistics.median(cpu['feasible']):.1f}×"
              f" | {iterations['infeasible']} / {iterations['feasible']}"
              f" | {med['clarabel']:.3f} s ({spread['clarabel']})"
              f" | {med['clarabel'] / med['feasible']:.1f}× | {before[0]} / {before[1]} / {before[2]} "
              f"| {', '.join(next(iter(conflicts)))} |", flush=True)
    print(f"\nmedians of {args.repeat} alternating runs (min–max); load average {', '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
