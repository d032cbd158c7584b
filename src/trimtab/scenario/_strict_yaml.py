"""The one YAML reader of trimtab: ``yaml.safe_load`` semantics, minus every way a file can lie or hang.

Every YAML file the tool reads (scenarios and their ``extends`` bases, fit configs, grid files)
goes through :func:`read_yaml`. On top of PyYAML's safe loader it

- reads only regular files (never a device, a named pipe or a folder), opened without blocking and
  at most :data:`MAX_BYTES` long;
- refuses a key written twice in one mapping, at any depth, naming the key path and both lines;
- bounds the work: at most :data:`MAX_DEPTH` levels of nesting and :data:`MAX_NODES` values once
  anchors and aliases are expanded (so a few hundred bytes of nested aliases cannot fill memory);
- reads ``1e-12`` (an exponent without a dot) as the number YAML 1.2 and JSON make of it, where
  YAML 1.1 would read text;
- refuses tags that build Python-only values (``!!set``, ``!!omap``, ``!!pairs``, ``!!binary``) and
  text holding control characters other than tab and line breaks;
- turns a value that cannot be built (``2024-13-01``, ``!!float ''``, a 5,000-digit integer) into a
  :class:`~trimtab.errors.ScenarioError` naming the file, the line and the key path.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import yaml
from yaml.nodes import MappingNode, Node, ScalarNode, SequenceNode

from trimtab._paths import MAX_FILE_BYTES, check_regular, read_regular_file  # noqa: F401 - re-exported: the YAML readers' file checks
from trimtab.errors import Problem, ScenarioError

#: Largest YAML file read, in bytes.
MAX_BYTES = MAX_FILE_BYTES
#: Deepest nesting of mappings and lists.
MAX_DEPTH = 64
#: Most values (mapping entries, list items, scalars) once every alias is expanded.
MAX_NODES = 1_000_000

_MERGE_TAG = "tag:yaml.org,2002:merge"
_REFUSED_TAGS = {
    "tag:yaml.org,2002:set": "a set (!!set)",
    "tag:yaml.org,2002:omap": "an ordered map (!!omap)",
    "tag:yaml.org,2002:pairs": "a list of pairs (!!pairs)",
    "tag:yaml.org,2002:binary": "binary data (!!binary)",
}
_CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u2028\u2029]")
_EXPONENT = re.compile(r"^[-+]?(?:[0-9][0-9_]*)(?:\.[0-9_]*)?[eE][-+]?[0-9]+$")


class _DepthLimit(yaml.YAMLError):
    def __init__(self, mark: Any) -> None:
        super().__init__()
        self.problem_mark = mark


class StrictLoader(yaml.SafeLoader):
    """``yaml.SafeLoader`` with a nesting bound and YAML 1.2 exponents (see the module docstring)."""

    _depth = 0

    def compose_node(self, parent: Any, index: Any) -> Any:
        self._depth += 1
        try:
            if self._depth > MAX_DEPTH:
                raise _DepthLimit(self.peek_event().start_mark)
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


class StrictDumper(yaml.SafeDumper):
    """``yaml.SafeDumper`` that quotes text :class:`StrictLoader` would read as a number (``'1e5'``)."""


for _cls in (StrictLoader, StrictDumper):
    _cls.add_implicit_resolver("tag:yaml.org,2002:float", _EXPONENT, list("-+0123456789"))


def dump_yaml(value: Any) -> str:
    """``value`` as YAML that :func:`load_yaml_text` reads back as the same value."""
    return yaml.dump(value, Dumper=StrictDumper, sort_keys=False, allow_unicode=True)


def read_yaml(path: str | Path, what: str = "scenario") -> Any:
    """Read the YAML file ``path`` under the rules of this module; ``None`` for an empty file."""
    p = Path(path)
    data = read_regular_file(p, what, error=ScenarioError)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        raise ScenarioError(f"{p}: the {what} file is not UTF-8 text (byte {err.start + 1})") from None
    return load_yaml_text(text, p)


def load_yaml_text(text: str, source: str | Path) -> Any:
    """Parse ``text`` under the rules of this module; messages are prefixed with ``source``."""
    try:
        loader = StrictLoader(text)
    except yaml.YAMLError as err:  # the reader refuses some characters (a raw NUL) on sight
        raise ScenarioError(f"{source}: {_yaml_problem(err)}") from None
    try:
        try:
            node = loader.get_single_node()
        except _DepthLimit as err:
            raise ScenarioError(f"{source}: line {err.problem_mark.line + 1}: nested more than {MAX_DEPTH} levels deep") from None
        except yaml.YAMLError as err:
            raise ScenarioError(f"{source}: {_yaml_problem(err)}") from None
        except RecursionError:
            raise ScenarioError(f"{source}: nested too deeply to read") from None
        if node is None:
            return None
        _Checker(loader, source).check(node)
        try:
            return loader.construct_document(node)
        except yaml.YAMLError as err:
            raise ScenarioError(f"{source}: {_yaml_problem(err)}") from None
        except Exception as err:  # noqa: BLE001 - a value PyYAML cannot build, whatever it raises
            raise ScenarioError(f"{source}: a value cannot be read: {_first_line(err)}") from None
    finally:
        loader.dispose()


def _yaml_problem(err: yaml.YAMLError) -> str:
    mark = getattr(err, "problem_mark", None)
    where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark is not None else ""
    problem = getattr(err, "problem", None) or _first_line(err)
    return f"{where}not valid YAML: {problem}"


def _first_line(err: BaseException) -> str:
    text = str(err).strip()
    return text.splitlines()[0] if text else type(err).__name__


class _Checker:
    """One walk over the composed nodes: repeated keys, expansion size, cycles, refused values.

    Repeated keys and values that cannot be read are collected and raised together (every problem
    in one pass); a cycle or an expansion past :data:`MAX_NODES` stops the walk at once.
    """

    def __init__(self, loader: StrictLoader, source: str | Path) -> None:
        self.loader = loader
        self.source = source
        self.sizes: dict[int, int] = {}
        self.open: set[int] = set()
        self.problems: list[Problem] = []

    def check(self, node: Node) -> None:
        total = self._walk(node, ())
        if total > MAX_NODES:
            raise ScenarioError(
                f"{self.source}: anchors and aliases expand to more than {MAX_NODES:,} values; not read"
            )
        if self.problems:
            raise ScenarioError.of(self.problems)

    def _problem(self, node: Node, key_path: tuple[str, ...], message: str) -> Problem:
        where = f"line {node.start_mark.line + 1}" + (f": {'.'.join(key_path)}" if key_path else "")
        return Problem(str(self.source), where, message)

    def _fail(self, node: Node, key_path: tuple[str, ...], message: str) -> ScenarioError:
        return ScenarioError.of([self._problem(node, key_path, message)])

    def _note(self, node: Node, key_path: tuple[str, ...], message: str) -> None:
        self.problems.append(self._problem(node, key_path, message))

    def _walk(self, node: Node, key_path: tuple[str, ...]) -> int:
        ident = id(node)
        if ident in self.sizes:
            return self.sizes[ident]
        if ident in self.open:
            raise self._fail(node, key_path, "an alias refers to the value that contains it")
        if node.tag in _REFUSED_TAGS:
            self._note(node, key_path, f"{_REFUSED_TAGS[node.tag]} is not a value trimtab reads; use a list or a mapping")
            size = 1
        elif isinstance(node, ScalarNode):
            size = 1
            self._scalar(node, key_path)
        else:
            self.open.add(ident)
            size = 1 + (self._mapping(node, key_path) if isinstance(node, MappingNode) else self._sequence(node, key_path))
            self.open.discard(ident)
            if size > MAX_NODES:
                raise ScenarioError(
                    f"{self.source}: line {node.start_mark.line + 1}: anchors and aliases expand to more than "
                    f"{MAX_NODES:,} values; not read"
                )
        self.sizes[ident] = size
        return size

    def _sequence(self, node: SequenceNode, key_path: tuple[str, ...]) -> int:
        return sum(self._walk(item, (*key_path, str(i))) for i, item in enumerate(node.value))

    def _mapping(self, node: MappingNode, key_path: tuple[str, ...]) -> int:
        seen: dict[Any, int] = {}
        total = 0
        for key_node, value_node in node.value:
            if key_node.tag == _MERGE_TAG:
                total += self._walk(value_node, key_path)
                continue
            if not isinstance(key_node, ScalarNode) or key_node.tag in _REFUSED_TAGS:
                self._note(key_node, key_path, "a key must be plain text or a number, not a list or a mapping")
                continue
            key = self._scalar(key_node, key_path)
            label = str(key)
            first = seen.get(key) if key is not _UNREADABLE else None
            if first is not None:
                self._note(
                    key_node,
                    (*key_path, label),
                    f"key written twice (lines {first} and {key_node.start_mark.line + 1}); merge them or delete one",
                )
            else:
                seen[key] = key_node.start_mark.line + 1
            total += 1 + self._walk(value_node, (*key_path, label))
        return total

    def _scalar(self, node: ScalarNode, key_path: tuple[str, ...]) -> Any:
        try:
            value = self.loader.construct_object(node, deep=True)
        except Exception as err:  # noqa: BLE001 - PyYAML's constructors raise IndexError, ValueError, …
            text = node.value if len(node.value) <= 40 else node.value[:39] + "…"
            tag = node.tag.rsplit(":", 1)[-1]
            detail = ""
            if tag == "timestamp" and isinstance(err, ValueError) and ("must be" in str(err) or "out of range" in str(err)):
                detail = f" ({_first_line(err)})"
                if node.value[:1].isdigit():  # YAML reads an unquoted 2024-13-01 as a date
                    detail += "; put it in quotes if it is text"
            elif tag == "int" and len(node.value) > 1000:
                detail = f" (it has {len(node.value):,} digits)"
            self._note(node, key_path, f"{text!r} is not a valid {_TAG_WORDS.get(tag, tag)}{detail}")
            return _UNREADABLE
        finally:
            self.loader.constructed_objects.pop(node, None)
        if isinstance(value, str) and _CONTROL.search(value):
            code = ord(_CONTROL.search(value).group())  # type: ignore[union-attr]
            self._note(node, key_path, f"text holds a control character (code {code}); remove it")
        return value


#: What :meth:`_Checker._scalar` returns for a value it could not build (its problem is noted).
_UNREADABLE = object()


_TAG_WORDS = {"timestamp": "date", "float": "number", "int": "whole number", "bool": "true/false", "null": "null"}
