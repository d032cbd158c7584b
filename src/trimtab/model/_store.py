"""Save and load a FactorModel as a folder of open tables plus a JSON manifest.

Layout (format ``trimtab-factor-model``, version 1)::

    MODEL_DIR/
      manifest.json              format, version, sizes, periods_per_year, factor groups, provenance,
                                 and the SHA-256 of every table
      exposures.<ext>            assets × factors (first column: asset)
      factor_covariance.<ext>    factors × factors (first column: factor)
      specific_variance.<ext>    columns asset, specific_variance
      fit_assets.<ext>           per-asset estimation statistics (when the model came from a fit)
      factor_returns.<ext>       dates × factors (when the fit produced them)

``<ext>`` is ``parquet`` or ``csv``. The folder is written under a temporary sibling name and renamed
when complete.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab._paths import (
    COMPLETED, check_regular, ensure_parent_folder, make_partial, read_regular_file, remove_created, remove_stale_partials,
)
from trimtab._version import __version__
from trimtab.errors import InputError, ModelError

FORMAT_NAME = "trimtab-factor-model"
FORMAT_VERSION = 1
_FORMATS = ("parquet", "csv")


def _write_table(frame: pd.DataFrame, path: Path, file_format: str) -> None:
    if file_format == "parquet":
        frame.to_parquet(path, index=False)
    else:
        frame.to_csv(path, index=False, float_format="%.17g")


def _read_table(path: Path, file_format: str) -> pd.DataFrame:
    if file_format == "parquet":
        return pd.read_parquet(path)
    return pd.read_csv(path)


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _jsonable(value: Any) -> Any:
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return float(value)
    if isinstance(value, (pd.Timestamp,)):
        return value.isoformat()
    if isinstance(value, (str, int, float, bool)) or value is None:
        return value
    return str(value)


def save_model(model: Any, path: str | Path, *, file_format: str = "parquet", overwrite: bool = False) -> Path:
    """Write ``model`` to the folder ``path`` atomically; see the module docstring for the layout."""
    if file_format not in _FORMATS:
        raise InputError(f"FactorModel.save: file_format must be one of {', '.join(_FORMATS)}, got {file_format!r}")
    target = Path(path)
    if target.exists():
        if not target.is_dir():
            raise InputError(f"FactorModel.save: {target} exists and is not a folder")
        is_model = (target / "manifest.json").exists()
        if any(target.iterdir()) and not is_model:
            raise InputError(f"FactorModel.save: {target} is a non-empty folder that holds no model; refusing to replace it")
        if is_model and not overwrite:
            raise InputError(f"FactorModel.save: {target} already holds a model; pass overwrite=True to replace it")
    created: list[Path] = []  # folders above the target this call made: removed again if it stops
    tmp: Path | None = None
    try:
        ensure_parent_folder(target, created)
        remove_stale_partials(target.parent)
        tmp = make_partial(target)
        files: dict[str, str] = {}

        def put(name: str, frame: pd.DataFrame) -> None:
            fname = f"{name}.{file_format}"
            _write_table(frame, tmp / fname, file_format)
            files[name] = fname

        exp = model.exposures.copy()
        exp.columns = [str(c) for c in exp.columns]
        put("exposures", exp.rename_axis("asset").reset_index())
        fc = model.factor_covariance.copy()
        fc.columns = [str(c) for c in fc.columns]
        put("factor_covariance", fc.rename_axis("factor").reset_index())
        put("specific_variance", model.specific_variance.rename("specific_variance").rename_axis("asset").reset_index())
        report = model.fit_report
        if report is not None:
            put("fit_assets", report.assets.rename_axis("asset").reset_index())
            if report.factor_returns is not None:
                fr = report.factor_returns.copy()
                fr.columns = [str(c) for c in fr.columns]
                put("factor_returns", fr.rename_axis("date").reset_index())
        manifest = {
            "format": FORMAT_NAME,
            "format_version": FORMAT_VERSION,
            "trimtab_version": __version__,
            "n_assets": model.n_assets,
            "n_factors": model.n_factors,
            "periods_per_year": model.periods_per_year,
            "factor_groups": _jsonable(model.factor_groups),
            "provenance": _jsonable(dict(model.provenance)),
            "fit_method": report.method if report is not None else None,
            "tables": {name: {"file": fname, "sha256": _sha256(tmp / fname)} for name, fname in files.items()},
        }
        with open(tmp / "manifest.json", "w", encoding="utf-8") as fh:
            json.dump(manifest, fh, indent=2, sort_keys=True)
        if target.exists():
            old = make_partial(target, "old")
            os.replace(target, old / target.name)
            os.replace(tmp, target)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, target)
        COMPLETED.append(target)
    except OSError as err:
        _undo(tmp, created)
        if err.errno is None:
            raise
        raise OSError(err.errno, err.strerror, str(target)) from None
    except BaseException:
        _undo(tmp, created)
        raise
    return target


def _undo(tmp: Path | None, created: list[Path]) -> None:
    if tmp is not None:
        shutil.rmtree(tmp, ignore_errors=True)
    remove_created(created)


def _table_path(folder: Path, manifest_path: Path, name: str, entry: Any) -> Path:
    """The file of table ``name``: a plain file name inside the model folder, nothing else."""
    file = entry.get("file") if isinstance(entry, dict) else None
    if not isinstance(file, str) or not file or file in (".", "..") or "/" in file or "\\" in file or "\0" in file:
        raise InputError(
            f"{manifest_path}: tables.{name}.file must be the name of a file inside the model folder, got {file!r}"
        )
    fpath = folder / file
    if fpath.resolve().parent != folder.resolve():
        raise InputError(f"{manifest_path}: tables.{name}.file {file!r} points outside the model folder")
    return fpath


def load_model(path: str | Path, model_class: Any) -> Any:
    """Read and validate a model folder written by :func:`save_model` into ``model_class``
    (:class:`~trimtab.model.FactorModel`, handed down by :meth:`FactorModel.load`: storage sits below
    the model class and never imports it)."""
    folder = Path(path)
    manifest_path = folder / "manifest.json"
    if not folder.is_dir():
        raise InputError(f"{folder}: no such model folder")
    if not manifest_path.exists():
        raise InputError(f"{folder}: not a trimtab model folder (manifest.json missing)")
    try:
        manifest = json.loads(read_regular_file(manifest_path, "model manifest").decode("utf-8"))
    except UnicodeDecodeError:
        raise InputError(f"{manifest_path}: not UTF-8 text") from None
    except json.JSONDecodeError as err:
        raise InputError(f"{manifest_path}: not valid JSON: {err.msg} at line {err.lineno}") from None
    if not isinstance(manifest, dict):
        raise InputError(f"{manifest_path}: expected a JSON object, got {type(manifest).__name__}")
    if manifest.get("format") != FORMAT_NAME:
        raise InputError(f"{manifest_path}: format must be {FORMAT_NAME!r}, got {manifest.get('format')!r}")
    version = manifest.get("format_version", -1)
    if not isinstance(version, int) or isinstance(version, bool):
        raise InputError(f"{manifest_path}: format_version must be a whole number, got {version!r}")
    if version > FORMAT_VERSION:
        raise InputError(
            f"{manifest_path}: format_version {manifest.get('format_version')} is newer than this "
            f"trimtab reads ({FORMAT_VERSION}); upgrade trimtab"
        )
    tables = manifest.get("tables", {})
    if not isinstance(tables, dict):
        raise InputError(f"{manifest_path}: tables must be an object of table name → file")
    frames: dict[str, pd.DataFrame] = {}
    for name in ("exposures", "factor_covariance", "specific_variance", "fit_assets", "factor_returns"):
        if name not in tables:
            if name in ("exposures", "factor_covariance", "specific_variance"):
                raise InputError(f"{manifest_path}: table {name!r} missing from the manifest")
            continue
        fpath = _table_path(folder, manifest_path, name, tables[name])
        if not fpath.exists():
            raise InputError(f"{fpath}: file listed in the manifest is missing")
        check_regular(fpath, fpath.stat().st_mode, "model table", InputError)
        if tables[name].get("sha256") and _sha256(fpath) != tables[name]["sha256"]:
            raise InputError(f"{fpath}: contents do not match the manifest checksum (file changed after saving)")
        file_format = fpath.suffix.lstrip(".")
        try:
            frames[name] = _read_table(fpath, file_format)
        except Exception as err:  # noqa: BLE001 - any reader failure becomes one line naming the file
            raise InputError(f"{fpath}: could not read table: {err}") from None

    def indexed(frame: pd.DataFrame, col: str, fname: str) -> pd.DataFrame:
        if col not in frame.columns:
            raise InputError(f"{folder / tables[fname]['file']}: column {col!r} missing")
        frame = frame.copy()
        frame[col] = frame[col].astype(str)
        return frame.set_index(col).rename_axis(None)

    B = indexed(frames["exposures"], "asset", "exposures")
    F = indexed(frames["factor_covariance"], "factor", "factor_covariance")
    sv = indexed(frames["specific_variance"], "asset", "specific_variance")
    if "specific_variance" not in sv.columns:
        raise InputError(f"{folder / tables['specific_variance']['file']}: column 'specific_variance' missing")
    d = sv["specific_variance"]
    try:
        model = model_class(
            B,
            F,
            d,
            periods_per_year=manifest.get("periods_per_year", 252),
            factor_groups=manifest.get("factor_groups"),
            provenance={**manifest.get("provenance", {}), "loaded_from": folder.name},
        )
    except ModelError as err:
        raise ModelError(f"{folder}: {err}") from None
    if "fit_assets" in frames:
        from trimtab.model._fit_report import FitReport

        fr = frames.get("factor_returns")
        if fr is not None and "date" in fr.columns:
            fr = fr.set_index(pd.to_datetime(fr["date"])).drop(columns="date").rename_axis(None)
        report = FitReport(
            method=str(manifest.get("fit_method") or "unknown"),
            assets=indexed(frames["fit_assets"], "asset", "fit_assets"),
            residuals=pd.DataFrame(),
            factor_returns=fr,
            settings=manifest.get("provenance", {}).get("settings", {}),
        )
        object.__setattr__(model, "fit_report", report)
    return model
