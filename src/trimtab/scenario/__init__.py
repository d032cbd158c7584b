"""Scenario files and data files: the YAML schema, the readers, and asset-id alignment.

This package and :mod:`trimtab.report` are the only ones that touch files.
"""

from trimtab.scenario._align import AlignedInputs, AlignmentReport, align_inputs
from trimtab.scenario._demo_files import write_demo
from trimtab.scenario._fit import fit_model, fit_summary, load_fit_config
from trimtab.scenario._loaders import (
    Holdings,
    load_attributes,
    load_holdings,
    load_returns,
    load_series,
    read_table,
)
from trimtab.scenario._scenario import (
    Scenario,
    ScenarioInputs,
    deep_validate,
    load_inputs,
    load_model_for,
    load_scenario,
)
from trimtab._output import MARKER, check_inputs_outside, check_target, output_folder, write_text_atomic
from trimtab.scenario._schema import FitConfig, FitSettings, ScenarioSpec
from trimtab.scenario._yaml import deep_merge

__all__ = [
    "MARKER",
    "AlignedInputs",
    "AlignmentReport",
    "FitConfig",
    "FitSettings",
    "Holdings",
    "Scenario",
    "ScenarioInputs",
    "ScenarioSpec",
    "align_inputs",
    "check_inputs_outside",
    "check_target",
    "deep_merge",
    "deep_validate",
    "fit_model",
    "fit_summary",
    "load_attributes",
    "load_fit_config",
    "load_holdings",
    "load_inputs",
    "load_model_for",
    "load_returns",
    "load_scenario",
    "load_series",
    "output_folder",
    "read_table",
    "write_demo",
    "write_text_atomic",
]
