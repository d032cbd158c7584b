"""The strict YAML reader and the table readers under arbitrary input (issue #11).

Property tests (hypothesis, bounded): whatever the text or bytes, the loader returns a value or raises
ScenarioError, and a table reader returns a DataFrame or raises InputError; nothing else escapes.
Where the loader returns a value it is the one ``yaml.safe_load`` gives (the documented exceptions:
1e-12 is a number, and repeated keys, refused tags and control characters are errors).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
import yaml
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from trimtab.scenario._strict_yaml import MAX_DEPTH, dump_yaml, load_yaml_text, read_regular_file
from trimtab.errors import InputError, ScenarioError
from trimtab.scenario._loaders import read_table

#: Characters that make YAML structure, so random text often parses.
YAML_ALPHABET = st.sampled_from(list("ab01 :-[]{},&*!#'\"\n\t.e+%<>?|") + ["\x00", "\x85", "é", "!!set ", "!!float ", "<<: "])
BOUNDED = settings(max_examples=150, deadline=None, database=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def _same(a: object, b: object) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a):
        return math.isnan(b)
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    return a == b


@BOUNDED
@given(st.lists(YAML_ALPHABET, max_size=40).map("".join))
def test_loader_returns_a_value_or_a_scenario_error(text: str) -> None:
    try:
        value = load_yaml_text(text, "s.yaml")
    except ScenarioError as err:
        assert str(err).startswith("s.yaml: ") and "\n" not in str(err).strip()
        return
    # a document the strict reader accepts reads as safe_load reads it (exponents aside)
    if "e" not in text and "E" not in text:
        assert _same(value, yaml.safe_load(text))


@BOUNDED
@given(st.recursive(st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False) | st.text(max_size=8),
                    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner, max_size=3), max_leaves=12))
def test_plain_values_round_trip(value: object) -> None:
    # NEL and the Unicode line separators are line breaks to YAML, which PyYAML's emitter writes raw;
    # they cannot reach the writer, since the reader refuses them among the control characters
    text = dump_yaml(value)
    assume(not any(c in text for c in "\x85\u2028\u2029"))
    try:
        loaded = load_yaml_text(text, "s.yaml")
    except ScenarioError as err:  # control characters in text are refused, by the documented rule
        assert "control character" in str(err)
        return
    assert _same(loaded, value)


@BOUNDED
@given(st.binary(max_size=200), st.sampled_from(["csv", "parquet"]))
def test_table_reader_returns_a_frame_or_an_input_error(tmp_path_factory: pytest.TempPathFactory, data: bytes, kind: str) -> None:
    path = tmp_path_factory.mktemp("table") / f"t.{kind}"
    path.write_bytes(data)
    try:
        frame = read_table(path, what="holdings")
    except InputError as err:
        assert str(err).startswith(str(path)) and "\n" not in str(err).strip()
        return
    assert len(frame) > 0 and all(isinstance(c, str) for c in frame.columns)


def test_repeated_keys_name_both_lines_at_any_depth() -> None:
    with pytest.raises(ScenarioError, match=r"^s\.yaml: line 4: a\.b: key written twice \(lines 2 and 4\)"):
        load_yaml_text("a:\n  b: 1\n  c: 2\n  b: 3\n", "s.yaml")
    # a key beside a merge key overrides the merged one: YAML's meaning, not a repetition
    assert load_yaml_text("base: &b {x: 1}\nc:\n  <<: *b\n  x: 2\n", "s.yaml") == {"base": {"x": 1}, "c": {"x": 2}}


def test_exponents_without_a_dot_are_numbers() -> None:
    # YAML 1.2 core schema and JSON read these as numbers; YAML 1.1 (PyYAML) reads the first as text
    assert yaml.safe_load("x: 1e-12") == {"x": "1e-12"}
    # and what trimtab writes keeps such text as text
    assert dump_yaml({"id": "1E5"}) == "id: '1E5'\n"
    assert load_yaml_text(dump_yaml({"id": "0E0", "n": 1e-12}), "s.yaml") == {"id": "0E0", "n": 1e-12}
    assert load_yaml_text("x: [1e-12, 2E5, -3e+2, 1.5e-3, '1e-12']", "s.yaml") == {"x": [1e-12, 2e5, -300.0, 1.5e-3, "1e-12"]}


def test_nesting_and_expansion_are_bounded() -> None:
    deep = "[" * (MAX_DEPTH + 1) + "]" * (MAX_DEPTH + 1)
    with pytest.raises(ScenarioError, match=rf"nested more than {MAX_DEPTH} levels deep"):
        load_yaml_text(deep, "s.yaml")
    assert load_yaml_text("[" * (MAX_DEPTH - 1) + "]" * (MAX_DEPTH - 1), "s.yaml") is not None
    shared = "a: &a [1, 2]\nb: [*a, *a, *a]\n"
    assert load_yaml_text(shared, "s.yaml") == {"a": [1, 2], "b": [[1, 2]] * 3}


def test_only_regular_files_are_read(tmp_path: Path) -> None:
    import os

    pipe = tmp_path / "pipe"
    os.mkfifo(pipe)
    with pytest.raises(InputError, match=r"pipe: is a named pipe; expected a data file"):
        read_regular_file(pipe, "data")
    with pytest.raises(InputError, match=r"is a folder; expected a data file"):
        read_regular_file(tmp_path, "data")
    with pytest.raises(InputError, match=r"/dev/null: is a device"):
        read_regular_file("/dev/null", "data")
    big = tmp_path / "big.yaml"
    big.write_bytes(b"x" * 2048)
    with pytest.raises(InputError, match=r"big\.yaml: the data file is larger than 1,024 bytes; not read"):
        read_regular_file(big, "data", limit=1024)
