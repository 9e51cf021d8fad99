"""Deriving many cases: one case per task, in a process pool, each result self-contained.

``run_case`` is a top-level function so it can be sent to worker processes; it never raises
for a problem with the case itself but returns the outcome with its exit code and message,
so a batch keeps going past a bad file and reports all problems.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

from .errors import CaseError, ClosedformError


@dataclass(frozen=True)
class CaseOutcome:
    """What one case produced: exit code 0/1/2, a one-line message, rendered files."""

    path: str
    exit_code: int
    message: str
    contents: dict[str, str | bytes] = field(default_factory=dict)
    result: dict | None = None        # the JSON result (None when the case was unusable)
    warnings: tuple[str, ...] = ()


def case_paths(arguments: Sequence[Path]) -> list[Path]:
    """Files as given, and every *.toml under a folder (sorted), in order, once each."""
    paths: list[Path] = []
    for argument in arguments:
        if argument.is_dir():
            paths.extend(sorted(argument.rglob("*.toml")))
        else:
            paths.append(argument)
    unique: list[Path] = []
    for path in paths:
        if path not in unique:
            unique.append(path)
    return unique


def run_case(path: str, formats: Sequence[str], time_budget: float | None,
             renderer: Callable | None = None) -> CaseOutcome:
    """Load, derive and render one case; errors become the outcome, not exceptions."""
    from .case import load_case
    from .derivation import derive
    from .render import render_outputs

    try:
        case = load_case(path)
        derivation = derive(case, time_budget=time_budget)
        stem = Path(path).stem or "case"
        contents = (renderer or render_outputs)(derivation, formats, stem) if formats else {}
        message = summary_line(derivation)
        return CaseOutcome(path, 0 if derivation.passed else 1, message, contents,
                           derivation.to_dict(), derivation.warnings)
    except ClosedformError as error:
        return CaseOutcome(path, error.exit_code, error.show())
    except RecursionError:
        return CaseOutcome(path, 2, f"{path}: the input nests too deeply to process")
    except Exception as error:  # a defect in closedform itself, reported without a traceback
        return CaseOutcome(path, 1, f"{path}: internal error ({type(error).__name__}: {error}); "
                                    "the case was not derived. Please report it with the case file.")


def summary_line(derivation) -> str:
    results = derivation.results
    parts = [f"{derivation.case.source}: {derivation.status.upper()}"]
    if results.peak is not None:
        parts.append(f"peak {results.peak.value:.6g} at t = {results.peak.time:.6g} s")
    if results.dlf is not None:
        parts.append(f"DLF {results.dlf:.4g}")
    failed = [c.name for c in derivation.checks if not c.passed]
    if failed:
        parts.append(f"failed checks: {', '.join(failed)}")
    return "; ".join(parts)


def run_cases(paths: Sequence[Path], formats: Sequence[str], *, time_budget: float | None,
              jobs: int | None = None, renderer: Callable | None = None,
              progress: bool | None = None) -> list[CaseOutcome]:
    """Every case, in the given order, using up to ``jobs`` processes (default: all cores)."""
    jobs = max(1, min(jobs or os.cpu_count() or 1, len(paths)))
    show = sys.stderr.isatty() if progress is None else progress
    outcomes: list[CaseOutcome] = []
    arguments = [(str(p), tuple(formats), time_budget, renderer) for p in paths]
    if jobs == 1:
        iterator = (run_case(*a) for a in arguments)
        for i, outcome in enumerate(iterator, start=1):
            outcomes.append(outcome)
            _progress(show, i, len(paths))
        return outcomes
    with ProcessPoolExecutor(max_workers=jobs) as pool:
        futures = [pool.submit(run_case, *a) for a in arguments]
        for i, future in enumerate(futures, start=1):
            outcomes.append(future.result())
            _progress(show, i, len(paths))
    return outcomes


def _progress(show: bool, done: int, total: int) -> None:
    if not show:
        return
    width = 30
    filled = width * done // total
    sys.stderr.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {done}/{total} cases")
    if done == total:
        sys.stderr.write("\n")
    sys.stderr.flush()


def worst_exit_code(outcomes: Sequence[CaseOutcome]) -> int:
    return max((o.exit_code for o in outcomes), default=0)


def require_cases(paths: Sequence[Path]) -> None:
    if not paths:
        raise CaseError("no case files found (expected .toml files or folders holding them)",
                        file="derive")
