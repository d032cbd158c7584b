"""Running scenarios end to end: rebalance, what-if comparison, and the output folders they write.

The command line calls these; they return results and write files, and never print.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any
from urllib.parse import quote

import pandas as pd

from trimtab.scenario._strict_yaml import dump_yaml
from trimtab.errors import InfeasibleError, InputError, SolverError
from trimtab.model import FactorModel
from trimtab.scenario._fit import require
from trimtab._output import output_folder
from trimtab.scenario._scenario import Scenario, ScenarioInputs, load_inputs, load_model_for


@dataclass(frozen=True, eq=False)
class ScenarioRun:
    """One scenario's outcome: a result, or the infeasibility (with its relaxation table) or solver
    failure it ended in."""

    inputs: ScenarioInputs
    result: Any = None
    error: InfeasibleError | SolverError | None = None

    @property
    def name(self) -> str:
        """The scenario's name."""
        return self.inputs.scenario.name

    @property
    def status(self) -> str:
        """``solved``, ``infeasible`` or ``solver failure``."""
        if self.error is None:
            return "solved"
        return "infeasible" if isinstance(self.error, InfeasibleError) else "solver failure"


def input_files(inputs: ScenarioInputs) -> list[Path]:
    """Every file and folder the scenario reads (outputs must never replace them)."""
    spec = inputs.scenario.spec
    files = [inputs.scenario.path, *inputs.scenario.chain]
    for item in (spec.data.holdings, spec.data.benchmark, spec.data.alpha, spec.data.attributes):
        if item is not None:
            files.append(Path(item.path))
    limit = spec.constraints.get("stress_loss")
    for shocks in (spec.stress, limit.get("shocks") if isinstance(limit, dict) else None):
        if isinstance(shocks, str):  # a shock file
            files.append(Path(shocks))
    if spec.model.path is not None:
        files.append(Path(spec.model.path))
    elif spec.model.fit is not None:
        for fit_file in (spec.model.fit.returns, spec.model.fit.factor_returns, spec.model.fit.exposures):
            if fit_file is not None:
                files.append(Path(fit_file.path))
    return files


def build(inputs: ScenarioInputs) -> Any:
    """The optimizer's problem for one scenario, checked against the model and the data (not solved).

    Messages about the scenario's keys name the scenario file.
    """
    build_problem = require("trimtab.construct", "build_problem")
    try:
        return build_problem(
            inputs.model, inputs.scenario.rebalance_mapping(), source=str(inputs.scenario.path),
            changed_limits=variant_limits(inputs.scenario), **inputs.rebalance_kwargs()
        )
    except InputError as err:
        raise type(err)(_file_named(str(err), inputs)) from None


def _file_named(message: str, inputs: ScenarioInputs) -> str:
    """A message about a rebalance argument (``holdings: …``) under the file the scenario read it from;
    an attribute column named inside a scenario key's message gets its file too."""
    data = inputs.scenario.spec.data
    files = {"holdings": data.holdings, "benchmark": data.benchmark, "alpha": data.alpha, "attributes": data.attributes}
    for name, spec in files.items():
        if spec is not None and message.startswith(f"{name}: "):
            return f"{spec.path}: {message}"
    if data.attributes is not None:  # a value of a column (not a missing column): name its file
        import re

        return re.sub(r"attribute column ('[^']*') (must|has)", lambda m: f"{data.attributes.path}: column {m[1]} {m[2]}",  # type: ignore[union-attr]
                      message, count=1)
    return message


def variant_limits(scenario: Scenario) -> tuple[str, ...]:
    """The constraint keys a scenario that extends another sets in its own file (named first in a conflict)."""
    if len(scenario.chain) < 2:
        return ()
    from trimtab.scenario._yaml import load_merged

    _, _, origins = load_merged(scenario.path)
    own = Path(scenario.chain[0]).resolve()
    return tuple(dict.fromkeys(
        key[1] for key, origin in origins.items()
        if len(key) > 1 and key[0] == "constraints" and Path(origin).resolve() == own
    ))


def solve(inputs: ScenarioInputs) -> ScenarioRun:
    """Rebalance one scenario; an infeasible problem or a solver failure is kept, not raised."""
    problem = build(inputs)
    try:
        result = problem.solve()
    except (InfeasibleError, SolverError) as err:
        return ScenarioRun(inputs, error=err)
    except InputError as err:  # an order input (price, lot, ADV) of an asset the orders use
        raise type(err)(_file_named(str(err), inputs)) from None
    return ScenarioRun(inputs, result=with_run_context(inputs, result))


def with_run_context(inputs: ScenarioInputs, result: Any) -> Any:
    """``result`` with what the scenario's files add: alignment warnings, alert thresholds and the
    run context (every writer of a scenario's result, the explore page included, goes through this)."""
    from trimtab.scenario._notices import alert_settings, alignment_warnings

    data = inputs.scenario.spec.data
    files = {"holdings": Path(data.holdings.path).name, **({"benchmark": Path(data.benchmark.path).name} if data.benchmark is not None else {})}
    return result.with_context(
        notices=alignment_warnings(inputs.alignment, files),
        alerts=alert_settings(inputs.scenario.spec.alerts),
        context=run_context(inputs),
    )


def run_context(inputs: ScenarioInputs) -> dict[str, Any]:
    """What the reports state about a run's inputs: scenario name and description, NAV and cash (and
    how the NAV was found), and how much of the held weight the model covers."""
    spec = inputs.scenario.spec
    holdings = spec.data.holdings
    table = inputs.alignment.table
    dropped = table[(table["input"] == "holdings") & table["action"].isin(["dropped", "sold"])] if not table.empty else table
    lost = float(dropped["weight"].fillna(0.0).sum()) if len(dropped) else 0.0
    total = float(inputs.book.weights.sum())
    return {
        "scenario": spec.name,
        "description": spec.description,
        "nav": inputs.nav,
        "cash": float(getattr(inputs.book, "cash", 0.0) or 0.0) if holdings.kind == "shares" else None,
        "holdings_kind": holdings.kind,
        "nav_given": holdings.nav is not None,
        "holdings_coverage": (total - lost) / total if total else None,
    }


def load_all(
    scenarios: Sequence[Scenario], step: Callable[[str], None] | None = None
) -> list[ScenarioInputs]:
    """Read every scenario's inputs, loading or fitting each distinct model only once."""
    models: dict[str, FactorModel] = {}
    out = []
    for scenario in scenarios:
        section = scenario.spec.model
        key = section.path if section.path is not None else json.dumps(section.fit.model_dump(), sort_keys=True, default=str)  # type: ignore[union-attr]
        if key not in models:
            if step is not None:
                step(f"{scenario.name}: {'loading' if section.path else 'fitting'} the risk model")
            models[key] = load_model_for(scenario)
        out.append(load_inputs(scenario, model=models[key], step=step))
    return out


def relaxation_frame(error: InfeasibleError | SolverError) -> pd.DataFrame:
    """The error's relaxation table, or an empty frame when the optimizer gave none."""
    table = getattr(error, "relaxation", None)
    return table if isinstance(table, pd.DataFrame) else pd.DataFrame()


def scenario_yaml(scenario: Scenario, folder: Path) -> str:
    """The merged scenario as YAML (what actually ran), its paths relative to ``folder`` (where the
    file will live) so it loads again from there; the files it extends in a comment."""
    from trimtab.scenario._yaml import SCENARIO_PATHS, relative_paths

    chain = " ← ".join(p.name for p in scenario.chain)
    mapping = relative_paths(scenario.mapping, folder.resolve(), SCENARIO_PATHS)
    mapping.get("output", {}).pop("dir", None)
    body = dump_yaml(mapping)
    return f"# scenario {scenario.name}, merged from {chain}; paths relative to this folder\n{body}"


@dataclass
class Written:
    """The files an output folder received."""

    folder: Path
    files: list[str] = field(default_factory=list)


def write_rebalance(run: ScenarioRun, target: Path | None = None) -> Written:
    """Write one solved scenario's tables, JSON and HTML report into its output folder."""
    inputs = run.inputs
    folder = Path(target) if target is not None else inputs.scenario.output_dir
    settings = inputs.scenario.spec.output
    with output_folder(folder, input_files(inputs)) as tmp:
        write_run_files(run, tmp, folder, tables=settings.tables, write_json=settings.write_json, html=settings.html)
        names = sorted(p.name for p in tmp.rglob("*") if p.is_file())
    return Written(folder, names)


def write_run_files(run: ScenarioRun, folder: Path, final: Path, *, tables: str, write_json: bool, html: bool) -> None:
    """The files of one run, into an existing (temporary) ``folder`` that becomes ``final``."""
    report = report_writers()
    scenario = run.inputs.scenario
    (folder / "scenario.yaml").write_text(scenario_yaml(scenario, final), encoding="utf-8")
    alignment = run.inputs.alignment
    if not alignment.table.empty:
        alignment.table.to_csv(folder / "alignment.csv", index=False)
    if run.error is not None:
        relaxation = relaxation_frame(run.error)
        relaxation.to_csv(folder / "relaxation.csv", index=not isinstance(relaxation.index, pd.RangeIndex))
        if write_json:
            report.write_json(run.error, folder / "result.json")
        if html:
            report.write_html(run.error, folder / "report.html", title=f"Rebalance: {scenario.name} ({run.status})")
        return
    if tables != "none":
        report.write_tables(run.result, folder, file_format=tables)
    if write_json:
        report.write_json(run.result, folder / "result.json")
    if html:
        report.write_html(run.result, folder / "report.html", title=f"Rebalance: {scenario.name}")


def write_comparison(runs: Sequence[ScenarioRun], target: Path, *, html: bool = True) -> Written:
    """Write the what-if comparison: comparison.csv and comparison.json (every scenario with its
    status), one report, and each scenario's own files."""
    report = report_writers()
    inputs: list[Path] = []
    for run in runs:
        inputs.extend(input_files(run.inputs))
    with output_folder(target, inputs) as tmp:
        comparison_table(runs).to_csv(tmp / "comparison.csv")
        report.write_json(comparison_subjects(runs), tmp / "comparison.json")
        if html:  # links to each scenario's own report rather than repeating it
            report.write_html(comparison_subjects(runs), tmp / "report.html", title="What-if comparison",
                              links={run.name: f"{quote(run.name)}/report.html" for run in runs})
        for run in runs:
            sub = tmp / run.name
            sub.mkdir()
            write_run_files(run, sub, Path(target) / run.name, tables="csv", write_json=True, html=html)
        names = sorted(str(p.relative_to(tmp)) for p in tmp.rglob("*") if p.is_file())
    return Written(target, names)


def comparison_subjects(runs: Sequence[ScenarioRun]) -> dict[str, Any]:
    """Scenario name → its result, or the InfeasibleError / SolverError it ended in (the report
    writers show those with their status and relaxation table)."""
    return {run.name: run.result if run.error is None else run.error for run in runs}


def comparison_table(runs: Sequence[ScenarioRun]) -> pd.DataFrame:
    """Headline figures, one column per scenario, below a status row (unsolved ones: status only)."""
    return report_writers().comparison_table(comparison_subjects(runs))  # type: ignore[no-any-return]


def write_attribution(attribution: Any, out: Path, inputs: Sequence[Path], notes: Sequence[str] = ()) -> Written:
    """Write one attribution's tables, result.json and report.html into ``out`` (``notes`` are stated
    under the report's title: how the book's weights were found, say)."""
    report = report_writers()
    with output_folder(out, inputs) as tmp:
        report.write_tables(attribution, tmp, file_format="csv")
        report.write_json(attribution, tmp / "result.json")
        report.write_html(attribution, tmp / "report.html", title="Risk report", notes=notes)
        names = sorted(p.name for p in tmp.iterdir())
    return Written(Path(out), names)


def report_writers() -> Any:
    """:mod:`trimtab.report`, or a one-line error when this build lacks it."""
    try:
        import trimtab.report as report
    except ImportError:
        from trimtab.errors import TrimtabError

        raise TrimtabError("trimtab.report is not available in this version of trimtab") from None
    return report


def describe(inputs: ScenarioInputs) -> Mapping[str, Any]:
    """A JSON-ready description of a scenario's inputs (for ``trimtab check``)."""
    spec = inputs.scenario.spec
    model = inputs.model
    return {
        "scenario": inputs.scenario.name,
        "file": str(inputs.scenario.path),
        "extends": [str(p) for p in inputs.scenario.chain[1:]],
        "model": {"n_assets": model.n_assets, "n_factors": model.n_factors, "factors": [str(f) for f in model.factors]},
        "holdings": {"n_assets": int(len(inputs.holdings)), "invested": float(inputs.holdings.sum()), "nav": inputs.nav},
        "benchmark": None if inputs.benchmark is None else {"n_assets": int(len(inputs.benchmark)), "sum": float(inputs.benchmark.sum())},
        "alpha": None if inputs.alpha is None else {"n_scored": int((inputs.alpha != 0).sum())},
        "attributes": None if inputs.attributes is None else [str(c) for c in inputs.attributes.columns],
        "objective": dict(spec.objective),
        "constraints": sorted(spec.constraints),
        "alignment": inputs.alignment.sizes.reset_index(names="input").to_dict(orient="records"),
    }
