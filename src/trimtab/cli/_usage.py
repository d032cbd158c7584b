"""How the command line reads its own words: usage errors as one line, global options in either place,
plain placeholders in help (docs/cli.md, "Usage errors").

- A usage error (an unknown option, a missing argument, a value out of range: click's
  ``UsageError``) is ONE line ``trimtab: error: <command>: <what>; see trimtab <command> -h`` and exit
  code 2, never typer's framed box.
- The global options ``--json``, ``--quiet``/``-q`` and ``--verbose``/``-v`` may come before the
  command or after it: ``trimtab rebalance x.yaml --json`` is ``trimtab --json rebalance x.yaml``.
  A command with an option of the same name keeps it (none has one today).
- Help shows plain placeholders: ``PATH``, ``NUMBER``, ``INTEGER``, ``TEXT`` (``…`` for several), and
  nothing for a flag, instead of typer's ``<path>``, ``<bool>`` or ``<list[Path]>``.
"""

from __future__ import annotations

import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import typer
from typer._click import exceptions as usage  # the click this typer ships (typer raises its classes)
from typer.core import TyperArgument, TyperGroup

from trimtab.cli._guard import EXIT_BAD_INPUT, write_error

#: The root's flags that may also follow the command.
GLOBAL_FLAGS = ("--json", "--quiet", "-q", "--verbose", "-v")
#: Plain placeholders by the Python type typer read from the annotation.
PLACEHOLDERS = {Path: "PATH", float: "NUMBER", int: "INTEGER", str: "TEXT"}


def hoist_global_flags(args: Sequence[str], group: TyperGroup) -> list[str]:
    """``args`` with the global flags that follow the command moved in front of it.

    The command is the first argument that is not a flag; ``--`` ends the search, and a flag the
    command itself defines stays where it is.
    """
    out = list(args)
    position = next((i for i, a in enumerate(out) if not a.startswith("-")), None)
    if position is None:
        return out
    command = group.commands.get(out[position])
    own = {name for p in (command.params if command is not None else []) for name in (*p.opts, *p.secondary_opts)}
    head, tail = out[:position], out[position:]
    moved = []
    rest = []
    for i, arg in enumerate(tail):
        if arg == "--":
            rest.extend(tail[i:])
            break
        if arg in GLOBAL_FLAGS and arg not in own and i > 0:
            moved.append(arg)
        else:
            rest.append(arg)
    return [*head, *moved, *rest]


def plain_placeholder(param: Any) -> str | None:
    """The placeholder help shows for ``param``: None for a flag or an argument (its name says it)."""
    if isinstance(param, TyperArgument) or getattr(param, "is_flag", False) or getattr(param, "count", False):
        return None
    if param.metavar is not None:
        return param.metavar or None
    descriptor = getattr(param, "type_descriptor", None)
    if descriptor is not None and descriptor.is_choice:
        return "|".join(map(str, descriptor.choices or ()))
    annotation = getattr(descriptor, "annotation", None)
    several = getattr(descriptor, "is_list", False) or param.nargs != 1
    for kind, word in PLACEHOLDERS.items():
        if annotation is kind or annotation == list[kind]:  # type: ignore[valid-type]
            return word + ("…" if several else "")
    return "VALUE"


def _plain(param: Any) -> Any:
    if hasattr(param, "display_type_rich"):
        word = plain_placeholder(param)
        param.display_type_rich = lambda ctx, _word=word: _word  # type: ignore[method-assign]
    return param


def plain_help(group: TyperGroup) -> None:
    """Give every command's options (and --help) plain placeholders."""
    for command in [group, *group.commands.values()]:
        for param in command.params:
            _plain(param)
        if not getattr(command, "_plain_help", False):
            original = command.get_help_option

            def help_option(ctx: Any, _original: Any = original) -> Any:
                option = _original(ctx)
                return _plain(option) if option is not None else None

            command.get_help_option = help_option  # type: ignore[method-assign]
            command._plain_help = True  # type: ignore[attr-defined]


def usage_line(err: usage.UsageError) -> str:
    """``<command>: <what>; see trimtab <command> -h`` (the first line of click's message)."""
    message = err.format_message().strip().splitlines()[0] if err.format_message().strip() else "invalid usage"
    path = err.ctx.command_path if err.ctx is not None else "trimtab"
    where = path.split(" ", 1)[1] if " " in path else ""
    return f"{where + ': ' if where else ''}{message[0].lower() + message[1:] if message[:1].isupper() else message}; see {path} -h"


class OneLineGroup(TyperGroup):
    """The root command: global flags in either place, one-line usage errors, plain help placeholders."""

    def main(self, args: Sequence[str] | None = None, prog_name: str | None = None, complete_var: str | None = None,
             standalone_mode: bool = True, windows_expand_args: bool = True, **extra: Any) -> Any:
        plain_help(self)
        arguments = hoist_global_flags(sys.argv[1:] if args is None else args, self)
        try:
            code = super().main(arguments, prog_name, complete_var, False, windows_expand_args, **extra)
        except usage.NoArgsIsHelpError as err:  # bare `trimtab` or a command without its arguments: the help
            if not standalone_mode:
                raise
            sys.stdout.write(err.ctx.get_help() + "\n" if err.ctx is not None else "")
            sys.exit(EXIT_BAD_INPUT)
        except usage.UsageError as err:
            if not standalone_mode:
                raise
            write_error(usage_line(err))
            sys.exit(EXIT_BAD_INPUT)
        except usage.ClickException as err:  # a BadParameter raised by a command itself, a file click opened
            if not standalone_mode:
                raise
            write_error(err.format_message())
            sys.exit(err.exit_code)
        except typer.Abort:
            if not standalone_mode:
                raise
            raise KeyboardInterrupt() from None  # the entry point reports it: one line, exit 130
        if not standalone_mode:
            return code
        sys.exit(code if isinstance(code, int) else 0)
