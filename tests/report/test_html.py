"""The HTML report: strict html5lib parse, inline SVG charts, the caution, no network; headless Chromium."""

from __future__ import annotations

import shutil
import subprocess
import warnings
from pathlib import Path

import html5lib
import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel, InputError
from trimtab.attribution import attribute, format_figure
from trimtab.report import CAUTION, render_html, write_html

from .conftest import StandInResult, stand_in

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
SVG = "{http://www.w3.org/2000/svg}svg"


def parse_strict(text: str):  # noqa: ANN201 - an ElementTree element
    # html5lib implements the WHATWG HTML parsing algorithm; strict=True raises on any parse error.
    return html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(text)


def test_report_parses_and_has_its_parts(result: StandInResult, tmp_path: Path) -> None:
    path = write_html(result, tmp_path / "report.html", title="Rebalance: test fund")
    text = path.read_text(encoding="utf-8")
    tree = parse_strict(text)
    assert tree.find(".//title").text == "Rebalance: test fund"
    charts = tree.findall(f".//{SVG}")
    # risk budget, factor/specific, exposures, factor groups, country, sector, positions
    assert len(charts) == 7
    assert text.count(CAUTION.replace("'", "&#x27;")) == 2
    headings = [h.text for h in tree.iter("h2")]
    for expected in ("Warnings", "Risk figures", "Trade list", "Risk budget", "Factor and specific risk", "Active factor exposures",
                     "Risk contribution by factor group", "Risk contribution by country",
                     "Risk contribution by sector", "Largest risk contributions by position", "Trade summary",
                     "Constraints", "Objective", "Provenance"):
        assert expected in headings
    assert format_figure(result.post_trade.risk, "fraction") in text
    assert "ab12cd34" in text  # provenance
    # Self-contained: no scripts, no external resources.
    assert not tree.findall(".//script") and not tree.findall(".//link") and not tree.findall(".//img")
    for element in tree.iter():
        for attribute_name in ("src", "href"):
            value = element.get(attribute_name) or ""
            assert not value.startswith(("http:", "https:", "//")), value
    ids = [e.get("id") for e in tree.iter() if e.get("id")]
    assert len(ids) == len(set(ids)), "inline SVGs must not share element ids"
    assert "@media print" in text


def test_many_scenarios_and_attribution_only(result: StandInResult, report_model: FactorModel) -> None:
    text = render_html({"tight": result, "loose": stand_in(report_model, seed=3, shrink=0.2)}, title="What-if")
    tree = parse_strict(text)
    assert len(tree.findall(f".//{SVG}")) == 14
    assert [h.text for h in tree.iter("h2")][:3] == ["Scenarios side by side", "Scenario: tight", "Scenario: loose"]
    ids = [e.get("id") for e in tree.iter() if e.get("id")]
    assert len(ids) == len(set(ids))

    attr = attribute(report_model, pd.Series(1 / 60, index=report_model.assets))
    tree = parse_strict(render_html(attr, title="Book"))
    headings = [h.text for h in tree.iter("h2")]
    assert "Risk budget" not in headings and "Trades" not in headings and "Factor exposures" in headings
    assert len(tree.findall(f".//{SVG}")) == 4


def test_missing_and_infinite_bounds_show_blank(result: StandInResult) -> None:
    import dataclasses

    table = result.constraints.assign(lower=[1.0, -np.inf, np.nan, -np.inf])
    text = render_html(dataclasses.replace(result, constraints=table))
    constraints = text.split("<h2>Constraints</h2>", 1)[1].split("</table>", 1)[0]
    assert "inf" not in constraints and "n/a" not in constraints
    assert constraints.count("<td></td>") >= 3


def test_zero_risk_report_renders_without_warnings(report_model: FactorModel) -> None:
    w = pd.Series({"A0001": 0.5, "A0002": 0.5})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        text = render_html(attribute(report_model, w, w))
    assert "zero risk" in text and parse_strict(text) is not None


def test_text_is_escaped(report_model: FactorModel) -> None:
    attr = attribute(report_model, pd.Series({"A0001": 1.0}))
    text = render_html(attr, title="Fund <A> & 'B'")
    tree = parse_strict(text)
    assert tree.find(".//title").text == "Fund <A> & 'B'" and tree.find(".//h1").text == "Fund <A> & 'B'"


def test_bad_subject(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"report: expected a RiskAttribution or a rebalance result"):
        write_html(object(), tmp_path / "x.html")
    assert not list(tmp_path.iterdir())


@pytest.mark.browser
@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium is not installed (the chromium binary is absent)")
def test_report_opens_in_headless_chromium(result: StandInResult, tmp_path: Path) -> None:
    path = write_html(result, tmp_path / "report.html")
    profile = tmp_path / "profile"
    profile.mkdir()
    flags = [
        "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0",
    ]
    dom = subprocess.run(
        [CHROMIUM, *flags, "--dump-dom", path.as_uri()], capture_output=True, text=True, timeout=120, check=False
    )
    assert dom.returncode == 0, dom.stderr[-2000:]
    assert "Uncaught" not in dom.stderr and "ERROR:CONSOLE" not in dom.stderr, dom.stderr[-2000:]
    assert "<svg" in dom.stdout and "Verify every trade before trading." in dom.stdout
    shot = tmp_path / "report.png"
    render = subprocess.run(
        [CHROMIUM, *flags, f"--screenshot={shot}", "--window-size=1200,3000", path.as_uri()],
        capture_output=True, text=True, timeout=120, check=False,
    )
    assert render.returncode == 0 and "ERROR:CONSOLE" not in render.stderr and "Uncaught" not in render.stderr
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 50_000
