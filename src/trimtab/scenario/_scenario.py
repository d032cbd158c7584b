"""A validated scenario file, and the inputs it names, read and aligned to the model."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from trimtab.errors import InputError, Problem, ScenarioError
from trimtab.model import FactorModel
from trimtab.scenario._align import AlignmentReport, align_inputs
from trimtab.scenario._fit import fit_model
from trimtab.scenario._instruments import read_overlay
from trimtab.scenario._loaders import Holdings, load_attributes, load_holdings, load_series
from trimtab.scenario._schema import ScenarioSpec
from trimtab.scenario._yaml import load_merged, validate_model


@dataclass(frozen=True, eq=False)
class Scenario:
    """A scenario file after ``extends`` merging and validation.

    Attributes
    ----------
    path : Path
        The scenario file.
    spec : ScenarioSpec
        The validated sections (data paths absolute).
    mapping : dict
        The merged mapping as validated, for provenance.
    chain : tuple of Path
        The file first, then its bases in ``extends`` order.
    """

    path: Path
    spec: ScenarioSpec
    mapping: dict[str, Any]
    chain: tuple[Path, ...]

    @property
    def name(self) -> str:
        """The scenario's name (its ``name`` key, else the file name without extension)."""
        return self.spec.name

    def rebalance_mapping(self) -> dict[str, Any]:
        """The ``objective`` and ``constraints`` sections (and ``stress``, ``replay``, ``alpha_factor``), as :func:`trimtab.rebalance`
        takes them, with shock files read."""
        from trimtab.scenario._shocks import resolve_shock_files

        mapping: dict[str, Any] = {"objective": dict(self.spec.objective), "constraints": dict(self.spec.constraints)}
        if self.spec.stress is not None:
            mapping["stress"] = self.spec.stress
        if self.spec.replay is not None:
            mapping["replay"] = self.spec.replay
        if self.spec.alpha_factor is not None:
            mapping["alpha_factor"] = self.spec.alpha_factor
        if self.spec.orders is not None:
            mapping["orders"] = self.spec.orders
        return resolve_shock_files(mapping)

    @property
    def output_dir(self) -> Path:
        """``output.dir``, else ``results/<name>`` next to the scenario file."""
        if self.spec.output.dir is not None:
            return Path(self.spec.output.dir)
        return self.path.resolve().parent / "results" / self.name

    @property
    def digest(self) -> str:
        """SHA-256 of the merged mapping (sorted JSON): the same settings give the same digest."""
        text = json.dumps(self.mapping, sort_keys=True, default=str)
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

    def summary(self) -> str:
        """The file, its bases, and the sections in brief."""
        bases = " ← ".join(p.name for p in self.chain)
        cons = ", ".join(self.spec.constraints) or "none"
        return f"scenario {self.name} ({bases}); objective {self.spec.objective}; constraints: {cons}"


def load_scenario(path: str | Path, *, deep: bool = True) -> Scenario:
    """Read, merge (``extends``) and validate a scenario file, without reading its data files.

    Parameters
    ----------
    path : str or Path
        The scenario YAML file.
    deep : bool, default True
        Also validate the ``objective`` and ``constraints`` sections with
        :func:`trimtab.construct.validate_scenario` (when the optimizer is installed).

    Returns
    -------
    Scenario

    Raises
    ------
    ScenarioError
        One line naming the file, the key path and what was expected: missing file, malformed
        YAML, unknown keys, bad values, a base that does not exist, or a scenario that extends
        itself.

    Examples
    --------
    >>> scenario = load_scenario("scenarios/low_turnover.yaml")  # doctest: +SKIP
    >>> scenario.rebalance_mapping()["constraints"]["turnover"]  # doctest: +SKIP
    {'max': 0.05}
    """
    source = Path(path)
    merged, chain, origins = load_merged(source)
    origins = {key: source if file == chain[0] else file for key, file in origins.items()}
    try:
        spec = validate_model(ScenarioSpec, merged, source, origins)
    except ScenarioError as err:
        problems = list(err.problems)
        if deep and isinstance(merged.get("objective"), Mapping):
            # the limits are checked too, so one pass lists every problem; shock files are read
            # only once the file validates, so stress_loss waits until then
            constraints = merged.get("constraints")
            if isinstance(constraints, Mapping):
                constraints = {k: v for k, v in constraints.items() if k != "stress_loss"}
            problems += deep_problems({"objective": merged["objective"], "constraints": constraints or {}}, source, origins)
        raise ScenarioError.of(problems) from None
    assert isinstance(spec, ScenarioSpec)
    scenario = Scenario(source, spec, merged, chain)
    if deep:
        deep_validate(scenario, origins)
    return scenario


def deep_problems(
    mapping: Mapping[str, Any], source: Path, origins: Mapping[tuple[str, ...], Path] | None = None
) -> list[Problem]:
    """The problems of a rebalance mapping (objective, constraints, stress, replay) from the
    optimizer's own validator (if installed), each under the file that set its key."""
    try:
        from trimtab.construct import validate_scenario
    except ImportError:
        return []
    try:
        validate_scenario(mapping, source=str(source))
    except ScenarioError as err:
        found = err.problems or (Problem(str(source), "", str(err).removeprefix(f"{source}: ")),)
        return [p._replace(source=str(_origin(p.key_path, origins) or p.source)) for p in found]
    return []


def _origin(key_path: str, origins: Mapping[tuple[str, ...], Path] | None) -> Path | None:
    parts = tuple(key_path.split("."))
    for n in range(len(parts), 0, -1):
        if origins and parts[:n] in origins:
            return origins[parts[:n]]
    return None


def deep_validate(scenario: Scenario, origins: Mapping[tuple[str, ...], Path] | None = None) -> None:
    """Hand the objective, constraints, stress and replay (shock files read) to the optimizer's own
    validator, if it is installed; every problem in one ScenarioError."""
    problems = deep_problems(scenario.rebalance_mapping(), scenario.path, origins)
    if problems:
        raise ScenarioError.of(problems)


@dataclass(frozen=True, eq=False)
class ScenarioInputs:
    """Everything a rebalance needs, read from the scenario's files and aligned to the model.

    Attributes
    ----------
    scenario : Scenario
    model : FactorModel
    holdings : pandas.Series
        Weights of NAV by asset (model assets only).
    benchmark, alpha : pandas.Series or None
    attributes : pandas.DataFrame or None
        Reindexed to the model's assets.
    nav : float or None
    book : Holdings
        The holdings as read (shares and prices when given).
    alignment : AlignmentReport
    """

    scenario: Scenario
    model: FactorModel
    holdings: pd.Series
    benchmark: pd.Series | None
    alpha: pd.Series | None
    attributes: pd.DataFrame | None
    nav: float | None
    book: Holdings
    alignment: AlignmentReport
    sold_outside: pd.Series | None = None
    overlay: dict[str, Any] | None = None

    def rebalance_kwargs(self) -> dict[str, Any]:
        """Keyword arguments for :func:`trimtab.rebalance` besides the model and the mapping.

        Holdings the model lacks under ``unknown_assets: zero`` are passed on with
        ``unknown_assets="zero"``, so the optimizer counts their sale as turnover.
        """
        kwargs: dict[str, Any] = {
            "holdings": self.holdings,
            "benchmark": self.benchmark,
            "alpha": self.alpha,
            "attributes": self.attributes,
            "nav": self.nav,
        }
        if self.sold_outside is not None and len(self.sold_outside):
            kwargs["holdings"] = pd.concat([self.holdings, self.sold_outside])
            kwargs["unknown_assets"] = "zero"
        if self.overlay is not None:
            kwargs["overlay"] = self.overlay
        return kwargs


def load_model_for(scenario: Scenario) -> FactorModel:
    """The scenario's model: loaded from its folder, or fitted from its fit settings."""
    section = scenario.spec.model
    if section.path is not None:
        return FactorModel.load(section.path)
    assert section.fit is not None
    return fit_model(section.fit, scenario.path)


def load_inputs(
    scenario: Scenario,
    *,
    model: FactorModel | None = None,
    step: Callable[[str], None] | None = None,
) -> ScenarioInputs:
    """Read the model and every data file of ``scenario`` and align them to the model's assets.

    Parameters
    ----------
    scenario : Scenario
    model : FactorModel, optional
        Use this model instead of loading or fitting the scenario's (what-if runs share one).
    step : callable, optional
        Called with a short label before each stage (for progress display).
    """
    note = step or (lambda _label: None)
    data = scenario.spec.data
    note("reading data files")
    attributes = load_attributes(data.attributes) if data.attributes is not None else None
    book = load_holdings(data.holdings, attributes)
    benchmark = load_series(data.benchmark, "benchmark", "weight") if data.benchmark is not None else None
    alpha = load_series(data.alpha, "alpha", "alpha") if data.alpha is not None else None
    if model is None:
        note("loading the risk model" if scenario.spec.model.path else "fitting the risk model")
        model = load_model_for(scenario)
    dropped = model.fit_report.dropped if model.fit_report is not None else None
    files = {"holdings": data.holdings.path}
    if data.benchmark is not None:
        files["benchmark"] = data.benchmark.path
    aligned = align_inputs(
        model.assets,
        holdings=book.weights,
        benchmark=benchmark,
        alpha=alpha,
        attributes=attributes,
        unknown_assets=data.unknown_assets,
        files=files,
        model_dropped=dropped,
    )
    if aligned.holdings.empty:
        raise InputError(f"{data.holdings.path}: no held asset is in the risk model")
    return ScenarioInputs(
        scenario=scenario,
        model=model,
        holdings=aligned.holdings,
        benchmark=aligned.benchmark,
        alpha=aligned.alpha,
        attributes=aligned.attributes,
        nav=book.nav,
        book=book,
        alignment=aligned.report,
        sold_outside=aligned.sold_outside,
        overlay=None if scenario.spec.overlay is None else read_overlay(scenario.spec.overlay, model.assets, scenario.path.name),
    )
