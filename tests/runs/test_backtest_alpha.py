"""A backtest whose alpha loads on a factor the risk model lacks, with and without the alpha factor (#24).

Simulation (seeded): r = B·f + q·h + ε with f ~ N(0, F), h ~ N(0, σₕ²/P), ε ~ N(0, D). The risk
model is the truth without h (B, F, D); the alpha is 2%·q, with q built orthogonal to B, so all of it
is outside the model's span and it loads wholly on the missing factor. Expected (Ceria, Saxena and
Stubbs 2012): maximising that alpha under a TE cap piles into q, so realised active risk exceeds
the forecast beyond the bias band 1 ± √(2/T) (the band of :func:`trimtab.model.bias_statistic`);
with ``alpha_factor: {volatility: σₕ·rms(q)}`` the augmented model is the truth, and the bias
statistic is inside the band.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

import trimtab
from trimtab.model import FactorModel, alpha_alignment

N, K, P = 80, 3, 252
N_DATES = 80
HIDDEN_VOL = 0.06
SCENARIO = {
    "objective": {"maximize": "alpha"},
    "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.05}, "tracking_error": {"max": 0.03}},
}


def _market() -> tuple[FactorModel, pd.DataFrame, pd.Series, float]:
    rng = np.random.default_rng(2024)
    assets = [f"S{i:03d}" for i in range(N)]
    factors = [f"f{k}" for k in range(K)]
    B = pd.DataFrame(np.column_stack([np.ones(N) + 0.2 * rng.normal(size=N), rng.normal(size=(N, K - 1))]), index=assets, columns=factors)
    F = pd.DataFrame(np.diag([0.15, 0.05, 0.05]) ** 2 / P, index=factors, columns=factors)
    d = pd.Series((0.25 * np.exp(0.2 * rng.normal(size=N))) ** 2 / P, index=assets)
    model = FactorModel(B, F, d, periods_per_year=P)
    q = alpha_alignment(model, pd.Series(rng.normal(size=N), index=assets)).orthogonal.to_numpy()
    T = N_DATES + 2
    f = rng.multivariate_normal(np.zeros(K), F.to_numpy(), size=T)
    h = rng.normal(0.0, HIDDEN_VOL / np.sqrt(P), size=T)
    eps = rng.normal(size=(T, N)) * np.sqrt(d.to_numpy())
    returns = pd.DataFrame(f @ B.to_numpy().T + np.outer(h, q) + eps, index=pd.bdate_range("2024-01-01", periods=T), columns=assets)
    rms = float(np.sqrt(np.mean(q**2)))
    return model, returns, pd.Series(0.02 * q, index=assets), HIDDEN_VOL * rms


def test_missing_factor_biases_risk_until_the_alpha_factor_prices_it() -> None:
    model, returns, alpha, volatility = _market()
    bench = pd.Series(1.0 / N, index=model.assets)
    result = trimtab.backtest(
        returns, pd.DataFrame([alpha], index=returns.index[:1]),
        {"plain": SCENARIO, "priced": {**SCENARIO, "alpha_factor": {"volatility": volatility}}},
        window=2, frequency=1, fit=lambda window_returns, window_factors: model, benchmark=bench,
    )
    bias = result.bias
    plain, priced = bias.loc["plain"], bias.loc["priced"]
    assert plain["n_periods"] == priced["n_periods"] == N_DATES
    # without the alpha factor: realised active risk beyond the upper end of the band
    assert plain["statistic"] > plain["upper"]
    # with it the forecast is the truth's: inside the band, and the forecast TE is held to the cap
    assert priced["lower"] <= priced["statistic"] <= priced["upper"]
    history = result.history
    # held to the cap to the solver's tolerance, after trades below the 1e-6-of-NAV floor are dropped
    assert np.allclose(history.loc["priced", "forecast_te"], 0.03, rtol=0, atol=1e-6)
    assert "alpha_factor" in result.exposures.columns
    text = result.summary()
    assert "risk forecast on the model with the alpha factor" in text
    # one alpha row read at every date: the summary says so
    assert result.settings["alpha_rows_used"] == 1
    assert "one alpha vector is reused at every date" in text


def test_an_alpha_history_is_read_date_by_date() -> None:
    model, returns, alpha, _ = _market()
    rng = np.random.default_rng(5)
    history = pd.DataFrame(rng.normal(0, 0.02, (len(returns), N)), index=returns.index, columns=model.assets)
    total_risk = {"objective": {"maximize": "alpha"},
                  "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.05}, "total_risk": {"max": 0.2}}}
    result = trimtab.backtest(returns, history, {"plain": total_risk}, window=2, frequency=40,
                              fit=lambda window_returns, window_factors: model)
    dates = result.settings["rebalance_dates"]
    assert result.settings["alpha_rows_used"] == len(dates) > 1
    assert "reused" not in result.summary()
    expected = [float(history.loc[date] @ result.weights["plain"].loc[date]) for date in dates]
    np.testing.assert_allclose(result.history.loc["plain", "expected_alpha"], expected, rtol=1e-10)
