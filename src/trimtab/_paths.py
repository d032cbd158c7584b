"""File-system helpers: reading a regular file safely (:func:`read_regular_file`, shared by the model
store and the YAML and table readers), and writing outputs: modes under the user's umask, partial
folders, parents.

A folder being written is a hidden sibling of its target named ``.<target>.partial-<pid>-<random>``
(and a folder being replaced ``.<target>.old-<pid>-<random>``), so a run that was killed before it
could clean up leaves a folder whose name says which process made it. The next run that writes
beside it removes it once that process is gone (:func:`remove_stale_partials`); being hidden and
lacking the output marker, it is never taken for a result.
"""

from __future__ import annotations

import errno
import os
import re
import shutil
import stat
import tempfile
import threading
from pathlib import Path

from trimtab.errors import InputError

_STALE = re.compile(r"^\..+\.(?:partial|old)-(?P<pid>\d+)-[A-Za-z0-9_]{8}$")
_UMASK_LOCK = threading.Lock()
#: Output folders this process has finished (renamed into place), for an honest interrupt message.
COMPLETED: list[Path] = []
#: Signals (SIGINT, SIGTERM) the console script received. Its handler raises, but a raise that lands
#: in a callback Python runs for itself (a weakref or import-lock callback) is swallowed, so an
#: output folder checks this record again before it is put in place.
RECEIVED_SIGNALS: list[int] = []
#: The largest input file :func:`read_regular_file` reads unless told otherwise (8 MiB).
MAX_FILE_BYTES = 8 * 1024 * 1024


class InterruptedBeforeCommit(BaseException):
    """A signal arrived while an output folder was written and its raise was swallowed."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


def raise_if_signalled() -> None:
    """Raise :class:`InterruptedBeforeCommit` when a signal was received (nothing is put in place)."""
    if RECEIVED_SIGNALS:
        raise InterruptedBeforeCommit(RECEIVED_SIGNALS[0])


def current_umask() -> int:
    """The process's umask (read by setting and restoring it, under a lock)."""
    with _UMASK_LOCK:
        mask = os.umask(0o022)
        os.umask(mask)
    return mask


def folder_mode() -> int:
    """The mode a new folder gets under the umask (0755 under 022)."""
    return 0o777 & ~current_umask()


def file_mode() -> int:
    """The mode a new file gets under the umask (0644 under 022)."""
    return 0o666 & ~current_umask()


def make_partial(target: Path, kind: str = "partial") -> Path:
    """A new hidden folder beside ``target`` named for this process, with the umask's mode.

    ``tempfile.mkdtemp`` creates folders 0700; the mode is widened to what ``mkdir`` would give, so a
    colleague or a scheduled job under another account can read the finished output.
    """
    folder = Path(tempfile.mkdtemp(prefix=f".{target.name}.{kind}-{os.getpid()}-", dir=target.parent))
    os.chmod(folder, folder_mode())
    return folder


def _process_gone(pid: int) -> bool:
    if pid == os.getpid():
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except (PermissionError, OverflowError, ValueError):
        return False
    return False


def remove_stale_partials(folder: Path) -> list[Path]:
    """Remove the partial folders in ``folder`` left by runs whose process is gone; return them."""
    removed: list[Path] = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for entry in entries:
        match = _STALE.match(entry.name)
        if match is None or not entry.is_dir(follow_symlinks=False):
            continue
        if _process_gone(int(match["pid"])):
            shutil.rmtree(entry.path, ignore_errors=True)
            if not os.path.lexists(entry.path):
                removed.append(Path(entry.path))
    return removed


def ensure_parent_folder(target: Path, created: list[Path] | None = None) -> None:
    """Create the folders above ``target``; a path below an existing file is an OSError naming it.

    Each folder this call creates is appended to ``created`` just before it is made, so that a run
    stopped at any moment can take them away again (:func:`remove_created`).
    """
    for ancestor in reversed(target.parents):
        if os.path.lexists(ancestor):
            if not ancestor.is_dir():
                raise OSError(errno.ENOTDIR, os.strerror(errno.ENOTDIR), str(ancestor))
            continue
        if created is not None:
            created.append(ancestor)
        try:
            os.mkdir(ancestor)  # mode 0777 less the umask, as mkdir(1) gives
        except FileExistsError:
            if created is not None:
                created.pop()  # made meanwhile by someone else: not ours to remove
            if not ancestor.is_dir():
                raise OSError(errno.ENOTDIR, os.strerror(errno.ENOTDIR), str(ancestor)) from None
        except OSError as err:
            raise OSError(err.errno, err.strerror, str(err.filename or ancestor)) from None


def remove_created(created: list[Path]) -> None:
    """Remove the folders :func:`ensure_parent_folder` made, deepest first, each only while empty."""
    for folder in reversed(created):
        try:
            os.rmdir(folder)
        except OSError:
            pass  # gone, or holds something that is not ours to remove


def read_regular_file(path: str | Path, what: str, limit: int | None = None, error: type[InputError] = InputError) -> bytes:
    """The bytes of ``path``, which must be a regular file (not a folder, device or pipe).

    The file is opened without blocking, so a named pipe cannot hang the tool, and checked again
    once open. ``limit`` caps the size read; a longer file is an error naming the limit.

    Raises
    ------
    InputError
        One line naming the path and what is wrong. Permission and I/O faults are re-raised as
        ``OSError`` with the path, for the command line to report as an environment problem.
    """
    p = Path(path)
    try:
        info = os.stat(p)
    except FileNotFoundError:
        raise error(f"{p}: no such {what} file") from None
    except NotADirectoryError:
        raise error(f"{p}: no such {what} file (a part of the path is a file, not a folder)") from None
    except OSError as err:
        raise OSError(err.errno, err.strerror, str(p)) from None
    check_regular(p, info.st_mode, what, error)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(p, flags)
    except OSError as err:
        raise OSError(err.errno, err.strerror, str(p)) from None
    try:
        check_regular(p, os.fstat(fd).st_mode, what, error)
        cap = MAX_FILE_BYTES if limit is None else limit
        chunks: list[bytes] = []
        size = 0
        while True:
            chunk = os.read(fd, 1 << 20)
            if not chunk:
                break
            size += len(chunk)
            if size > cap:
                shown = f"{cap // (1024 * 1024)} MiB" if cap >= 1024 * 1024 else f"{cap:,} bytes"
                raise error(f"{p}: the {what} file is larger than {shown}; not read")
            chunks.append(chunk)
        return b"".join(chunks)
    except OSError as err:
        if err.errno == errno.EAGAIN:
            raise error(f"{p}: the {what} file cannot be read without waiting (is it a pipe?)") from None
        raise OSError(err.errno, err.strerror, str(p)) from None
    finally:
        os.close(fd)


def check_regular(path: Path, mode: int, what: str, error: type[InputError] = InputError) -> None:
    """Raise unless ``mode`` (from ``os.stat``) is that of a regular file."""
    if stat.S_ISREG(mode):
        return
    if stat.S_ISDIR(mode):
        raise error(f"{path}: is a folder; expected a {what} file")
    kind = "a named pipe" if stat.S_ISFIFO(mode) else "a device" if stat.S_ISCHR(mode) or stat.S_ISBLK(mode) else "a socket" if stat.S_ISSOCK(mode) else "not a regular file"
    raise error(f"{path}: is {kind}; expected a {what} file (a regular file)")


#: errno → the cause in a user's words.
OS_CAUSES = {
    errno.EROFS: "the file system is read-only",
    errno.ENOSPC: "no space left on the disk",
    errno.EDQUOT: "the disk quota is exceeded",
    errno.EACCES: "permission denied",
    errno.EPERM: "operation not permitted",
    errno.ENOTDIR: "is a file, so no folder can be made below it",
    errno.EISDIR: "is a folder",
    errno.EEXIST: "exists and is not a folder",
    errno.ENAMETOOLONG: "the name is too long",
    errno.EMFILE: "too many open files",
    errno.EIO: "input/output error on the disk",
    errno.ENOENT: "no such file or folder",
    errno.ELOOP: "too many symbolic links",
}


def environment_line(err: OSError) -> str:
    """``<path>: cannot <do it>: <cause>`` for an operating-system fault, in the user's words."""
    cause = OS_CAUSES.get(err.errno or -1) or (err.strerror or type(err).__name__).lower()
    paths = [p for p in (err.filename, err.filename2) if p]
    where = f"{os.fsdecode(paths[0])}: " if paths else ""
    return f"{where}{cause} (fix the disk or the path and rerun; the inputs are unchanged)"
