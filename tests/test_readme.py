"""The README's Python snippet runs as written on the demo's files (a newcomer copies it first)."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def test_readme_python_snippet_runs_on_demo_files(tmp_path: Path) -> None:
    made = subprocess.run(
        [sys.executable, "-m", "trimtab.cli", "--quiet", "demo", "--out", "trimtab-demo", "--n-assets", "600"],
        cwd=tmp_path, capture_output=True, text=True, timeout=600, check=False,
    )
    assert made.returncode == 0, made.stderr[-2000:]
    snippet = re.findall(r"```python\n(.*?)```", (REPO / "README.md").read_text(encoding="utf-8"), re.S)[0]
    done = subprocess.run(
        [sys.executable, "-c", snippet], cwd=tmp_path, capture_output=True, text=True, timeout=600, check=False,
        env={**os.environ, "PYTHONWARNINGS": "error::FutureWarning"},
    )
    assert done.returncode == 0, done.stderr[-2000:]
    assert "Active risk attribution" in done.stdout
    assert "Verification:" in done.stdout
