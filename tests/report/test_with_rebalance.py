"""Every writer on a real (tiny) rebalance from trimtab.construct, not the stand-in."""

from __future__ import annotations

import json
from pathlib import Path

import html5lib
import numpy as np
import pandas as pd
import pytest
from rich.console import Console

from trimtab import FactorModel, rebalance
from trimtab.report import CAUTION, JSON_SCHEMA, print_comparison, print_rebalance, write_html, write_json, write_tables

SVG = "{http://www.w3.org/2000/svg}svg"


@pytest.fixture(scope="module")
def solved() -> tuple:
    from ..conftest import random_model

    base = random_model(n_assets=40, n_factors=5, seed=0)
    model = FactorModel(base.exposures, base.factor_covariance, base.specific_variance,
                        factor_groups={"f0": "market", "f1": "style", "f2": "style"})
    rng = np.random.default_rng(1)
    benchmark = pd.Series(rng.dirichlet(np.full(40, 5.0)), index=model.assets)
    holdings = pd.Series(rng.dirichlet(np.ones(40)), index=model.assets)
    alpha = pd.Series(rng.normal(scale=0.02, size=40), index=model.assets)
    attributes = pd.DataFrame(
        {"price": rng.uniform(10, 100, 40), "adv": rng.uniform(1e5, 1e6, 40), "spread": 0.001, "commission": 0.0002},
        index=model.assets,
    )
    scenario = {
        "objective": {"maximize": "utility", "risk_aversion": 10, "cost_aversion": 1,
                      "costs": {"spread": "spread", "commission": "commission"}},
        "constraints": {"fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.1},
                        "tracking_error": {"max": 0.03}, "turnover": {"max": 0.3}},
    }
    kwargs = dict(holdings=holdings, benchmark=benchmark, alpha=alpha, attributes=attributes, nav=1e8)
    tight = rebalance(model, scenario, **kwargs)
    loose = rebalance(model, {**scenario, "constraints": {**scenario["constraints"], "turnover": {"max": 0.6}}}, **kwargs)
    return tight, loose


def test_real_result_through_every_writer(solved: tuple, tmp_path: Path) -> None:
    tight, loose = solved
    assert tight.post_trade is not None and tight.pre_trade is not None

    console = Console(record=True, width=200, color_system=None)
    print_rebalance(tight, console=console)
    print_comparison({"tight": tight, "loose": loose}, console=console)
    text = console.export_text()
    assert "Risk budget (tracking error)" in text and CAUTION in text
    for name in tight.constraints.loc[tight.constraints["binding"].astype(bool), "name"]:
        assert name in text

    page = write_html({"tight": tight, "loose": loose}, tmp_path / "report.html").read_text(encoding="utf-8")
    tree = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(page)
    # 5 per scenario (no text attributes here: no attribute sections) and the alpha-against-TE chart
    assert len(tree.findall(f".//{SVG}")) == 11
    one = write_html(tight, tmp_path / "one.html").read_text(encoding="utf-8")
    assert "Constraints" in one and "% of daily volume" in one

    import jsonschema  # reference validator for JSON Schema draft 2020-12

    document = json.loads(write_json(tight, tmp_path / "result.json").read_text(encoding="utf-8"))
    jsonschema.validate(document, JSON_SCHEMA)
    # The writer reports the optimizer's own figures: its one-way turnover and its ex-ante tracking error.
    summary = {row["label"]: row["value"] for row in document["trade_summary"]}
    assert summary["Turnover, one-way (½·Σ|trade|)"] == pytest.approx(tight.turnover, abs=1e-8)
    # the report's post-trade figures are those of the book as traded (rounded to whole shares, issue #13)
    assert document["risk_budget"]["post"] == pytest.approx(tight.figures["tracking_error"], rel=1e-9)
    # within the rounding tolerance for risk: the orders also pay their costs from cash (issue #19)
    assert document["risk_budget"]["post"] == pytest.approx(tight.ex_ante["tracking_error"], abs=1e-4)
    assert document["rounding"]["cash_after_costs"] >= 0.0 and document["rounding"]["fit_to_send"] is True
    assert document["risk_budget"]["cap"] == 0.03

    written = write_tables(tight, tmp_path / "tables", file_format="csv")
    constraints = pd.read_csv(tmp_path / "tables" / "constraints.csv")
    assert set(constraints["name"]) == set(tight.constraints["name"])
    assert {p.name for p in written} >= {"trades.csv", "verification.csv", "post_trade_by_asset.csv"}


CHROMIUM_FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync", "--enable-logging=stderr", "--v=0",
]


def _chromium() -> str | None:
    import shutil

    return shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)


@pytest.mark.browser
@pytest.mark.skipif(_chromium() is None, reason="headless Chromium is not installed (the chromium binary is absent)")
def test_desk_sections_render_in_headless_chromium(solved: tuple, tmp_path: Path) -> None:
    """The rebalance and comparison pages of issue #13, as Chromium lays them out (its DOM after parsing)."""
    import subprocess

    from trimtab.construct._warnings import AlertSettings

    tight, loose = solved
    # a low factor threshold so the page has a warning to show
    tight = tight.with_context(alerts=AlertSettings(factor_share=0.01), context={"description": "Desk check"})
    pages = {
        "one": write_html(tight, tmp_path / "one.html"),
        "both": write_html({"tight": tight, "loose": loose}, tmp_path / "both.html"),
    }
    doms = {}
    for name, path in pages.items():
        profile = tmp_path / f"profile-{name}"
        profile.mkdir()
        dom = subprocess.run([_chromium(), *CHROMIUM_FLAGS, f"--user-data-dir={profile}", "--dump-dom", path.as_uri()],
                             capture_output=True, text=True, timeout=120, check=False)
        assert dom.returncode == 0 and "Uncaught" not in dom.stderr and "ERROR:CONSOLE" not in dom.stderr, dom.stderr[-2000:]
        doms[name] = html5lib.HTMLParser(namespaceHTMLElements=False).parse(dom.stdout)
    one = doms["one"]
    headings = [h.text for h in one.iter("h2")]
    for expected in ("Warnings (", "What the trades do", "Trade list", "Verification", "Constraints"):
        assert any(h and h.startswith(expected) for h in headings), expected
    text = "".join(one.itertext())
    assert "Desk check" in text and "Expected active return (alpha)" in text and "Information ratio" in text
    assert "factor concentration" in text and "Cash after trades and costs:" in text
    orders = one.find(".//table[@class='orders']")
    rows = orders.findall(".//tbody/tr")
    assert len(rows) == min(25, len(tight.orders))
    first = [td.text for td in rows[0].iter("td")]
    assert first[0] == tight.orders.index[0] and first[1] == tight.orders["side"].iloc[0]
    assert first[2] == f"{tight.orders['shares'].iloc[0]:,.0f}"
    limits = one.find(".//table[@class='limits']")
    assert len(limits.findall(".//tbody/tr")) == len(tight.trade_list.verification)
    both = doms["both"]
    comparison = both.find(".//section[@id='comparison']")
    labels = [tr.find("td").text for tr in comparison.findall(".//tbody/tr")]
    assert labels[:4] == ["Status", "Expected active return (alpha)", "Information ratio", "Tracking error"]
    assert [th.text for th in comparison.iter("th")][-1] == "loose − tight"
    chart = [svg for svg in both.iter() if str(svg.tag).endswith("svg") and "tradeoff" in (svg.get("aria-label") or "")]
    assert len(chart) == 1 and "tight" in "".join(chart[0].itertext()) and "loose" in "".join(chart[0].itertext())
