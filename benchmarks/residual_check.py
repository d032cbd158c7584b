"""Time and peak memory of check_residuals against dense baselines measured in the same run.

Baselines: one ``numpy.corrcoef`` call on complete data (N × N matrix), and ``pandas.DataFrame.corr``
(pairwise complete observations) on ragged data. Prints ratios; asserts nothing.

Run: python benchmarks/residual_check.py [--assets 2000] [--periods 250]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd

from trimtab.model import check_residuals


def measure(func: Callable[[], Any]) -> tuple[float, float]:
    """Wall time in seconds and peak traced memory in MB of one call."""
    tracemalloc.start()
    start = time.perf_counter()
    func()
    elapsed = time.perf_counter() - start
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return elapsed, peak / 1e6


def dense_count(values: np.ndarray, alpha: float = 0.01) -> int:
    from scipy import stats

    corr = np.corrcoef(values, rowvar=False)
    upper = corr[np.triu_indices_from(corr, 1)]
    z = np.arctanh(np.clip(upper, -1 + 1e-16, 1 - 1e-16)) * np.sqrt(values.shape[0] - 3)
    return int((np.abs(z) > stats.norm.isf(alpha / 2)).sum())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--assets", type=int, default=2000)
    parser.add_argument("--periods", type=int, default=250)
    parser.add_argument("--ragged-assets", type=int, default=600)
    args = parser.parse_args()
    rng = np.random.default_rng(0)

    values = rng.normal(size=(args.periods, args.assets))
    frame = pd.DataFrame(values)
    t_dense, m_dense = measure(lambda: dense_count(values))
    t_block, m_block = measure(lambda: check_residuals(frame, block_size=256))
    result = check_residuals(frame, block_size=256)
    assert result.pairs_significant == dense_count(values)
    print(f"complete data, {args.assets} assets × {args.periods} periods, {result.pairs_tested:,} pairs")
    print(f"  numpy.corrcoef (dense N×N): {t_dense:8.3f} s  peak {m_dense:8.1f} MB")
    print(f"  check_residuals blockwise : {t_block:8.3f} s  peak {m_block:8.1f} MB")
    print(f"  ratio blockwise/dense     : time {t_block / t_dense:6.2f}×  memory {m_block / m_dense:6.2f}×")

    sampled_pairs = result.pairs_tested // 10
    t_sample, m_sample = measure(lambda: check_residuals(frame, max_pairs=sampled_pairs))
    print(f"  sampled {sampled_pairs:,} pairs     : {t_sample:8.3f} s  peak {m_sample:8.1f} MB "
          f"(time {t_sample / t_dense:6.2f}× dense)")

    ragged = rng.normal(size=(args.periods, args.ragged_assets))
    ragged[rng.random(ragged.shape) < 0.2] = np.nan
    ragged_frame = pd.DataFrame(ragged)
    t_pandas, m_pandas = measure(lambda: ragged_frame.corr(min_periods=4))
    t_masked, m_masked = measure(lambda: check_residuals(ragged_frame, block_size=256))
    print(f"ragged data (20% missing), {args.ragged_assets} assets × {args.periods} periods")
    print(f"  pandas DataFrame.corr     : {t_pandas:8.3f} s  peak {m_pandas:8.1f} MB")
    print(f"  check_residuals masked    : {t_masked:8.3f} s  peak {m_masked:8.1f} MB")
    print(f"  ratio masked/pandas       : time {t_masked / t_pandas:6.2f}×  memory {m_masked / m_pandas:6.2f}×")


if __name__ == "__main__":
    main()
