"""Tables (CSV, Parquet) and one JSON document for downstream systems; every file written atomically.

The JSON schema is documented in docs/outputs.md; bump :data:`SCHEMA_VERSION` on any change to it.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import tempfile
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab._version import __version__
from trimtab.attribution import RiskAttribution, compare_many
from trimtab.errors import InputError
from trimtab.report._stress import stress_frame, stress_records
from trimtab.report._content import CAUTION, gather, group_columns
from trimtab.report._relaxation import Unsolved, is_unsolved, split_subjects, unsolved

#: Version of the JSON document layout described in docs/outputs.md.
SCHEMA_VERSION = "1.1"
#: Table formats :func:`write_tables` can write.
TABLE_FORMATS = ("csv", "parquet")


# ---------------------------------------------------------------------- atomic writes
def atomic_write(path: Path, write: Callable[[Path], object]) -> Path:
    """Call ``write(temporary_path)`` in the target folder, then rename it over ``path``.

    A failure leaves no partial file behind and any earlier file at ``path`` untouched.
    """
    path = Path(path)
    if not path.parent.exists():
        raise InputError(f"report: folder does not exist: {path.parent}")
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    # mkstemp creates the file private (0600); give the final file the usual mode under the umask.
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    try:
        write(tmp)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def atomic_write_text(path: Path, text: str) -> Path:
    """Write ``text`` as UTF-8 to ``path`` through a temporary file."""
    return atomic_write(Path(path), lambda tmp: tmp.write_text(text, encoding="utf-8"))


# ---------------------------------------------------------------------- tables
def report_tables(subject: Any) -> dict[str, pd.DataFrame]:
    """The tables :func:`write_tables` writes, by file stem (see docs/outputs.md for each).

    A mapping name → result (a comparison) gives one table, ``comparison`` (:func:`comparison_table`).
    An ``InfeasibleError`` or ``SolverError`` gives one table, ``relaxation`` (raw numbers, in each
    limit's unit as the optimizer states it; empty for a solver failure).
    """
    if is_unsolved(subject):
        return {"relaxation": unsolved(subject).relaxation}
    if isinstance(subject, Mapping):
        return {"comparison": comparison_table(subject)}
    content = gather(subject)
    tables: dict[str, pd.DataFrame] = {"headline": content.headline}
    for prefix, attr in (("pre_trade", content.pre), ("post_trade", content.post)):
        if attr is None:
            continue
        stem = prefix if content.is_rebalance else "attribution"
        tables[f"{stem}_by_factor"] = attr.by_factor
        tables[f"{stem}_by_factor_group"] = attr.by_factor_group
        tables[f"{stem}_by_asset"] = attr.by_asset
        for column in group_columns(attr, content.scenario):
            tables[f"{stem}_by_{_stem(column)}"] = attr.by_group(column)
    if content.trades is not None:
        tables["trades"] = content.trades
    if content.trade_summary is not None:
        tables["trade_summary"] = content.trade_summary
    if content.constraints is not None:
        tables["constraints"] = content.constraints
    if content.objective is not None:
        tables["objective"] = content.objective.to_frame("value").rename_axis("term")
    if content.verification is not None:
        tables["verification"] = content.verification
    if (stress := stress_frame(subject)) is not None:
        tables["stress"] = stress
    return tables


def write_tables(
    subject: Any,
    out_dir: str | Path,
    formats: Sequence[str] = TABLE_FORMATS,
    *,
    file_format: str | None = None,
) -> list[Path]:
    """Write the report's tables as CSV and/or Parquet files into ``out_dir`` (created if missing).

    Parameters
    ----------
    subject : RebalanceResult, RiskAttribution, InfeasibleError, SolverError, or Mapping[str, any of them]
        An error writes its relaxation table only; a mapping (a comparison) writes
        ``comparison.<format>``, every scenario with its status.
    out_dir : str or Path
    formats : sequence of {"csv", "parquet"}
    file_format : {"csv", "parquet"}, optional
        One format; when given it replaces ``formats``.

    Returns
    -------
    list of Path
        The files written, ``<table>.<format>`` per table of :func:`report_tables`.

    Raises
    ------
    InputError
        If a format is unknown, ``out_dir`` is a file, or ``subject`` cannot be reported on.
    """
    if file_format is not None:
        formats = (file_format,)
    if isinstance(formats, str):
        formats = (formats,)
    unknown = [f for f in formats if f not in TABLE_FORMATS]
    if unknown or not formats:
        raise InputError(
            f"write_tables: formats must be among {', '.join(TABLE_FORMATS)}, got {list_labels(unknown) or 'none'}"
        )
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(f"write_tables: out_dir is a file, expected a folder: {out}")
    tables = report_tables(subject)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for stem, table in tables.items():
        for fmt in formats:
            target = out / f"{stem}.{fmt}"
            # atomic_write calls the writer before returning, so the closures see this loop's table.
            if fmt == "csv":
                atomic_write(target, lambda tmp: table.to_csv(tmp))
            else:
                atomic_write(target, lambda tmp: _parquet_ready(table).to_parquet(tmp))
            written.append(target)
    return written


def _stem(label: str) -> str:
    """A file-name-safe version of an attribute name."""
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in label.lower())


def _parquet_ready(table: pd.DataFrame) -> pd.DataFrame:
    """Object columns of mixed types become strings, so Parquet's typed columns accept them."""
    out = table.copy()
    for column in out.columns:
        if out[column].dtype == object:
            kinds = {type(v) for v in out[column].dropna()}
            if len(kinds) > 1:
                out[column] = out[column].map(lambda v: v if v is None else str(v))
    return out


# ---------------------------------------------------------------------- JSON
def report_document(subject: Any) -> dict[str, Any]:
    """The JSON document of :func:`write_json` as plain Python objects (NaN → None)."""
    if is_unsolved(subject):
        return _unsolved_document(unsolved(subject))
    if isinstance(subject, Mapping):
        return _comparison_document(subject)
    content = gather(subject)
    budget = content.risk_budget
    document: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "document": "trimtab.report",
        "kind": content.kind,
        "generated_by": {"package": "trimtab", "version": __version__},
        "created_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "cautions": [CAUTION],
        "run": content.run or None,
        "risk_budget": None
        if budget is None
        else {"name": budget.name, "cap": budget.cap, "pre": budget.pre, "post": budget.post, "used": budget.used},
        "relaxation": None,
        "headline": _records(content.headline, "figure"),
        "attribution": {
            "pre_trade": _attribution_document(content.pre, content.scenario),
            "post_trade": _attribution_document(content.post, content.scenario),
        },
        "trades": _records(content.trades, "asset"),
        "trade_summary": _records(content.trade_summary, None),
        "constraints": _records(content.constraints, None),
        "objective": None if content.objective is None else dict(content.objective.items()),
        "verification": _records(content.verification, None),
        "stress": stress_records(subject),
        "provenance": content.provenance,
        "scenario": content.scenario,
    }
    return _plain(document)


def comparison_table(subjects: Mapping[str, Any]) -> pd.DataFrame:
    """After-trade headline figures, one column per scenario, below a ``status`` row.

    A scenario given as an ``InfeasibleError`` or ``SolverError`` keeps its column: status
    ``infeasible`` or ``solver failure``, figures NaN. Solved ones have status ``solved``.

    Raises
    ------
    InputError
        If the mapping is empty or a value is neither an error nor a result with an attribution.
    """
    if not isinstance(subjects, Mapping) or not subjects:
        raise InputError("report: expected a non-empty mapping scenario name → rebalance result or attribution")
    solved, failed = split_subjects(subjects)
    names = [str(name) for name in subjects]
    try:
        figures = compare_many(solved) if solved else pd.DataFrame(index=pd.Index([], name="figure"))
    except InputError as err:
        raise InputError(f"report: {str(err).removeprefix('compare_many: ')}") from None
    figures = figures.reindex(columns=names)
    status = pd.DataFrame([[failed[n].status if n in failed else "solved" for n in names]], index=["status"], columns=names)
    table = pd.concat([status, figures.astype(object)])
    table.index.name = "figure"
    return table


def _comparison_document(subjects: Mapping[str, Any]) -> dict[str, Any]:
    """Several scenarios: the status and figures side by side, and each scenario's own document."""
    table = comparison_table(subjects)
    document: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "document": "trimtab.comparison",
        "generated_by": {"package": "trimtab", "version": __version__},
        "created_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "cautions": [CAUTION],
        "status": dict(table.loc["status"].items()),
        "comparison": _records(table.drop(index="status"), "figure"),
        "scenarios": {str(name): report_document(value) for name, value in subjects.items()},
    }
    return _plain(document)


def _unsolved_document(failure: Unsolved) -> dict[str, Any]:
    """The document of a scenario that did not solve: its status, message and relaxation rows."""
    document: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "document": "trimtab.report",
        "kind": "infeasible" if failure.status == "infeasible" else "solver_failure",
        "generated_by": {"package": "trimtab", "version": __version__},
        "created_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "cautions": [CAUTION],
        "run": {"status": failure.status, "message": failure.message},
        "risk_budget": None,
        "conflict": list(failure.conflict),
        "relaxation": _records(failure.relaxation, None),
        "headline": [],
        "attribution": {"pre_trade": None, "post_trade": None},
        "trades": None,
        "trade_summary": None,
        "constraints": None,
        "objective": None,
        "verification": None,
        "provenance": {},
        "scenario": {},
    }
    return _plain(document)


def write_json(subject: Any, path: str | Path) -> Path:
    """Write the report as one JSON document (schema in docs/outputs.md, with ``schema_version``).

    Parameters
    ----------
    subject : RebalanceResult, RiskAttribution, InfeasibleError, SolverError, or Mapping[str, any of them]
        An error gives a document of kind ``infeasible`` (with its ``relaxation`` rows, raw numbers)
        or ``solver_failure``. A mapping name → subject gives one ``trimtab.comparison`` document:
        every scenario's status, the headline figures side by side and each scenario's own document
        (schema :data:`~trimtab.report.COMPARISON_SCHEMA`).
    path : str or Path
        Written under a temporary name, then renamed.

    Returns
    -------
    Path

    Raises
    ------
    InputError
        If ``subject`` cannot be reported on or the folder does not exist.
    """
    text = json.dumps(report_document(subject), indent=2, allow_nan=False, ensure_ascii=False)
    return atomic_write_text(Path(path), text + "\n")


def _attribution_document(attr: RiskAttribution | None, scenario: Mapping[str, Any]) -> dict[str, Any] | None:
    if attr is None:
        return None
    return {
        "kind": attr.kind,
        "periods_per_year": attr.periods_per_year,
        "is_zero_risk": attr.is_zero_risk,
        "figures": dict(attr.headline().items()),
        "by_factor": _records(attr.by_factor, "factor"),
        "by_factor_group": _records(attr.by_factor_group, "group"),
        "by_asset": _records(attr.by_asset, "asset"),
        "by_attribute": {column: _records(attr.by_group(column), "group") for column in group_columns(attr, scenario)},
    }


def _records(table: pd.DataFrame | None, index_name: str | None) -> list[dict[str, Any]] | None:
    if table is None:
        return None
    frame = table.reset_index(names=index_name) if index_name is not None else table.reset_index(drop=True)
    return frame.to_dict(orient="records")


def _plain(value: Any) -> Any:
    """JSON-ready: NaN/inf → None, numpy scalars → Python, timestamps → ISO text, others → str."""
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, (pd.Timestamp, _dt.datetime, _dt.date)):
        return value.isoformat()
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if value is pd.NA or value is pd.NaT:
        return None
    return str(value)
