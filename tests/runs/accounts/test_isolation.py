"""One account's bad data, infeasible limits or failure never stops the others (issue #22)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import trimtab
from tests.runs.accounts._book import SCENARIO, accounts, market
from trimtab.runs._executors import Executor, InProcessExecutor, Outcome, _outcome


@pytest.fixture(scope="module")
def small():
    model, alpha, bench, attributes = market(60, seed=4, n_factors=3)
    return model, alpha, bench, attributes, accounts(model, 8, 30, seed=2)


def run(small, book, **kwargs):
    model, alpha, bench, attributes, _ = small
    return trimtab.rebalance_accounts(model, SCENARIO, book, alpha=alpha, benchmark=bench, attributes=attributes, **kwargs)


def test_bad_accounts_are_reported_and_the_others_solved(small) -> None:
    book = {k: dict(v) for k, v in small[4].items()}
    names = list(book)
    book[names[0]]["holdings"] = pd.concat([book[names[0]]["holdings"], pd.Series({"NOPE": 0.0})])
    book[names[1]]["nav"] = -5.0
    book[names[2]]["limits"] = {"no_such_limit.max": 0.1}
    book[names[3]]["exclude"] = ["ZZZ"]
    book[names[4]]["limits"] = {"tracking_error.max": 0.0005, "turnover.max": 0.001}
    result = run(small, book, aggregate={"max_adv_fraction": 0.05})
    s = result.summary
    assert list(s["status"]) == ["failed", "failed", "failed", "failed", "infeasible", "solved", "solved", "solved"]
    assert "account acct0000: holdings: assets not in the risk model: NOPE" in s.at[names[0], "reason"]
    assert "account acct0001: nav: expected a number in [0, inf], got -5.0" in s.at[names[1], "reason"]
    assert "constraints.no_such_limit" in s.at[names[2], "reason"]
    assert "account acct0003: exclude: assets not in the risk model: ZZZ" in s.at[names[3], "reason"]
    assert "tracking_error.max" in s.at[names[4], "conflict"]
    assert list(result.weights.columns) == names[5:]
    assert set(result.orders["account"]) == set(names[5:])


class _LosesOneChunk(Executor):
    """In process, but the chunk holding ``victim`` comes back lost, as from a dead worker."""

    kind = "inprocess"

    def __init__(self, victim: str) -> None:
        self.victim = victim

    @property
    def n_workers(self) -> int:
        return 3  # several chunks, so one can be lost

    def _run(self, func, items, labels, shared):
        for i, item in enumerate(items):
            if any(a.name == self.victim for a in item.accounts):
                yield _outcome(labels, items, i, False, "KilledWorker: the worker died")
            else:
                yield from InProcessExecutor._run(self, func, [item], [labels[i]], shared)


def test_a_lost_chunk_fails_its_accounts_only(small) -> None:
    book = small[4]
    result = run(small, book, executor=_LosesOneChunk("acct0000"))
    s = result.summary
    lost = s[s["status"] == "failed"]
    assert "acct0000" in lost.index and 0 < len(lost) < len(book)
    assert lost["reason"].str.contains("its chunk failed: KilledWorker: the worker died").all()
    assert (s.drop(lost.index)["status"] == "solved").all()


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"accounts": []}, r"accounts: expected a mapping of account name"),
    ({"accounts": {}}, r"accounts: no accounts given"),
    ({"accounts": {"a": {"holdings": pd.Series(dtype=float), "nav": 1.0, "navv": 2}}}, r"accounts\['a'\]\.navv: unknown key; did you mean nav\?$"),
    ({"accounts": {"a": {"nav": 1.0}}}, r"accounts\['a'\]: holdings missing"),
    ({"accounts": {"a": {"holdings": pd.Series(dtype=float), "kind": "lots"}}}, r"accounts\['a'\]\.kind: expected one of weights, shares"),
    ({"aggregate": {"max_adv_fraction": 5}}, r"aggregate.max_adv_fraction: expected a number in \[0, 1\], got 5"),
    ({"aggregate": {"max_adv_frac": 0.05}}, r"aggregate.max_adv_frac: unknown key; did you mean max_adv_fraction\?$"),
    ({"aggregate": {"max_adv_fraction": 0.05, "adv_column": "volume"}}, r"aggregate.adv_column: needs the attribute column 'volume'"),
], ids=["not-a-mapping", "empty", "unknown-account-key", "no-holdings", "bad-kind", "cap-as-percent", "unknown-aggregate-key", "no-adv-column"])
def test_caller_mistakes_raise_before_anything_is_solved(small, kwargs, message) -> None:
    book = kwargs.pop("accounts", small[4])
    with pytest.raises(trimtab.InputError, match=message):
        run(small, book, **kwargs)


def test_shares_with_prices_and_the_weights_agree(small) -> None:
    model, alpha, bench, attributes, book = small
    name = "acct0001"
    nav = book[name]["nav"]
    shares = book[name]["holdings"] * nav / attributes["price"].reindex(book[name]["holdings"].index)
    as_shares = {name: {"holdings": shares, "kind": "shares", "cash": 0.0}}
    a = run(small, as_shares)
    b = run(small, {name: book[name]})
    assert a.summary.at[name, "nav"] == pytest.approx(nav)
    assert np.abs(a.weights[name] - b.weights[name]).max() < 1e-7


@pytest.mark.slow
def test_a_process_pool_gives_the_same_answers(small) -> None:
    book = {k: dict(v) for k, v in small[4].items()}
    book["acct0003"]["limits"] = {"tracking_error.max": 0.0005, "turnover.max": 0.001}
    here = run(small, book, aggregate={"max_adv_fraction": 0.05})
    with trimtab.get_executor("processes", workers=2) as pool:
        there = run(small, book, aggregate={"max_adv_fraction": 0.05}, executor=pool)
    assert list(there.summary["status"]) == list(here.summary["status"])
    assert np.abs(there.weights - here.weights).to_numpy().max() < 1e-7
    assert there.summary.at["acct0003", "conflict"] == here.summary.at["acct0003", "conflict"]
