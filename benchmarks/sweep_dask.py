"""A 24-point tracking-error sweep at 5,000 × 50: in process against a two-worker Dask LocalCluster.

    python benchmarks/sweep_dask.py [--points 24] [--assets 5000] [--factors 50] [--repeat 3] [--with-trim]

The instance is benchmarks/_instances.py's speed instance (invented, seeded). The sweep runs in one
process (one chunk: each point re-solved warm from its neighbour), then on a LocalCluster of two
single-threaded workers (two chunks of neighbouring points, each re-solved warm; the model
scattered once). Cluster start-up is timed apart. Runs alternate in process / cluster, ``--repeat``
times, and the ratio of each pair is printed, so load from other processes on the machine shows as
spread between pairs. ``--with-trim`` also times a cluster with dask's own default
(``MALLOC_TRIM_THRESHOLD_=65536`` in its workers), for the comparison of #21. Figures are checked
equal between the runs. Asserts nothing.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(__file__))
from _instances import speed_instance  # noqa: E402

from trimtab.runs import get_executor, sweep  # noqa: E402
from trimtab.runs import _executors  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=24)
    parser.add_argument("--assets", type=int, default=5000)
    parser.add_argument("--factors", type=int, default=50)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--with-trim", action="store_true")
    args = parser.parse_args()
    inst = speed_instance(args.assets, args.factors, seed=0)
    grid = {"tracking_error.max": list(np.linspace(0.01, 0.04, args.points))}
    book = inst.book()

    def run(executor=None) -> tuple[float, object]:
        start = time.perf_counter()
        out = sweep(inst.model, inst.scenario(), grid, executor=executor, **book)
        return time.perf_counter() - start, out

    run()  # imports and first-touch costs, in process
    clusters = [("2-worker LocalCluster", ())]
    if args.with_trim:
        clusters.append(("2 workers, dask's MALLOC_TRIM_THRESHOLD_", ("MALLOC_TRIM_THRESHOLD_",)))
    print(f"{args.points}-point TE sweep at {args.assets:,} × {args.factors}, {args.repeat} alternating repeats")
    for name, keep in clusters:
        saved = _executors.WORKER_ENV_UNSET
        _executors.WORKER_ENV_UNSET = tuple(v for v in saved if v not in keep)
        start = time.perf_counter()
        with get_executor("dask", workers=2) as cluster:
            started = time.perf_counter() - start
            _executors.WORKER_ENV_UNSET = saved
            run(cluster)  # workers import trimtab and receive the model
            local_t, remote_t, ratios = [], [], []
            for _ in range(args.repeat):
                t_local, local = run()
                t_remote, remote = run(cluster)
                local_t.append(t_local)
                remote_t.append(t_remote)
                ratios.append(t_remote / t_local)
                a, b = local.table["tracking_error"].to_numpy(), remote.table["tracking_error"].to_numpy()
                assert np.allclose(a, b, rtol=1e-5, atol=1e-8, equal_nan=True), "figures differ"
        print(f"\n{name} (start-up {started:.1f} s, not in the figures)")
        print(f"  in process : median {statistics.median(local_t):6.2f} s   runs {', '.join(f'{t:.2f}' for t in local_t)}")
        print(f"  on cluster : median {statistics.median(remote_t):6.2f} s   runs {', '.join(f'{t:.2f}' for t in remote_t)}")
        print(f"  cluster / in process: median {statistics.median(ratios):.2f}   pairs {', '.join(f'{r:.2f}' for r in ratios)}"
              "   (target ≤ 1)")
    print(f"\nload average: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
