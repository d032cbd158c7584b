"""The ``trimtab`` console script: signal handlers first, then the command line.

Ctrl-C (SIGINT) and SIGTERM are turned into exceptions before anything heavy is imported, so an
interrupt at any moment, start-up included, unwinds through the cleanup of partial outputs and ends
with one line and exit 130 (SIGINT) or 143 (SIGTERM), never a traceback.
"""

from __future__ import annotations

import signal
import sys
from types import FrameType

from trimtab.cli._guard import REPORTED, Terminated, interrupt_line, write_error
from trimtab._paths import RECEIVED_SIGNALS as _RECEIVED


def _on_signal(signum: int, _frame: FrameType | None) -> None:
    _RECEIVED.append(signum)
    # a library that swallows the interrupt (cvxpy logs a solver import it cut short) prints nothing
    # more: the one line is trimtab's
    import logging

    logging.disable(logging.CRITICAL)
    raise Terminated() if signum == signal.SIGTERM else KeyboardInterrupt()


def _quiet_unraisable(unraisable: sys.UnraisableHookArgs) -> None:
    """An interrupt raised inside a callback Python runs for itself (a weakref or import-lock
    callback) is swallowed there; say nothing of it (it is recorded, and acted on later),
    and leave every other unraisable exception to Python's own report."""
    if isinstance(unraisable.exc_value, (KeyboardInterrupt, Terminated)) and _RECEIVED:
        return
    sys.__unraisablehook__(unraisable)


def _exit_code(value: object) -> int:
    if value is None:
        return 0
    if isinstance(value, int):
        return value
    sys.stderr.write(f"{value}\n")
    return 1


def main() -> None:
    """Console-script entry point (``trimtab``)."""
    signal.signal(signal.SIGINT, _on_signal)
    signal.signal(signal.SIGTERM, _on_signal)
    sys.unraisablehook = _quiet_unraisable
    try:
        from trimtab.cli import app

        app(prog_name="trimtab")
        code = 0
    except SystemExit as done:
        code = _exit_code(done.code)
    except (KeyboardInterrupt, Terminated) as err:
        line, code = interrupt_line(err)
        write_error(line)
    if _RECEIVED and not REPORTED:
        line, code = interrupt_line(Terminated() if _RECEIVED[0] == signal.SIGTERM else KeyboardInterrupt())
        write_error(line)
    sys.exit(code)
