"""A small demo folder shared by the explorer's tests (the fund, its scenarios and a fitted model)."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.demo_helpers import make_demo_folder


@pytest.fixture(scope="session")
def demo_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("explore-demo"))


@pytest.fixture(scope="session")
def explorer(demo_folder: Path):  # type: ignore[no-untyped-def]
    from trimtab.app import Explorer

    return Explorer.open(demo_folder / "base.yaml")
