"""Output folders: written under a temporary name, renamed when complete, never over inputs."""

from __future__ import annotations

from pathlib import Path

import pytest

from trimtab.errors import InputError
from trimtab.scenario import MARKER, output_folder, write_text_atomic


def test_complete_folder_appears_only_at_the_end(tmp_path: Path) -> None:
    target = tmp_path / "out"
    with output_folder(target) as tmp:
        (tmp / "a.csv").write_text("x\n", encoding="utf-8")
        assert not target.exists()
        assert tmp.parent == tmp_path and tmp.name.startswith(".out.partial-")
    assert (target / "a.csv").exists() and (target / MARKER).exists()
    # a second run replaces the first (it carries the marker)
    with output_folder(target) as tmp:
        (tmp / "b.csv").write_text("y\n", encoding="utf-8")
    assert sorted(p.name for p in target.iterdir()) == [MARKER, "b.csv"]
    assert [p.name for p in tmp_path.iterdir()] == ["out"]  # no temporary folders left


def test_failure_leaves_the_old_folder_and_no_partial_output(tmp_path: Path) -> None:
    target = tmp_path / "out"
    with output_folder(target) as tmp:
        (tmp / "old.csv").write_text("x\n", encoding="utf-8")
    with pytest.raises(RuntimeError, match="boom"):
        with output_folder(target) as tmp:
            (tmp / "new.csv").write_text("y\n", encoding="utf-8")
            raise RuntimeError("boom")
    assert sorted(p.name for p in target.iterdir()) == [MARKER, "old.csv"]
    assert [p.name for p in tmp_path.iterdir()] == ["out"]



@pytest.mark.parametrize("stop", [KeyboardInterrupt, RuntimeError])
def test_a_stopped_run_also_takes_away_the_folders_it_made_above_the_target(tmp_path: Path, stop: type) -> None:
    (tmp_path / "kept").mkdir()
    with pytest.raises(stop):
        with output_folder(tmp_path / "kept" / "results" / "deeper" / "base") as tmp:
            (tmp / "a.csv").write_text("x\n", encoding="utf-8")
            raise stop()
    assert [p.name for p in tmp_path.iterdir()] == ["kept"] and not any((tmp_path / "kept").iterdir())
    # a folder above the target that holds something else stays
    (tmp_path / "kept" / "results").mkdir()
    (tmp_path / "kept" / "results" / "mine.txt").write_text("x", encoding="utf-8")
    with pytest.raises(stop):
        with output_folder(tmp_path / "kept" / "results" / "deeper" / "base"):
            raise stop()
    assert [p.name for p in (tmp_path / "kept" / "results").iterdir()] == ["mine.txt"]

def test_refuses_folders_it_did_not_write_and_folders_holding_inputs(tmp_path: Path) -> None:
    data = tmp_path / "data"
    data.mkdir()
    (data / "holdings.csv").write_text("asset,weight\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"data: folder exists and was not written by trimtab; refusing to replace it"):
        with output_folder(data):
            pass
    (tmp_path / "file.txt").write_text("x", encoding="utf-8")
    with pytest.raises(InputError, match=r"file\.txt: exists and is not a folder"):
        with output_folder(tmp_path / "file.txt"):
            pass
    with pytest.raises(InputError, match=r"output folder would replace the input file holdings\.csv"):
        with output_folder(data, inputs=[data / "holdings.csv"]):
            pass
    assert (data / "holdings.csv").exists()


def test_write_text_atomic(tmp_path: Path) -> None:
    path = tmp_path / "a.txt"
    write_text_atomic(path, "one")
    write_text_atomic(path, "two")
    assert path.read_text(encoding="utf-8") == "two"
    assert [p.name for p in tmp_path.iterdir()] == ["a.txt"]



def test_a_swallowed_interrupt_keeps_the_folder_out_of_place(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # issue #11: a signal whose raise Python swallowed (it landed in an import-lock callback) must
    # still stop the folder from being put in place; seen once in the catalogue's SIGTERM test
    import signal

    import trimtab._paths as paths

    monkeypatch.setattr(paths, "RECEIVED_SIGNALS", [signal.SIGTERM])
    with pytest.raises(paths.InterruptedBeforeCommit):
        with output_folder(tmp_path / "out") as tmp:
            (tmp / "trades.csv").write_text("asset,trade\n", encoding="utf-8")
    assert list(tmp_path.iterdir()) == []
