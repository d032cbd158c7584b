"""The scenario key ``alpha_factor``: a rebalance on the model augmented with the alpha factor (issue #24).

Data: ``linearmodels.datasets.french.load()`` (monthly, 30 portfolios on MktRF, SMB, HML, Mom); the
alpha is each portfolio's mean excess return over the last five years, annualised, plus a part
built to lie outside the factor span (the residual of a seeded random vector on the exposures).
Checks: the reported tracking error equals √(P·aᵀΣ'a) on the augmented model computed here
independently (dense Σ + (σ²/P)·y·yᵀ, N = 30), the cap holds, and the book's exposure to the
unspanned alpha y is smaller than without the factor.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from linearmodels.datasets import french

import trimtab
from trimtab import ScenarioError, fit_time_series
from trimtab.construct import validate_scenario
from trimtab.model import alpha_alignment

FACTORS = ["MktRF", "SMB", "HML", "Mom"]
CAP = 0.02
SCENARIO = {
    "objective": {"maximize": "alpha"},
    "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.2}, "tracking_error": {"max": CAP}},
}


@pytest.fixture(scope="module")
def setting() -> tuple[trimtab.FactorModel, pd.Series, pd.Series]:
    data = french.load().set_index("dates")
    portfolios = data.columns[5:]
    excess = data[portfolios].sub(data["RF"], axis=0)
    model = fit_time_series(excess, data[FACTORS], periods_per_year=12)
    rng = np.random.default_rng(24)
    hidden = alpha_alignment(model, pd.Series(rng.normal(0, 0.03, model.n_assets), index=model.assets)).orthogonal
    alpha = (excess.tail(60).mean() * 12).reindex(model.assets) + hidden
    bench = pd.Series(1.0 / model.n_assets, index=model.assets)
    return model, alpha, bench


def test_rebalance_with_alpha_factor_reports_the_augmented_tracking_error(setting) -> None:
    model, alpha, bench = setting
    sigma = 0.04
    plain = trimtab.rebalance(model, SCENARIO, alpha=alpha, benchmark=bench, holdings=bench)
    priced = trimtab.rebalance(model, {**SCENARIO, "alpha_factor": {"volatility": sigma}}, alpha=alpha, benchmark=bench, holdings=bench)
    # independent reference: y from numpy lstsq, Σ' dense (closed form Σ + (σ²/P)·y·yᵀ)
    B, a = model.exposures.to_numpy(), alpha.to_numpy()
    e = a - B @ np.linalg.lstsq(B, a, rcond=None)[0]
    y = e / np.sqrt(np.mean(e**2))
    dense = model.covariance().to_numpy() + sigma**2 / 12 * np.outer(y, y)
    for result in (plain, priced):
        active = (result.weights - bench).to_numpy()
        te_augmented = np.sqrt(12 * active @ dense @ active)
        te_base = np.sqrt(12 * active @ model.covariance().to_numpy() @ active)
        assert te_base <= CAP * (1 + 1e-6) or result is priced
        if result is priced:
            assert result.ex_ante["tracking_error"] == pytest.approx(te_augmented, rel=1e-10)
            assert result.post_trade.risk == pytest.approx(te_augmented, rel=1e-10)
            assert te_augmented <= CAP * (1 + 1e-6)
        else:
            # without the factor the optimizer spends the budget on risk the model cannot see
            assert te_augmented > CAP * 1.05
    exposure = {name: abs(y @ (r.weights - bench).to_numpy()) for name, r in (("plain", plain), ("priced", priced))}
    assert exposure["priced"] < 0.8 * exposure["plain"]
    assert "alpha_factor" in priced.post_trade.by_factor.index
    assert priced.alpha_factor["volatility"] == sigma
    assert plain.alpha_factor is None
    text = priced.summary()
    assert "Risk includes the alpha factor (volatility 4.00%" in text
    assert "Alpha spanned by the model's factors" in text


def test_unspanned_alpha_is_a_warning_unless_priced(setting) -> None:
    model, alpha, bench = setting
    hidden = alpha_alignment(model, alpha).orthogonal
    plain = trimtab.rebalance(model, SCENARIO, alpha=hidden, benchmark=bench, holdings=bench)
    kinds = [w.kind for w in plain.warnings]
    assert "unspanned_alpha" in kinds
    assert plain.alpha_alignment.spanned_share == pytest.approx(0.0, abs=1e-10)
    priced = trimtab.rebalance(model, {**SCENARIO, "alpha_factor": {"volatility": 0.03}}, alpha=hidden, benchmark=bench, holdings=bench)
    assert "unspanned_alpha" not in [w.kind for w in priced.warnings]


def test_a_new_alpha_re_derives_the_alpha_factor(setting) -> None:
    model, alpha, bench = setting
    problem = trimtab.build_problem(model, {**SCENARIO, "alpha_factor": {"volatility": 0.03}}, alpha=alpha, benchmark=bench, holdings=bench)
    other = alpha.iloc[::-1].set_axis(alpha.index)
    again = problem.update(alpha=other)
    direct = model.with_alpha_factor(other, 0.03)
    np.testing.assert_allclose(again.model.exposures.to_numpy(), direct.exposures.to_numpy(), rtol=1e-12, atol=1e-15)
    assert again.model.n_factors == model.n_factors + 1


@pytest.mark.parametrize(
    ("alpha_factor", "message"),
    [
        ({"volatility": 3}, r"alpha_factor\.volatility: 3 would mean 300%.*did you mean 0\.03\?"),
        ({"volatility": 0}, r"alpha_factor\.volatility: must be > 0"),
        ({"vol": 0.03}, r"alpha_factor\.vol: unknown key; allowed here: volatility"),
        ({}, r"alpha_factor: missing required key\(s\) volatility"),
        (0.03, r"alpha_factor: expected a mapping, got 0\.03"),
    ],
    ids=["percent", "zero", "unknown-key", "missing", "not-a-mapping"],
)
def test_alpha_factor_key_is_strict(alpha_factor, message: str) -> None:
    with pytest.raises(ScenarioError, match=message):
        validate_scenario({**SCENARIO, "alpha_factor": alpha_factor})


def test_alpha_factor_needs_an_alpha_objective() -> None:
    with pytest.raises(ScenarioError, match=r"alpha_factor: prices the alpha the factors miss; the objective must maximize alpha or utility"):
        validate_scenario({"objective": {"minimize": "active_risk"}, "alpha_factor": {"volatility": 0.03}})
    spec = validate_scenario({**SCENARIO, "alpha_factor": {"volatility": 0.03}})
    assert spec.mapping["alpha_factor"] == {"volatility": 0.03}
