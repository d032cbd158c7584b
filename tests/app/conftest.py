"""A small demo folder shared by the explorer's tests (the fund, its scenarios and a fitted model)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tests.demo_helpers import LOTS_MANDATE, add_lots_fund, make_demo_folder


@pytest.fixture(scope="session")
def demo_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("explore-demo"))


@pytest.fixture(scope="session")
def explorer(demo_folder: Path):  # type: ignore[no-untyped-def]
    from trimtab.app import Explorer

    return Explorer.open(demo_folder / "base.yaml")


@pytest.fixture(scope="session")
def not_fit_scenario(demo_folder: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A scenario whose rounded orders are not fit to send: the demo fund in lots of 100 shares at NAV
    20k under the lots mandate (issue #19), in a copy of the demo folder."""
    folder = tmp_path_factory.mktemp("explore-lots") / "fund"
    shutil.copytree(demo_folder, folder)
    add_lots_fund(folder)
    path = folder / "mandate.yaml"
    path.write_text(LOTS_MANDATE.format(nav=20_000), encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def not_fit_explorer(not_fit_scenario: Path):  # type: ignore[no-untyped-def]
    from trimtab.app import Explorer

    return Explorer.open(not_fit_scenario)
