"""The accounts overrides file (``trimtab accounts --overrides``): a misspelt account or key is named readably."""

from __future__ import annotations

from pathlib import Path

import pytest

from trimtab.errors import InputError
from trimtab.scenario._accounts import _read_overrides


def test_a_misspelt_account_and_key_read_as_sentences(tmp_path: Path) -> None:
    path = tmp_path / "overrides.yaml"
    path.write_text("SMA-0001:\n  limitz: {turnover.max: 0.1}\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"SMA-0001\.limitz: unknown key; did you mean limits\?$"):
        _read_overrides(path, {"SMA-0001"})
    path.write_text("SMA-001:\n  exclude: [AAA]\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"SMA-001: not an account of the accounts file; did you mean SMA-0001\?$"):
        _read_overrides(path, {"SMA-0001", "SMA-0200"})
