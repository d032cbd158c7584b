"""Build a small demo folder (data, scenarios and a fitted model) for the command-line tests."""

from __future__ import annotations

from pathlib import Path

from trimtab.demo import make_demo_fund
from trimtab.scenario import fit_model, load_fit_config, write_demo

SMALL = {"n_assets": 600, "n_holdings": 120, "n_days": 600, "seed": 3}


def make_demo_folder(folder: Path, **overrides: int) -> Path:
    """Write a small demo fund into ``folder`` and fit its model into ``folder/model``."""
    settings = {**SMALL, **overrides}
    fund = make_demo_fund(**settings)
    write_demo(fund, folder)
    config = folder / "fit.yaml"
    fit_model(load_fit_config(config), config).save(folder / "model")
    return folder
