"""Issue #22's acceptance check, run as an outside reviewer would: 120 invented accounts on 400 names,
one made infeasible by an override, one with exclusions, an aggregate cap of 5% of ADV (and pooled
impact); every figure recomputed here with numpy from the public result's tables."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import trimtab
from tests.runs.accounts._book import MAX_WEIGHT, SCENARIO, accounts, market

N_ASSETS, N_ACCOUNTS, CAP = 400, 120, 0.05
BAD, EXCLUDING = "acct0007", "acct0042"


@pytest.fixture(scope="module")
def case():
    model, alpha, bench, attributes = market(N_ASSETS)
    book = accounts(model, N_ACCOUNTS, 60)
    # impossible: a 0.1% tracking-error cap reached with 1% one-way turnover from a 60-name book
    book[BAD]["limits"] = {"tracking_error.max": 0.001, "turnover.max": 0.01}
    held = book[EXCLUDING]["holdings"]
    # three held names it can sell whole inside its share of the cap (a position larger than the cap
    # cannot be sold to zero in one rebalance: that account would be reported, with that conflict)
    shares = held * book[EXCLUDING]["nav"] / attributes["price"].reindex(held.index)
    sellable = held.index[(shares < 0.3 * CAP * attributes["adv"].reindex(held.index)).to_numpy()]
    excluded = list(sellable[:3]) + [a for a in model.assets if a not in held.index][:2]
    book[EXCLUDING]["exclude"] = excluded
    book["acct0050"]["limits"] = {"tracking_error.max": 0.07}  # an override kept, checked below
    inputs = dict(alpha=alpha, benchmark=bench, attributes=attributes,
                  aggregate={"max_adv_fraction": CAP, "impact": 0.1})
    result = trimtab.rebalance_accounts(model, SCENARIO, book, **inputs)
    return model, bench, attributes, book, excluded, inputs, result


def test_119_solved_and_the_bad_one_reported(case) -> None:
    *_, result = case
    s = result.summary
    assert len(s) == N_ACCOUNTS
    assert (s["status"] == "solved").sum() == N_ACCOUNTS - 1
    assert s.at[BAD, "status"] == "infeasible"
    assert "tracking_error.max" in s.at[BAD, "reason"] and "tracking_error.max" in s.at[BAD, "conflict"]
    assert list(result.failed.index) == [BAD]
    assert result.converged and result.rounds > 1
    assert BAD not in result.weights.columns
    with pytest.raises(trimtab.InputError, match=r"account 'acct0007' was not solved \(infeasible"):
        result[BAD]


def test_every_solved_account_keeps_its_limits(case) -> None:
    model, bench, _, book, _, _, result = case
    # dense Σ = B·F·Bᵀ + diag(d): fine for 400 names in a test (never on a production path)
    sigma = model.exposures.to_numpy() @ model.factor_covariance.to_numpy() @ model.exposures.to_numpy().T
    sigma += np.diag(model.specific_variance.to_numpy())
    b = bench.reindex(model.assets).to_numpy()
    tol = 1e-6
    for name in result.weights.columns:
        w = result.weights[name].to_numpy()
        w0 = book[name]["holdings"].reindex(model.assets).fillna(0.0).to_numpy()
        limits = {"tracking_error.max": 0.08, "turnover.max": 0.5, **book[name].get("limits", {})}
        te = np.sqrt(model.periods_per_year * (w - b) @ sigma @ (w - b))
        assert abs(w.sum() - 1.0) < tol, name                       # fully_invested
        assert w.min() > -tol and w.max() < MAX_WEIGHT + tol, name   # long_only, weight.max
        assert te <= limits["tracking_error.max"] * (1 + tol), name
        assert 0.5 * np.abs(w - w0).sum() <= limits["turnover.max"] + tol, name
        assert result.summary.at[name, "tracking_error"] == pytest.approx(te, rel=1e-9)
        assert result.summary.at[name, "turnover"] == pytest.approx(0.5 * np.abs(w - w0).sum(), abs=1e-9)


def test_excluded_names_end_at_zero(case) -> None:
    model, *_, excluded, _, result = case
    assert np.all(np.abs(result.weights.loc[excluded, EXCLUDING].to_numpy()) < 1e-9)
    sold = result.orders[(result.orders["account"] == EXCLUDING) & result.orders["asset"].isin(excluded)]
    assert set(sold["side"]) <= {"sell"}


def test_the_aggregate_cap_holds_summed_from_the_orders(case) -> None:
    _, _, attributes, _, _, _, result = case
    orders = result.orders
    # recompute each order's shares from its notional and price, then sum per name over all accounts
    assert np.allclose(orders["shares"], orders["notional"] / orders["price"])
    gross = orders.groupby("asset")["shares"].sum()
    adv = attributes["adv"].reindex(gross.index)
    assert (gross <= CAP * adv * (1 + 1e-6)).all(), (gross / adv).max()
    assert result.blocks["capped"].sum() > 0  # the cap did bind somewhere: the check is not empty
    assert np.allclose(result.blocks.loc[gross.index, "gross"], gross)
    # what each account gave up is demand − allotment, and the allotments fit under the cap
    given = result.given_up
    assert (given["given_up"] >= 0).all()
    allotted = given.groupby("asset")["allotted"].sum()
    assert (allotted <= CAP * attributes["adv"].reindex(allotted.index) * (1 + 1e-9)).all()


def test_orders_match_the_weights(case) -> None:
    model, _, attributes, book, *_, result = case
    name = "acct0003"
    own = result.orders[result.orders["account"] == name].set_index("asset")
    w = result.weights[name]
    w0 = book[name]["holdings"].reindex(model.assets).fillna(0.0)
    trade = (w - w0)[own.index]
    assert np.allclose(own["notional"], trade.abs() * book[name]["nav"])
    assert (own["side"] == np.where(trade > 0, "buy", "sell")).all()
    single = result[name]  # the account's own rebalance result
    # re-solved on request from the same inputs and final prices (a warm start moves it by < 1e-8)
    assert np.allclose(single.weights.reindex(model.assets).fillna(0.0), w, atol=1e-8)


@pytest.mark.slow
def test_a_two_worker_dask_run_gives_the_same_weights(case) -> None:
    distributed = pytest.importorskip("distributed")
    model, _, _, book, _, inputs, result = case
    from trimtab.runs._executors import STARTUP_TIMEOUT, local_cluster_options

    cluster = distributed.LocalCluster(**local_cluster_options(2))
    try:
        with trimtab.get_executor("dask", scheduler=cluster.scheduler_address, connect_timeout=STARTUP_TIMEOUT) as ex:
            ex.client.wait_for_workers(2, timeout=STARTUP_TIMEOUT)
            remote = trimtab.rebalance_accounts(model, SCENARIO, book, executor=ex, **inputs)
    finally:
        cluster.close()
    assert list(remote.summary["status"]) == list(result.summary["status"])
    assert list(remote.weights.columns) == list(result.weights.columns)
    assert np.abs(remote.weights - result.weights).to_numpy().max() < 1e-6
    assert remote.rounds == result.rounds
    # an account's own result is re-solved here on request
    assert np.abs(remote["acct0003"].weights.reindex(model.assets).fillna(0.0) - result.weights["acct0003"]).max() < 1e-6
