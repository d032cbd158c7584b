"""How every ``trimtab`` command ends: one line on stderr and a documented exit code, never a traceback.

Exit codes (docs/cli.md): 0 ok; 1 infeasible; 2 bad input; 3 solver failure; 4 a bug in trimtab;
5 a problem with the environment the user can fix (read-only or full disk, permission denied, an
output path below a file); 6 orders not fit to send (written, but no book in whole lots holds every
limit); 130 interrupted (SIGINT, Ctrl-C); 143 terminated (SIGTERM).

This module imports nothing heavy, so the console-script entry point (:mod:`trimtab.cli._entry`) can
install the signal handlers before numpy, pandas or the optimizer are imported.
"""

from __future__ import annotations

import errno
import functools
import os
import re
import sys
import warnings
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

from trimtab._paths import environment_line  # noqa: F401 - an OS fault's cause in a user's words (shared with the explore page)

EXIT_OK, EXIT_INFEASIBLE, EXIT_BAD_INPUT, EXIT_SOLVER, EXIT_INTERNAL, EXIT_ENVIRONMENT = 0, 1, 2, 3, 4, 5
EXIT_NOT_FIT = 6
EXIT_INTERRUPTED, EXIT_TERMINATED = 130, 143
F = TypeVar("F", bound=Callable[..., Any])



class Terminated(BaseException):
    """Raised by the SIGTERM handler, so a termination unwinds (and cleans up) like Ctrl-C.

    Not a KeyboardInterrupt, which the command-line framework would turn into exit 130 silently.
    """


#: Whether a ``trimtab: error:`` line was written (the entry point adds one for a late interrupt).
REPORTED: list[str] = []


def interrupt_line(err: BaseException) -> tuple[str, int]:
    """The line and exit code for an interrupt (Ctrl-C) or a termination (SIGTERM)."""
    from trimtab._paths import COMPLETED

    import signal

    from trimtab._paths import InterruptedBeforeCommit

    terminated = isinstance(err, Terminated) or (isinstance(err, InterruptedBeforeCommit) and err.signum == signal.SIGTERM)
    what, code = ("terminated", EXIT_TERMINATED) if terminated else ("interrupted", EXIT_INTERRUPTED)
    if COMPLETED:
        done = ", ".join(str(p) for p in COMPLETED)
        return f"{what}; {done} had been written completely before, nothing else was written", code
    return f"{what}; nothing was written", code


#: Hints in messages shared with the Python API (keyword arguments, attributes) → a scenario's words.
_PASS_HINTS = {
    "nav": "set data.holdings.nav, or give the holdings as shares with prices",
    "benchmark": "set data.benchmark",
    "alpha": "set data.alpha",
    "attributes": "set data.attributes",
}
_PASS = re.compile(r"\(pass (\w+)=\.\.\.\)")
_UNKNOWN = re.compile(r"\(pass unknown_assets='drop' or 'zero'[^)]*\)")
_RELAXATION = re.compile(r"\(see \.relaxation[^)]*\)")


def in_file_words(message: str) -> str:
    """``message`` with its Python hints (``pass nav=...``, ``see .relaxation``) in a scenario's words."""
    message = _PASS.sub(lambda m: f"({_PASS_HINTS.get(m[1], f'set {m[1]}')})", message)
    message = _UNKNOWN.sub("(set data.unknown_assets: drop or zero)", message)
    return _RELAXATION.sub("(the relaxation table shows how far each must move)", message)


def one_line(message: str) -> str:
    """The first line of ``message`` in a scenario's words, files under the working folder relative."""
    first = in_file_words(message.strip().splitlines()[0]) if message.strip() else "unknown error"
    cwd = os.getcwd() if os.path.isdir(".") else "/"
    return first.replace(f"{cwd}/", "") if cwd != "/" else first


def write_error(message: str) -> None:
    """``trimtab: error: <one line>`` on stderr."""
    REPORTED.append(one_line(message))
    sys.stderr.write(f"trimtab: error: {REPORTED[-1]}\n")
    sys.stderr.flush()


def fail(message: str, code: int) -> None:
    """One line on stderr, then leave the command with ``code``."""
    import typer

    write_error(message)
    raise typer.Exit(code)


def show_warnings(caught: Sequence[warnings.WarningMessage]) -> None:
    """Each distinct warning once, as one line on stderr."""
    for text in dict.fromkeys(str(w.message).strip().splitlines()[0] for w in caught if str(w.message).strip()):
        sys.stderr.write(f"trimtab: warning: {text}\n")


def guarded(fn: F, *, on_infeasible: Callable[[Any, BaseException], None] | None = None) -> F:
    """Wrap a command so that it ends with one stderr line and its documented exit code.

    trimtab's own errors give their exit code (1, 2, 3); ``OSError`` from the operating system gives
    5 naming the path and the cause; Ctrl-C 130 and SIGTERM 143; anything else is a bug (4), with the
    traceback only under ``--verbose``. ``on_infeasible(ctx, err)`` prints the relaxation table.
    """
    import typer

    from trimtab._paths import COMPLETED, InterruptedBeforeCommit
    from trimtab.errors import InfeasibleError, TrimtabError

    interrupts = (KeyboardInterrupt, Terminated, InterruptedBeforeCommit)

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        ctx = next((a for a in [*args, *kwargs.values()] if hasattr(a, "find_root")), None)
        root = ctx.find_root().obj if ctx is not None else None
        COMPLETED.clear()  # what this command writes, for an honest interrupt line
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    return fn(*args, **kwargs)
                except interrupts:
                    caught.clear()  # an interrupted run's warnings are about a result that was not written
                    raise
                finally:
                    show_warnings(caught)
        except typer.Exit:
            raise
        except InfeasibleError as err:
            if on_infeasible is not None:
                on_infeasible(ctx, err)
            fail(str(err), EXIT_INFEASIBLE)
        except TrimtabError as err:
            fail(str(err), getattr(err, "exit_code", EXIT_BAD_INPUT))
        except interrupts as err:
            fail(*interrupt_line(err))
        except OSError as err:
            if err.errno is None and not getattr(root, "verbose", False):
                fail(_bug_line(err), EXIT_INTERNAL)
            elif err.errno is None:
                raise
            fail(environment_line(err), EXIT_ENVIRONMENT)
        except MemoryError:
            fail("not enough memory for this run (a problem with the machine, not with the scenario)", EXIT_ENVIRONMENT)
        except Exception as err:  # noqa: BLE001 - a bug: one line unless --verbose asks for the traceback
            if getattr(root, "verbose", False):
                raise
            fail(_bug_line(err), EXIT_INTERNAL)
        return None

    return wrapper  # type: ignore[return-value]


def _bug_line(err: BaseException) -> str:
    return (
        f"internal error ({type(err).__name__}: {err}); this is a bug in trimtab, "
        "rerun with --verbose for the traceback"
    )
