"""Orders not fit to send on the explore page and in its API (issue #19).

A variant the optimizer solves but whose orders, rounded to whole lots, breach a limit is not
"solved": the page, its trail and the API give it the status ``orders not fit to send``, and name
each breached limit with its value on the rounded book and its excess, as the report's red box does.
The breached limits are those of the independent numpy check of the rounded book
(``result.trade_list.breached``); the page and the API must carry exactly those.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import html5lib
import pytest
from fastapi.testclient import TestClient

from tests.app.test_server import local_client
from trimtab.app import Explorer
from trimtab.app._server import create_app
from trimtab.app._view import page_view

NOT_FIT = "orders not fit to send"


@pytest.fixture(scope="module")
def client(not_fit_explorer: Explorer) -> TestClient:
    return local_client(create_app(not_fit_explorer))


@pytest.fixture(scope="module")
def breached(not_fit_explorer: Explorer):  # type: ignore[no-untyped-def]
    """The limits the rounded book breaches, from the trade list's own verification."""
    variant = not_fit_explorer.solve({})
    table = variant.result.trade_list.breached
    assert len(table) and not variant.result.trade_list.ok  # the fixture is what it claims to be
    return table


def test_the_variant_has_its_own_status(not_fit_explorer: Explorer, explorer: Explorer) -> None:
    assert not_fit_explorer.solve({}).status == NOT_FIT
    assert explorer.solve({}).status == "solved"  # the demo's base scenario: orders fit to send


def test_the_page_view_names_each_breached_limit_with_its_value_and_excess(not_fit_explorer: Explorer, breached) -> None:  # type: ignore[no-untyped-def]
    view = page_view(not_fit_explorer.solve({}))
    assert view["status"] == NOT_FIT
    json.dumps(view, allow_nan=False)  # the page parses it as JSON: an open side is null, never NaN
    assert [b["name"] for b in view["breached"]] == list(breached["name"])
    for row, b in zip(breached.itertuples(), view["breached"], strict=True):
        assert b["value"] == pytest.approx(row.value) and b["excess"] == pytest.approx(row.excess)
    box = view["html"]["verdict"]
    assert "ORDERS NOT FIT TO SEND" in box and 'class="notfit"' in box
    items = re.findall(r"<li data-limit=\"([^\"]+)\">(.*?)</li>", box, flags=re.S)
    assert [html_name for html_name, _ in items] == [_escaped(n) for n in breached["name"]]
    for (_, text), row in zip(items, breached.itertuples(), strict=True):
        # the same numbers as the report's red box and the terminal (six and three significant digits)
        assert f"{row.value:.6g} on the rounded book" in text and f"{row.excess:.3g} beyond the tolerance" in text
    # the portfolio is still shown: it is the book these orders produce
    assert view["html"]["headline"] and view["html"]["trades"]


def test_a_variant_fit_to_send_has_no_verdict(explorer: Explorer) -> None:
    view = page_view(explorer.solve({}))
    assert view["status"] == "solved" and view["breached"] == [] and view["html"]["verdict"] == ""


def test_the_api_gives_the_status_and_every_breached_limit(client: TestClient, breached) -> None:  # type: ignore[no-untyped-def]
    document = client.post("/api/solve", json={"limits": {}}).json()
    assert document["kind"] == "rebalance"  # the document still holds the whole rebalance
    assert document["run"]["status"] == NOT_FIT
    assert document["rounding"]["fit_to_send"] is False
    rows = document["rounding"]["breached"]
    assert [r["name"] for r in rows] == list(breached["name"])
    for r, row in zip(rows, breached.itertuples(), strict=True):
        assert r["value"] == pytest.approx(row.value) and r["excess"] == pytest.approx(row.excess)
        assert r["excess"] > 0
    message = document["run"]["message"]
    assert message.startswith("orders NOT FIT TO SEND") and all(name in message for name in breached["name"])


def test_the_page_opens_on_the_verdict(client: TestClient, breached) -> None:  # type: ignore[no-untyped-def]
    response = client.get("/")
    html5lib.HTMLParser(strict=True).parse(response.text)
    assert f'<span id="status">{NOT_FIT}</span>' in response.text
    verdict = response.text.split('<div id="verdict">', 1)[1].split('<div id="headline">', 1)[0]
    assert "ORDERS NOT FIT TO SEND" in verdict
    assert all(f'data-limit="{_escaped(name)}"' in verdict for name in breached["name"])
    page = client.post("/page/solve", json={"limits": {}}).json()
    assert page["status"] == NOT_FIT and [b["name"] for b in page["breached"]] == list(breached["name"])


def test_saving_a_not_fit_variant_writes_it(client: TestClient, not_fit_scenario: Path) -> None:
    """Save writes the file (rebalance then exits 6 on it); the page says so beside the message."""
    response = client.post("/api/save", json={"name": "lots_not_fit", "limits": {"turnover.max": 0.2}})
    assert response.status_code == 201
    assert (not_fit_scenario.parent / "lots_not_fit.yaml").exists()


def _escaped(name: str) -> str:
    from markupsafe import escape

    return str(escape(name))
