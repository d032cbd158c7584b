"""Writing an output folder safely: under a temporary sibling name, renamed when complete.

A target folder is only ever replaced when it is empty or carries the marker file this module writes
(so a mistyped ``--out`` can never delete a folder of inputs), and never when an input file lies
inside it.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

from trimtab._paths import (
    COMPLETED,
    ensure_parent_folder,
    file_mode,
    make_partial,
    raise_if_signalled,
    remove_created,
    remove_stale_partials,
)
from trimtab.errors import InputError

T = TypeVar("T")

#: Marker file in every folder trimtab writes; its presence allows the folder to be replaced.
MARKER = ".trimtab-output"


def check_inputs_outside(target: str | Path, inputs: Iterable[str | Path]) -> None:
    """Raise if ``target`` is one of ``inputs`` or a folder holding one of them."""
    resolved = Path(target).resolve()
    for item in inputs:
        p = Path(item).resolve()
        if p == resolved or resolved in p.parents:
            raise InputError(f"{target}: output folder would replace the input file {p.name}; choose another --out")


def check_target(target: Path, inputs: Iterable[str | Path] = ()) -> None:
    """Raise if writing ``target`` could replace something that is not a trimtab output or an input."""
    check_inputs_outside(target, inputs)
    if target.exists():
        if not target.is_dir():
            raise InputError(f"{target}: exists and is not a folder; choose another --out")
        if any(target.iterdir()) and not (target / MARKER).exists():
            raise InputError(
                f"{target}: folder exists and was not written by trimtab; refusing to replace it (choose another --out)"
            )


@contextmanager
def output_folder(target: str | Path, inputs: Iterable[str | Path] = ()) -> Iterator[Path]:
    """Yield a fresh temporary folder next to ``target``; on success it replaces ``target``.

    On any error the temporary folder is removed and ``target`` is left as it was. Partial folders
    left beside ``target`` by killed runs are removed first (see :mod:`trimtab._paths`). Folders and
    files get the modes the user's umask gives (0755/0644 under 022). An operating-system fault
    (read-only or full disk, permission denied) is raised as ``OSError`` naming ``target``.
    """
    final = Path(target)
    check_target(final, inputs)
    created: list[Path] = []  # folders above the target this run made: removed again if it stops
    tmp: Path | None = None
    try:
        ensure_parent_folder(final, created)
        remove_stale_partials(final.parent)
        tmp = _at(final, make_partial, final)
        try:
            yield tmp
        except OSError as err:
            if err.errno is None:
                raise
            raise OSError(err.errno, err.strerror, str(final)) from None
        _at(final, (tmp / MARKER).write_text, "written by trimtab; this folder may be replaced by the next run\n", encoding="utf-8")
        raise_if_signalled()  # a swallowed interrupt still keeps the folder out of place
        if final.exists():
            old = _at(final, make_partial, final, "old")
            _at(final, os.replace, final, old / final.name)
            _at(final, os.replace, tmp, final)
            shutil.rmtree(old, ignore_errors=True)
        else:
            _at(final, os.replace, tmp, final)
        COMPLETED.append(final)
    except BaseException:
        if tmp is not None:
            shutil.rmtree(tmp, ignore_errors=True)
        remove_created(created)
        raise


def _at(target: Path, action: Callable[..., T], *args: Any, **kwargs: Any) -> T:
    """``action(*args)``, an OSError re-raised naming ``target`` rather than a hidden temporary name."""
    try:
        return action(*args, **kwargs)
    except OSError as err:
        raise OSError(err.errno, err.strerror, str(target)) from None


def write_text_atomic(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder (mode under the umask)."""
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        os.fchmod(fd, file_mode())
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
