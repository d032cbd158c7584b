"""The demo's alpha history (issue #24): the stated information coefficient is recovered within its
sampling error, the theme lies outside the factor span and earns nothing, and the long file reads back.

Sampling error (a textbook fact, the large-sample variance of a correlation coefficient): for N
pairs the sample correlation has standard deviation ≈ (1 − ρ²)/√N, so the mean of T independent
cross-sectional correlations has ≈ (1 − ρ²)/√(N·T).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.demo import INFORMATION_COEFFICIENT, make_demo_fund
from trimtab.model import FactorModel, alpha_alignment
from trimtab.scenario import load_returns, write_demo
from trimtab.scenario._demo_alpha import EVERY, WINDOW, alpha_long, make_alpha_history
from trimtab.scenario._schema import ReturnsFile


@pytest.fixture(scope="module")
def fund_and_history():
    fund = make_demo_fund(n_assets=600, n_holdings=120, n_days=800, seed=3)
    return fund, make_alpha_history(fund)


def test_information_coefficient_is_recovered_within_its_sampling_error(fund_and_history) -> None:
    _, history = fund_and_history
    ic = history.information_coefficient
    assert ic == INFORMATION_COEFFICIENT
    correlations, counts = [], []
    for date in history.scores.index:
        u, z = history.realised.loc[date], history.scores.loc[date]
        have = u.notna()
        if have.sum() > 10:
            correlations.append(np.corrcoef(z[have], u[have])[0, 1])
            counts.append(int(have.sum()))
    mean = float(np.mean(correlations))
    error = (1 - ic**2) / np.sqrt(np.mean(counts) * len(correlations))
    assert abs(mean - ic) < 4 * error, (mean, error)


def test_schedule_theme_and_span(fund_and_history) -> None:
    fund, history = fund_and_history
    assert list(history.alpha.index) == list(fund.returns.index[WINDOW - 1 :: EVERY])
    # the theme earns exactly nothing over the sample and moves the market it is added to
    assert abs(history.theme_returns.mean()) < 1e-15
    listed = fund.returns.notna().to_numpy()
    moved = (history.returns - fund.returns).to_numpy()
    assert np.array_equal(history.returns.notna().to_numpy(), listed)  # no return before a stock lists
    np.testing.assert_allclose(moved[listed], np.outer(history.theme_returns, history.theme_exposure)[listed], rtol=1e-9, atol=1e-15)
    # most of the alpha is outside the true factor span
    truth = FactorModel(fund.exposures, fund.factor_covariance, fund.specific_variance)
    last = history.alpha.iloc[-1].fillna(0.0)
    assert alpha_alignment(truth, last).spanned_share < 0.1


def test_long_alpha_file_reads_back_as_the_history(fund_and_history, tmp_path) -> None:
    fund, history = fund_and_history
    written = write_demo(fund, tmp_path)
    long = pd.read_csv(written["alpha_history"])
    assert list(long.columns) == ["date", "asset", "alpha"]
    back = load_returns(ReturnsFile.model_validate({"path": str(written["alpha_history"]), "value_column": "alpha"}), what="alpha history")
    expected = history.alpha.dropna(axis=1, how="all")
    pd.testing.assert_frame_equal(back.reindex(columns=expected.columns), expected, check_freq=False, check_names=False, rtol=1e-9)
    assert len(alpha_long(history)) == int(history.alpha.notna().sum().sum())
