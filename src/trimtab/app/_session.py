"""One scenario held open for what-if runs: loaded once, built once, re-solved one change at a time.

:class:`Explorer` is the engine behind ``trimtab explore`` and its HTTP API; it knows nothing of
the web. Every solve starts from the scenario as built, with the requested values (so a variant's
answer depends on its settings only), through :meth:`RebalanceProblem.update`, which shares the
interior-point warm start across variants. One solve runs at a time (a lock); others wait.
"""

from __future__ import annotations

import hashlib
import os
import re
import tempfile
import threading
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any

import yaml

from trimtab.app._limits import Limit, apply, changed, check_changes, saved_changes, scenario_limits, update_arguments
from trimtab._paths import file_mode
from trimtab.construct._orders import NOT_FIT_STATUS
from trimtab.errors import InfeasibleError, InputError, SolverError

#: A saved scenario's name: letters, digits, ``-`` and ``_`` (it becomes the file name).
NAME_PATTERN = re.compile(r"[A-Za-z0-9][A-Za-z0-9_-]{0,63}")


@dataclass(frozen=True, eq=False)
class Variant:
    """One solved (or unsolved) setting of the limits.

    Attributes
    ----------
    changes : dict
        Key path → value, for the limits that differ from the scenario.
    result : RebalanceResult or None
    error : InfeasibleError or SolverError or None
    seconds : dict
        ``solve`` (update and solve, verification included) in seconds.
    """

    changes: dict[str, float | None]
    result: Any = None
    error: InfeasibleError | SolverError | None = None
    seconds: dict[str, float] = field(default_factory=dict)

    @property
    def status(self) -> str:
        """``solved``; ``orders not fit to send`` when the optimizer solved but the book rounded to
        whole lots breaches a limit beyond its rounding tolerance; ``infeasible``; ``solver failure``."""
        if self.error is None:
            return NOT_FIT_STATUS if getattr(self.result, "status", None) == NOT_FIT_STATUS else "solved"
        return "infeasible" if isinstance(self.error, InfeasibleError) else "solver failure"

    @property
    def subject(self) -> Any:
        """What the report writers take: the result, or the error with its relaxation."""
        return self.result if self.error is None else self.error


class Explorer:
    """A scenario's inputs and built problem, re-solved with new limits on request.

    Parameters
    ----------
    inputs : ScenarioInputs
        The scenario's files, read and aligned (:func:`trimtab.scenario.load_inputs`).
    problem : RebalanceProblem, optional
        The built problem (default: built from ``inputs``).
    """

    def __init__(self, inputs: Any, problem: Any = None) -> None:
        from trimtab.scenario._run import build

        self.inputs = inputs
        self.scenario = inputs.scenario
        self.problem = problem if problem is not None else build(inputs)
        self.mapping = self.scenario.rebalance_mapping()
        factors = [str(f) for f in inputs.model.factors]
        self.limits: dict[str, Limit] = {
            limit.key: limit for limit in scenario_limits(self.mapping, factors, has_benchmark=inputs.benchmark is not None)
        }
        self.lock = threading.Lock()

    @classmethod
    def open(cls, path: str | Path) -> Explorer:
        """Load a scenario file and its inputs and build its problem."""
        from trimtab.scenario import load_inputs, load_scenario

        return cls(load_inputs(load_scenario(path)))

    # ------------------------------------------------------------------ settings
    def settings(self) -> dict[str, Any]:
        """The scenario's name, file, model size and every limit with its key path and value."""
        model = self.inputs.model
        return {
            "scenario": self.scenario.name,
            "file": self.scenario.path.name,
            "description": self.scenario.spec.description or "",
            "objective": dict(self.mapping["objective"]),
            "model": {"n_assets": model.n_assets, "n_factors": model.n_factors},
            "limits": [limit.as_dict() for limit in self.limits.values()],
            "trail_key": self.trail_key(),
        }

    def trail_key(self) -> str:
        """Names the page's trail in the browser's sessionStorage: a digest of the scenario file's
        location and text and of what was loaded (the merged scenario, the model, the book, the
        benchmark, alpha and attributes), so another scenario, this one edited, a base it extends
        edited, a refitted model or new data start a fresh trail."""
        path = self.scenario.path.resolve()
        try:
            text = path.read_bytes()
        except OSError:  # the file went away while exploring: its location alone still names the trail
            text = b""
        return hashlib.sha256(str(path).encode() + b"\0" + text + b"\0" + self._loaded_digest).hexdigest()[:24]

    @cached_property
    def _loaded_digest(self) -> bytes:
        """A digest of the inputs as loaded (computed once: they do not change while exploring)."""
        import pandas as pd

        model = self.inputs.model
        digest = hashlib.sha256(repr(sorted(self.mapping.items(), key=str)).encode())
        for part in (model.exposures, model.factor_covariance, model.specific_variance, self.inputs.holdings,
                     self.inputs.benchmark, self.inputs.alpha, self.inputs.attributes):
            digest.update(b"\0" if part is None else pd.util.hash_pandas_object(part, index=True).to_numpy().tobytes())
        return digest.digest()

    def changes_of(self, limits: Mapping[str, Any], risk_aversion: Any = None) -> dict[str, float | None]:
        """A request's values, checked, as the changes from the scenario."""
        request = dict(limits)
        if risk_aversion is not None:
            request["risk_aversion"] = risk_aversion
        return changed(self.limits, check_changes(self.limits, request))

    # ------------------------------------------------------------------ solving
    def solve(self, changes: Mapping[str, float | None]) -> Variant:
        """Solve the scenario with ``changes`` (from :meth:`changes_of`); one solve at a time.

        An infeasible setting or a solver failure is returned in the variant, not raised.

        Raises
        ------
        ScenarioError
            A value the scenario's rules reject (a negative cap, lower above upper, …).
        """
        from trimtab.scenario._run import with_run_context

        with self.lock:
            started = time.perf_counter()
            problem = self._problem_for(changes)
            try:
                result = with_run_context(self.inputs, problem.solve())
                variant = Variant(dict(changes), result=result)
            except (InfeasibleError, SolverError) as err:
                variant = Variant(dict(changes), error=err)
            variant.seconds["solve"] = time.perf_counter() - started
            return variant

    def _problem_for(self, changes: Mapping[str, float | None]) -> Any:
        if not changes:
            return self.problem
        arguments = update_arguments(self.mapping, changes, self.problem.spec.mapping["constraints"])
        if arguments is not None:
            return self.problem.update(**arguments)
        # a bound the scenario does not have: a new problem on the same aligned data and warm start
        from trimtab.construct import RebalanceProblem, validate_scenario

        base = self.problem
        spec = validate_scenario(apply(self.mapping, changes), source=str(self.scenario.path))
        return RebalanceProblem(spec, base.data, base.solvers, base.unknown_assets, base.warm)

    # ------------------------------------------------------------------ saving
    def save(self, name: str, changes: Mapping[str, float | None], folder: Path | None = None) -> Path:
        """Write ``<name>.yaml`` beside the scenario: ``extends:`` it, with only the changed limits.

        The file is written under a temporary name and linked to its final name, which fails when a
        file of that name exists: nothing is ever overwritten.

        Raises
        ------
        InputError
            A bad name, or a file of that name already there.
        """
        if not isinstance(name, str) or not NAME_PATTERN.fullmatch(name):
            raise InputError(f"name: use letters, digits, - and _ (at most 64, starting with a letter or digit), got {name!r}")
        target_folder = Path(folder) if folder is not None else self.scenario.path.resolve().parent
        target = target_folder / f"{name}.yaml"
        if target.exists():
            raise InputError(f"name: {target.name} already exists beside the scenario; choose another name")
        new = apply(self.mapping, changes)
        diff = saved_changes(self.mapping, new)
        base = self.scenario.path.resolve()
        body: dict[str, Any] = {
            "extends": os.path.relpath(base, target_folder.resolve()),
            "name": name,
            "description": f"{self.scenario.name}, with {_changes_text(changes) or 'no change'} (saved by trimtab explore)",
        }
        body.update(diff)
        text = (
            f"# Saved by trimtab explore from {base.name}: only the limits that differ from it.\n"
            + yaml.safe_dump(body, sort_keys=False, allow_unicode=True, default_flow_style=None, width=100)
        )
        fd, tmp_name = tempfile.mkstemp(prefix=f".{name}.", suffix=".tmp", dir=target_folder)
        tmp = Path(tmp_name)
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as handle:
                handle.write(text)
            os.chmod(tmp, file_mode())  # as any new file under the user's umask
            os.link(tmp, target)  # fails when the name exists: never overwrites
        except FileExistsError:
            raise InputError(f"name: {target.name} already exists beside the scenario; choose another name") from None
        finally:
            tmp.unlink(missing_ok=True)
        return target


def _changes_text(changes: Mapping[str, float | None]) -> str:
    return ", ".join(f"{k} {'open' if v is None else f'{v:.6g}'}" for k, v in changes.items())
