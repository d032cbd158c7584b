"""Estimate a risk model from the files a fit config names (the ``model.fit`` section)."""

from __future__ import annotations

import dataclasses
import importlib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError, ScenarioError, TrimtabError
from trimtab.model import FactorModel
from trimtab.scenario._loaders import load_attributes, load_returns
from trimtab.scenario._schema import FitConfig, FitSettings
from trimtab.scenario._yaml import FIT_PATHS, anchor_paths, read_yaml_mapping, validate_model


def load_fit_config(path: str | Path) -> FitConfig:
    """Read and validate a fit config YAML file (paths relative to the file)."""
    source = Path(path)
    raw = read_yaml_mapping(source, what="fit config")
    raw = anchor_paths(raw, source.resolve().parent, FIT_PATHS)
    config = validate_model(FitConfig, raw, source)
    assert isinstance(config, FitConfig)
    return config


def require(module: str, name: str) -> Callable[..., Any]:
    """The function ``module.name``, or a one-line error saying this build lacks it."""
    try:
        return getattr(importlib.import_module(module), name)  # type: ignore[no-any-return]
    except (ImportError, AttributeError):
        raise TrimtabError(f"{module}.{name} is not available in this version of trimtab") from None


def fit_model(settings: FitSettings, source: str | Path = "fit") -> FactorModel:
    """Read the return files named in ``settings`` and run the chosen estimator.

    Parameters
    ----------
    settings : FitSettings
        Validated fit settings (paths already absolute).
    source : str or Path
        The config or scenario file, for messages.

    Returns
    -------
    FactorModel
        With ``factor_groups`` from the settings when given, and the settings in its provenance.
    """
    returns = load_returns(settings.returns, what="returns", periods_per_year=settings.periods_per_year)
    kwargs: dict[str, Any] = {}
    if settings.half_life is not None:
        kwargs["half_life"] = settings.half_life
    if settings.min_periods is not None:
        kwargs["min_periods"] = settings.min_periods
    if settings.periods_per_year is not None:
        kwargs["periods_per_year"] = settings.periods_per_year
    if settings.method == "time_series":
        assert settings.factor_returns is not None
        factors = load_returns(settings.factor_returns, what="factor returns", periods_per_year=settings.periods_per_year)
        estimator = require("trimtab.model", "fit_time_series")
        args: tuple[Any, ...] = (returns, factors)
    elif settings.method == "cross_section":
        assert settings.exposures is not None
        table = load_attributes(settings.exposures)  # type: ignore[arg-type]
        path = Path(settings.exposures.path)
        columns = settings.exposure_columns or [
            c for c in table.columns if c != settings.industry_column and pd.api.types.is_numeric_dtype(table[c])
        ]
        missing = [c for c in [*columns, *([settings.industry_column] if settings.industry_column else [])] if c not in table.columns]
        if missing:
            raise InputError(f"{path}: exposures file lacks columns {list_labels(missing)}; found {list_labels(list(table.columns))}")
        if settings.industry_column:
            kwargs["industry"] = table[settings.industry_column].astype(str)
        estimator = require("trimtab.model", "fit_cross_section")
        args = (returns, table[columns].astype(float))
    else:
        if settings.n_factors is not None:
            kwargs["n_factors"] = settings.n_factors
        estimator = require("trimtab.model", "fit_statistical")
        args = (returns,)
    kwargs.update(settings.options)
    try:
        model = estimator(*args, **kwargs)
    except TypeError as err:
        if "unexpected keyword argument" in str(err):
            bad = str(err).split("argument")[-1].strip(" '\"")
            key = f"options.{bad}" if bad in settings.options else bad
            raise ScenarioError(f"{source}: {key}: not a setting of the {settings.method} estimator") from None
        raise
    if settings.factor_groups:
        unknown = [f for f in settings.factor_groups if f not in set(model.factors)]
        if unknown:
            raise ScenarioError(f"{source}: factor_groups: unknown factors {list_labels(unknown)}; the model has {list_labels(list(model.factors))}")
        groups = {**(model.factor_groups or {}), **settings.factor_groups}
        model = dataclasses.replace(model, factor_groups=groups)
    return model


def fit_summary(model: FactorModel, out: str | Path) -> dict[str, Any]:
    """What ``trimtab fit`` reports: method, sizes, window, dropped assets and the median R²."""
    report = model.fit_report
    doc: dict[str, Any] = {
        "model": str(out),
        "method": report.method if report is not None else "unknown",
        "n_assets": model.n_assets,
        "n_factors": model.n_factors,
        "factors": [str(f) for f in model.factors],
        "window": list(report.window) if report is not None and report.window else None,
        "dropped": {} if report is None else {str(k): str(v) for k, v in report.dropped.items()},
        "r_squared_median": None,
    }
    if report is not None and "r_squared" in report.assets.columns:
        doc["r_squared_median"] = float(report.assets["r_squared"].median())
    return doc
