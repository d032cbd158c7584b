"""``trimtab accounts``: the files it writes, its exit codes and its one-line errors (issue #22)."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from typer.testing import CliRunner

from trimtab.cli import app


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from tests.demo_helpers import make_demo_folder

    folder = make_demo_folder(tmp_path_factory.mktemp("demo"))
    accounts = pd.read_csv(folder / "data" / "accounts.csv").head(6)
    accounts.loc[2, ["tracking_error.max", "turnover.max"]] = [0.001, 0.01]  # impossible on purpose
    accounts.to_csv(folder / "six.csv", index=False)
    holdings = pd.read_csv(folder / "data" / "account_holdings.csv")
    holdings[holdings["account"].isin(accounts["account"])].to_csv(folder / "six_holdings.csv", index=False)
    return folder


def invoke(*args: str):
    return CliRunner().invoke(app, list(args), catch_exceptions=False)


def test_the_demo_writes_200_accounts(demo) -> None:
    accounts = pd.read_csv(demo / "data" / "accounts.csv")
    holdings = pd.read_csv(demo / "data" / "account_holdings.csv")
    assert len(accounts) == 200 and accounts["account"].is_unique
    assert set(holdings["account"]) == set(accounts["account"])
    assert {"nav", "cash", "exclude", "tracking_error.max", "turnover.max"} <= set(accounts.columns)


def test_accounts_files_and_exit_code(demo) -> None:
    out = demo / "results" / "six"
    result = invoke("accounts", str(demo / "base.yaml"), "--accounts", str(demo / "six.csv"), "--holdings",
                    str(demo / "six_holdings.csv"), "--max-adv-fraction", "0.05", "--out", str(out))
    bad = pd.read_csv(demo / "six.csv")["account"][2]
    assert result.exit_code == 1, result.stderr
    assert f"trimtab: warning: account {bad}: infeasible" in result.stderr
    assert result.stderr.strip().splitlines()[-1].startswith("trimtab: error: 1 of 6 accounts did not solve")
    assert "Traceback" not in result.stderr
    assert "5 of 6 accounts solved" in result.stdout
    for name in ("summary.csv", "orders.csv", "blocks.csv", "given_up.csv", "weights.csv", "convergence.csv",
                 "result.json", "report.html"):
        assert (out / name).is_file(), name
    summary = pd.read_csv(out / "summary.csv", index_col="account")
    assert summary.at[bad, "status"] == "infeasible" and "tracking_error.max" in summary.at[bad, "conflict"]
    orders = pd.read_csv(out / "orders.csv")
    assert list(orders.columns) == ["account", "asset", "side", "shares", "price", "notional", "cost"]
    solved = summary.index[summary["status"] == "solved"]
    for name in solved:  # one file per account, the same rows as the combined file
        own = pd.read_csv(out / "orders" / f"{name}.csv")
        assert len(own) == (orders["account"] == name).sum() == summary.at[name, "orders"]
    assert not (out / "orders" / f"{bad}.csv").exists()
    # the bad account's way out is written where its reason points, in the account's own words
    relaxations = pd.read_csv(out / "relaxations.csv")
    assert set(relaxations["account"]) == {bad}
    assert relaxations["constraint"].str.contains("tracking_error.max").any()
    assert "relaxation table" not in summary.at[bad, "reason"]
    blocks = pd.read_csv(out / "blocks.csv", index_col="asset")
    assert (blocks["pct_adv"] <= 0.05 * (1 + 1e-6)).all()
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "not investment advice" in page and "Blocks against ADV" in page and bad in page
    document = json.loads((out / "result.json").read_text(encoding="utf-8"))
    assert document["n_solved"] == 5 and document["failed"][0]["account"] == bad


@pytest.mark.parametrize(("edit", "message"), [
    (lambda a, h: (a.drop(columns="account"), h), r"six_bad.csv: no 'account' column"),
    (lambda a, h: (a.rename(columns={"turnover.max": "turnover.maxx"}).fillna({"turnover.maxx": 0.2}), h),
     r"six_bad.csv: account 'SMA-0001': .*constraints.turnover.maxx"),
    (lambda a, h: (a.assign(**{"tracking_error.max": 3.0}), h), r"six_bad.csv: account 'SMA-0001': .*tracking_error"),
    (lambda a, h: (a.assign(nav="lots"), h), r"six_bad.csv: account 'SMA-0001': column 'nav': expected a number, got 'lots'"),
    (lambda a, h: (pd.concat([a, a.head(1)]), h), r"six_bad.csv: column 'account': accounts given twice: SMA-0001"),
    (lambda a, h: (a, pd.concat([h, pd.DataFrame({"account": ["GHOST"], "asset": ["X"], "shares": [1]})])),
     r"six_bad_holdings.csv: column 'account': accounts not in the accounts file: GHOST"),
    (lambda a, h: (a, h.assign(shares="x")), r"six_bad_holdings.csv: column 'shares': not a finite number for account 'SMA-0001'"),
], ids=["no-account-column", "unknown-limit-column", "percent-for-fraction", "nav-text", "account-twice", "holdings-unknown-account", "shares-text"])
def test_bad_input_is_one_line_and_exit_2(demo, edit, message) -> None:
    accounts, holdings = edit(pd.read_csv(demo / "six.csv"), pd.read_csv(demo / "six_holdings.csv"))
    accounts.to_csv(demo / "six_bad.csv", index=False)
    holdings.to_csv(demo / "six_bad_holdings.csv", index=False)
    out = demo / "results" / "never"
    result = invoke("accounts", str(demo / "base.yaml"), "--accounts", str(demo / "six_bad.csv"), "--holdings",
                    str(demo / "six_bad_holdings.csv"), "--out", str(out))
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("trimtab: error: "), result.stderr
    assert pytest.importorskip("re").search(message, lines[0]), lines[0]
    assert not out.exists()
