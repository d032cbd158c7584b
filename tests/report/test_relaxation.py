"""Unsolved scenarios in the report writers: statuses, the relaxation table in each limit's unit."""

from __future__ import annotations

import json
from pathlib import Path

import html5lib
import jsonschema
import pandas as pd
import pytest
from rich.console import Console

from trimtab import FactorModel, InputError
from trimtab.attribution import format_figure
from trimtab.construct._elastic import COLUMNS
from trimtab.errors import InfeasibleError, SolverError
from trimtab.report._relaxation import unsolved
from trimtab.report import (
    COMPARISON_SCHEMA,
    JSON_SCHEMA,
    comparison_table,
    display_relaxation,
    format_in_unit,
    print_comparison,
    print_relaxation,
    relaxation_sentence,
    conflict_sentence,
    render_html,
    report_document,
    report_tables,
    write_json,
    write_tables,
)

from .conftest import StandInResult, stand_in


def infeasible() -> InfeasibleError:
    """An error laid out as the optimizer's diagnosis lays it out (its own column list)."""
    table = pd.DataFrame(
        [
            ["1", "constraints.turnover.max", "turnover", "upper", 0.02, 0.5646, 0.5446, "weight (one-way)"],
            ["1", "constraints.weight.min[POXA]", "weight", "lower", -0.0006074, -0.000748, 0.0001406, "weight"],
            ["2", "constraints.tracking_error.max", "tracking_error", "upper", 0.005, 0.0123, 0.0073, "annualised volatility"],
        ],
        columns=COLUMNS,
    )
    return InfeasibleError("scenarios/tight.yaml: infeasible: these limits cannot all hold: constraints.tracking_error.max, "
                           "constraints.turnover.max", table,
                           conflict=["constraints.tracking_error.max", "constraints.turnover.max"])


def recorded() -> Console:
    return Console(record=True, width=220, color_system=None)


def test_numbers_read_in_their_unit() -> None:
    # Closed form: a weight of -0.0006074 of NAV is -0.06074% of NAV, shown to three decimals.
    assert format_in_unit(-0.0006074, "weight") == "-0.061%"
    assert format_in_unit(0.5646, "weight (one-way)") == "56.460%"
    assert format_in_unit(0.005, "annualised volatility") == "0.500%"
    assert format_in_unit(0.1234567, "exposure") == "0.1235"
    assert format_in_unit(12.0, "names") == "12"
    assert format_in_unit(float("inf"), "weight") == "n/a"
    assert format_in_unit(-1e-9, "weight") == "0.000%"  # no "-0.000%"
    assert format_in_unit(0.123, "fraction of ADV") == "12.300%"
    shown = display_relaxation(infeasible().relaxation)
    assert list(shown.columns) == [c for c in COLUMNS if c != "kind"]  # the key path says the kind
    assert shown.loc[1].tolist() == ["1", "constraints.weight.min[POXA]", "lower", "-0.061%", "-0.075%", "0.014%", "% of NAV"]
    assert shown.loc[2, "unit"] == "% a year (volatility)" and shown.loc[2, "needed"] == "1.230%"


def test_sentence_names_each_limit_and_its_move() -> None:
    text = relaxation_sentence(infeasible().relaxation)
    assert text.startswith("Any one of these alone restores feasibility, every other limit as written: ")
    assert "move 2 limits (constraints.turnover.max 2.000% → 56.460%; constraints.weight.min[POXA] -0.061% → -0.075%)" in text
    assert text.endswith("; or raise constraints.tracking_error.max from 0.500% to 1.230%.")
    many = infeasible().relaxation.assign(option=[str(i) for i in range(3)])
    many = pd.concat([many.assign(option=many["option"] + f"-{k}") for k in range(3)], ignore_index=True)
    assert relaxation_sentence(many).endswith("; or one of 4 more options in the table.")
    together = infeasible().relaxation.assign(option="together")
    assert relaxation_sentence(together).startswith("No single limit is enough; together: move 3 limits")
    assert conflict_sentence(unsolved(infeasible())) == (
        "These limits cannot all hold: constraints.tracking_error.max, constraints.turnover.max.")
    assert relaxation_sentence(pd.DataFrame()) == "The optimizer gave no relaxation table for this infeasible scenario."


def test_terminal_comparison_keeps_the_infeasible_column(result: StandInResult) -> None:
    console = recorded()
    print_comparison({"base": result, "tight": infeasible(), "broken": SolverError("every solver failed")}, console=console)
    text = console.export_text()
    status = next(line for line in text.splitlines() if line.startswith("│ status"))
    assert [c.strip() for c in status.split("│")[2:5]] == ["solved", "infeasible", "solver failure"]
    risk_row = next(line for line in text.splitlines() if "Active risk (tracking error)" in line)
    assert format_figure(result.post_trade.risk, "fraction") in risk_row and risk_row.count("n/a") == 2
    assert "Scenario tight cannot hold as written: how far each conflicting limit must move" in text
    # the conflict set comes first, before the table
    assert text.index("tight: These limits cannot all hold: constraints.tracking_error.max") < text.index("Scenario tight cannot hold as written")
    assert "-0.061%" in text and "-0.0006074" not in text
    assert "broken: solver failure: every solver failed" in text


def test_print_relaxation_without_a_table() -> None:
    console = recorded()
    print_relaxation(InfeasibleError("x.yaml: infeasible"), console=console, name="x")
    assert "Scenario x cannot hold as written: how far each conflicting limit must move: the optimizer gave no relaxation table" in console.export_text()


def test_html_comparison_shows_the_infeasible_part(result: StandInResult, report_model: FactorModel) -> None:
    text = render_html({"base": result, "tight": infeasible(), "other": stand_in(report_model, seed=3)}, title="What-if")
    tree = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(text)
    assert [h.text for h in tree.iter("h2")][:4] == ["Scenarios side by side", "Scenario: base", "Scenario: tight", "Scenario: other"]
    comparison = tree.find(".//section[@id='comparison']")
    head = [th.text for th in comparison.iter("th")]
    assert head == ["Figure", "base", "tight", "other", "other − base"]  # no change column for an unsolved one
    status = ["".join(td.itertext()) for td in comparison.find(".//tbody/tr").iter("td")]
    assert status == ["Status", "solved", "infeasible", "solved", ""]
    part = tree.find(".//article[@id='scenario-1']")
    words = " ".join("".join(part.itertext()).split())
    assert "These limits cannot all hold: constraints.tracking_error.max, constraints.turnover.max." in words
    assert words.index("These limits cannot all hold") < words.index("Any one of these alone")
    cells = [" ".join("".join(td.itertext()).split()) for td in part.find(".//table[@class='relaxation']/tbody/tr").iter("td")]
    assert cells == ["1", "constraints.turnover.max", "upper", "2.000%", "56.460%", "54.460%", "% of NAV (one-way)"]
    assert "scenarios/tight.yaml" not in words
    only = render_html({"tight": infeasible()})
    assert "These limits cannot all hold" in only and "Risk budget used" in only


def test_json_and_tables_of_an_unsolved_scenario(tmp_path: Path) -> None:
    document = json.loads(write_json(infeasible(), tmp_path / "result.json").read_text(encoding="utf-8"))
    jsonschema.validate(document, JSON_SCHEMA)  # reference JSON Schema implementation
    assert document["kind"] == "infeasible" and document["run"]["status"] == "infeasible"
    assert document["relaxation"][1]["limit"] == -0.0006074  # raw numbers kept
    assert document["conflict"] == ["constraints.tracking_error.max", "constraints.turnover.max"]
    failure = report_document(SolverError("solver gave up"))
    jsonschema.validate(failure, JSON_SCHEMA)
    assert failure["kind"] == "solver_failure" and failure["relaxation"] == []
    assert list(report_tables(infeasible())) == ["relaxation"]
    (path,) = write_tables(infeasible(), tmp_path, file_format="csv")
    back = pd.read_csv(path, index_col=0)
    assert back["limit"].tolist() == [0.02, -0.0006074, 0.005] and back["unit"].iloc[0] == "weight (one-way)"


def test_solved_document_has_no_relaxation(result: StandInResult) -> None:
    document = report_document(result)
    jsonschema.validate(document, JSON_SCHEMA)
    assert document["relaxation"] is None and document["schema_version"] == "1.2"


def test_empty_comparison_is_refused() -> None:
    with pytest.raises(InputError, match=r"report: expected a non-empty mapping scenario name"):
        render_html({})
    with pytest.raises(InputError, match=r"report: expected a non-empty mapping scenario name"):
        print_comparison({}, console=recorded())


def test_comparison_json_and_table_keep_every_scenario(result: StandInResult, tmp_path: Path) -> None:
    subjects = {"base": result, "tight": infeasible(), "broken": SolverError("every solver failed")}
    document = json.loads(write_json(subjects, tmp_path / "comparison.json").read_text(encoding="utf-8"))
    jsonschema.validate(document, COMPARISON_SCHEMA)  # reference JSON Schema implementation
    for inner in document["scenarios"].values():
        jsonschema.validate(inner, JSON_SCHEMA)
    assert document["status"] == {"base": "solved", "tight": "infeasible", "broken": "solver failure"}
    risk = next(row for row in document["comparison"] if row["figure"] == "risk")
    assert risk["base"] == pytest.approx(result.post_trade.risk) and risk["tight"] is None and risk["broken"] is None
    assert document["scenarios"]["tight"]["relaxation"][0]["constraint"] == "constraints.turnover.max"
    table = comparison_table(subjects)
    assert list(table.columns) == ["label", "unit", "base", "tight", "broken"]  # no change columns for unsolved ones
    assert table.index[0] == "status"
    assert list(report_tables(subjects)) == ["comparison"]
    written = write_tables(subjects, tmp_path / "tables")
    assert sorted(p.name for p in written) == ["comparison.csv", "comparison.parquet"]
    back = pd.read_csv(tmp_path / "tables" / "comparison.csv", index_col=0)
    assert back.loc["status", ["base", "tight", "broken"]].tolist() == ["solved", "infeasible", "solver failure"]
    with pytest.raises(InputError, match=r"report: expected a non-empty mapping scenario name"):
        comparison_table({})
    with pytest.raises(InputError, match=r"report: scenario 'odd': expected a RiskAttribution or a result"):
        comparison_table({"odd": 3})
