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
from trimtab.attribution import HEADLINE_FIGURES, RiskAttribution, compare_many, figure_label
from trimtab.errors import InputError
from trimtab.report._content import CAUTION, DESK_FIGURES, gather, group_columns, warning_records
from trimtab.report._overlay_section import overlay_comparison_rows, overlay_document, overlay_tables
from trimtab.report._stress import stress_frame, stress_records
from trimtab.report._relaxation import Unsolved, is_unsolved, split_subjects, unsolved

#: Version of the JSON document layout described in docs/outputs.md.
SCHEMA_VERSION = "1.2"
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
    if content.orders is not None:
        fit = content.rounding is None or content.rounding.get("fit_to_send", True)
        tables["trades" if fit else "trades_not_fit_to_send"] = content.orders
    if content.target_book is not None:
        tables["target_book"] = content.target_book
    if content.figures is not None:
        tables["figures"] = content.figures
    if content.trade_summary is not None:
        tables["trade_summary"] = content.trade_summary
    if content.constraints is not None:
        tables["constraints"] = content.constraints
    if content.objective is not None:
        tables["objective"] = content.objective.to_frame("value").rename_axis("term")
    if content.verification is not None:
        tables["verification"] = content.verification
    if content.checks is not None:
        tables["limits"] = content.checks
    if content.warnings:
        tables["warnings"] = pd.DataFrame(
            [{"kind": w["kind"], "message": w["message"]} for w in content.warnings]
        )
    if (stress := stress_frame(subject)) is not None:
        tables["stress"] = stress
    tables.update(overlay_tables(subject))
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
            shaped, keep_index = named_index(table)
            if fmt == "csv":
                atomic_write(target, lambda tmp: shaped.to_csv(tmp, index=keep_index))
            else:
                atomic_write(target, lambda tmp: _parquet_ready(shaped).to_parquet(tmp, index=keep_index))
            written.append(target)
    return written


def named_index(table: pd.DataFrame) -> tuple[pd.DataFrame, bool]:
    """A table ready for a file whose first column always has a header: a plain row number is left
    out, an unnamed index is called ``label``."""
    if isinstance(table.index, pd.RangeIndex) and table.index.name is None:
        return table, False
    if table.index.name is None and table.index.nlevels == 1:
        return table.rename_axis("label"), True
    return table, True


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
        "figures": _records(content.figures, "figure"),
        "warnings": content.warnings,
        "context": content.context,
        "trades": _records(content.orders, "asset"),
        "trades_unit": "shares" if content.orders_in_shares else "weights",
        "rounding": None if content.rounding is None else {
            **{k: v for k, v in content.rounding.items() if k not in ("largest_changes", "breached")},
            "breached": _records(content.rounding["breached"], None),
            "largest_changes": _records(content.rounding["largest_changes"], "asset"),
        },
        "target_book": _records(content.target_book, "asset"),
        "trade_summary": _records(content.trade_summary, None),
        "constraints": _records(content.constraints, None),
        "objective": None if content.objective is None else dict(content.objective.items()),
        "verification": _records(content.verification, None),
        "limits": _records(content.checks, "limit"),
        "stress": stress_records(subject),
        "overlay": overlay_document(subject),
        "provenance": content.provenance,
        "scenario": content.scenario,
    }
    return _plain(document)


def comparison_table(subjects: Mapping[str, Any]) -> pd.DataFrame:
    """The scenarios side by side: what each gains and gives up, below a ``status`` row.

    Index ``figure``; columns ``label`` and ``unit``, one column per scenario (in the mapping's order),
    then ``change: <name>`` for each later solved scenario: its figure minus the first scenario's
    (none when the first did not solve). Rows: the
    desk figures (expected active return, information ratio, tracking error, total risk, beta,
    turnover, estimated cost, names bought, sold and held), the share of risk from factors, the
    risk budget used, the binding limits (text), then the other after-trade risk figures. A scenario
    given as an ``InfeasibleError`` or ``SolverError`` keeps its column: status ``infeasible`` or
    ``solver failure``, figures NaN.

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
    contents = {name: gather(value) for name, value in solved.items()}
    kind = next(iter(contents.values())).post.kind if contents else "total"
    rows: list[tuple[str, str, str, dict[str, Any]]] = [
        ("status", "Status", "text", {n: failed[n].status if n in failed else "solved" for n in names})
    ]
    desk = {n: (c.figures if c.figures is not None else None) for n, c in contents.items()}
    have_desk = any(d is not None for d in desk.values())
    if have_desk:
        for key, (label, unit) in DESK_FIGURES.items():
            values = {n: (float(d.loc[key, "post"]) if d is not None and key in d.index else np.nan) for n, d in desk.items()}
            if any(np.isfinite(v) for v in values.values()):
                rows.append((key, label, unit, values))
    duplicated = {"risk", "variance", "portfolio_risk", "beta", "n_positions"} if have_desk else set()
    for key in ("factor_percent",):
        if key in figures.index:
            rows.append((key, figure_label(key, kind), HEADLINE_FIGURES[key][1], dict(figures.loc[key].items())))
    rows.append(("risk_budget_used", "Risk budget used", "fraction",
                 {n: c.risk_budget.used if c.risk_budget is not None else np.nan for n, c in contents.items()}))
    for key in figures.index:
        if key in duplicated or key == "factor_percent":
            continue
        values = dict(figures.loc[key].items())
        if any(pd.notna(v) for v in values.values()):
            rows.append((key, figure_label(key, kind), HEADLINE_FIGURES[key][1], values))
    rows.extend(overlay_comparison_rows(solved))
    rows.append(("binding_limits", "Binding limits (assets at a per-asset limit)", "text",
                 {n: binding_text(c.constraints) for n, c in contents.items()}))
    table = pd.DataFrame(
        [{"label": label, "unit": unit, **{n: values.get(n, np.nan) for n in names}} for _, label, unit, values in rows],
        index=pd.Index([key for key, *_ in rows], name="figure"),
    ).astype(object)
    first = names[0]
    for name in [n for n in names[1:] if n not in failed] if first not in failed else []:
        column = []
        for key, _, unit, values in rows:
            a, b = values.get(first), values.get(name)
            numeric = unit != "text" and isinstance(a, (int, float, np.floating)) and isinstance(b, (int, float, np.floating))
            column.append(float(b) - float(a) if numeric and name not in failed and first not in failed else np.nan)  # type: ignore[arg-type]
        table[f"change: {name}"] = column
    return table


def binding_text(constraints: pd.DataFrame | None) -> str:
    """The binding limits in a few words: ``tracking_error, turnover, active_weight (3)``: a per-asset
    limit with the number of assets at it, a family of limits (``group.industry[…]``) with the number
    binding."""
    if constraints is None or "binding" not in constraints.columns:
        return ""
    from trimtab.report._content import flags

    rows = constraints[flags(constraints["binding"])]
    counts: dict[str, int] = {}
    for _, row in rows.iterrows():
        name = str(row["name"]).split("[", 1)[0]
        n = row.get("n_binding")
        per_asset = pd.notna(row.get("asset")) and pd.notna(n) and int(n) >= 1
        counts[name] = counts.get(name, 0) + (int(n) if per_asset else 1)
    singles = {str(row["name"]).split("[", 1)[0] for _, row in rows.iterrows() if pd.isna(row.get("asset"))}
    parts = [name if n == 1 and name in singles else f"{name} ({n:,})" for name, n in counts.items()]
    return ", ".join(parts) if parts else "none"


def _comparison_document(subjects: Mapping[str, Any]) -> dict[str, Any]:
    """Several scenarios: the status and figures side by side, and each scenario's own document."""
    table = comparison_table(subjects)
    document: dict[str, Any] = {
        "schema_version": SCHEMA_VERSION,
        "document": "trimtab.comparison",
        "generated_by": {"package": "trimtab", "version": __version__},
        "created_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "cautions": [CAUTION],
        "status": {n: table.loc["status", n] for n in subjects},
        "comparison": _records(table.drop(index="status"), "figure"),
        "warnings": {str(name): warning_records(value) for name, value in subjects.items()},
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
        "figures": None,
        "warnings": [],
        "context": {},
        "trades": None,
        "trades_unit": None,
        "rounding": None,
        "target_book": None,
        "trade_summary": None,
        "constraints": None,
        "objective": None,
        "verification": None,
        "limits": None,
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
    # the exact built-in types first: a 5,000-name document has ~140k values, and the abstract
    # Mapping test costs more than the conversion (0.23 s of a 0.27 s API answer, measured)
    kind = type(value)
    if kind is float:
        return value if math.isfinite(value) else None
    if kind is str or kind is bool or value is None:
        return value
    if kind is int:
        return value
    if kind is dict:
        return {str(k): _plain(v) for k, v in value.items()}
    if kind is list:
        return [_plain(v) for v in value]
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
