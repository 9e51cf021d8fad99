"""Deriving many cases: one case per task, in a process pool, each result self-contained.

``run_case`` is a top-level function so it can be sent to worker processes; it never raises
for a problem with the case itself but returns the outcome with its exit code and message,
so a batch keeps going past a bad file and reports all problems.
"""

from __future__ import annotations

import importlib
import os
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from .errors import CaseError, ClosedformError
from .outputs import safe_stem
from .workers import DEFAULT_MEMORY, GRACE_SECONDS, Lost, fork_available, format_size, run_tasks


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
    return [path for path, _folder in case_sources(arguments)]


def case_sources(arguments: Sequence[Path]) -> list[tuple[Path, Path]]:
    """Each case file once, with the subfolder its outputs go to: a file given by name
    writes into the output folder itself; a case found under a folder argument writes into
    the same subfolder path below it (cases/a/case.toml -> OUT/a/case.md)."""
    sources: dict[Path, Path] = {}
    for argument in arguments:
        if argument.is_dir():
            # a folder that happens to be called *.toml is not a case
            for path in sorted(p for p in argument.rglob("*.toml") if not p.is_dir()):
                sources.setdefault(path, path.parent.relative_to(argument))
        else:
            sources.setdefault(argument, Path())
    return list(sources.items())


def refuse_clashing_outputs(sources: Sequence[tuple[Path, Path]]) -> None:
    """Two cases whose sheets would land on the same files (same name, same subfolder):
    refuse before deriving, rather than let the later one overwrite the earlier."""
    seen: dict[Path, Path] = {}
    for path, folder in sources:
        target = folder / safe_stem(path)
        if target in seen:
            raise CaseError(f"'{seen[target]}' and '{path}' would write the same sheet files "
                            f"({target}.*); rename one or derive them into separate folders",
                            file="-o")
        seen[target] = path


def run_case(path: str, formats: Sequence[str], time_budget: float | None,
             renderer: Callable | None = None) -> CaseOutcome:
    """Load, derive and render one case; errors become the outcome, not exceptions.

    The whole task (reading, deriving, rendering) runs under one time budget, so neither a
    huge table nor a slow sheet can hold up a batch longer than ``time_budget`` seconds.
    """
    from .budget import time_budget as budget_for
    from .case import display_name, load_case, locate
    from .derivation import derive
    from .render import render_outputs

    shown = display_name(str(path))
    try:
        with budget_for(time_budget, shown) as budget:
            with budget.stage("reading the case file"):
                case = load_case(path)
            derivation = derive(case, time_budget=time_budget)
            with budget.stage("rendering the sheets"):
                stem = safe_stem(path)
                contents = (renderer or render_outputs)(derivation, formats, stem) \
                    if formats else {}
            with budget.stage("writing the JSON result"):
                result = derivation.to_dict()
                message = summary_line(derivation)
        return CaseOutcome(path, 0 if derivation.passed else 1, message, contents, result,
                           derivation.warnings)
    except CaseError as error:
        return CaseOutcome(path, error.exit_code, one_line(locate(error, path).show()))
    except ClosedformError as error:
        return CaseOutcome(path, error.exit_code, one_line(error.show()))
    except RecursionError:
        return CaseOutcome(path, 2, f"{shown}: the input nests too deeply to process")
    except MemoryError:
        return CaseOutcome(path, 1, f"error: {shown}: the derivation ran out of memory "
                                    "(its worker's address-space limit)")
    except Exception as error:  # a defect in closedform itself, reported without a traceback
        return CaseOutcome(path, 1, internal_error(shown, error))


def one_line(text: str, limit: int = 2000) -> str:
    """``text`` on one line: line breaks shown as spaces, shortened past ``limit``."""
    flat = " ".join(text.splitlines())
    return flat if len(flat) <= limit else flat[:limit - 3] + "..."


def internal_error(shown: str, error: BaseException) -> str:
    return one_line(f"{shown}: internal error ({type(error).__name__}: {error}); the case was "
                    "not derived. Please report it with the case file.")


def summary_line(derivation) -> str:
    from .render import summary_figures

    parts = [f"{derivation.case.source}: {derivation.status.upper()}"]
    parts.extend(summary_figures(derivation))
    failed = [c.name for c in derivation.checks if not c.passed]
    if failed:
        parts.append(f"failed checks: {', '.join(failed)}")
    return "; ".join(parts)


def run_cases(paths: Sequence[Path], formats: Sequence[str], *, time_budget: float | None,
              jobs: int | None = None, renderer: Callable | None = None,
              progress: bool | None = None, memory_budget: int | None = DEFAULT_MEMORY,
              on_done: Callable[[int, CaseOutcome], None] | None = None) -> list[CaseOutcome]:
    """Every case, in the given order, using up to ``jobs`` processes (default: all cores).

    Each case runs in a worker process of its own under ``memory_budget`` bytes; a case
    whose worker is lost (ended for memory, killed) gets an outcome naming it, exit 1.
    ``on_done(index, outcome)`` is called as each case finishes, in the parent process.
    """
    arguments = [(str(p), tuple(formats), time_budget, renderer) for p in paths]
    show = sys.stderr.isatty() if progress is None else progress

    def lost(index: int, reason: Lost) -> CaseOutcome:
        return lost_outcome(str(paths[index]), reason, memory_budget)

    return map_cases(run_case, arguments, [p.name for p in paths], jobs=jobs,
                     progress=TerminalProgress(sys.stderr) if show else None,
                     memory_budget=memory_budget, lost=lost, on_done=on_done,
                     time_budget=time_budget,
                     preload=("closedform.derivation", "closedform.render"))


def lost_outcome(path: str, reason: Lost, memory_budget: int | None) -> CaseOutcome:
    from .case import display_name

    shown = display_name(path)
    if reason.memory and memory_budget is not None:
        message = (f"error: {shown}: the derivation ran past the memory budget of "
                   f"{format_size(memory_budget)} (raise it with --memory-budget)")
    else:
        message = f"error: {shown}: the case was not derived: {reason.reason}"
    return CaseOutcome(path, 1, one_line(message))


def map_cases(function: Callable, arguments: Sequence[tuple], names: Sequence[str], *,
              jobs: int | None, progress: Callable[[int, int, str], None] | None = None,
              memory_budget: int | None = None,
              lost: Callable[[int, Lost], object] | None = None,
              on_done: Callable[[int, object], None] | None = None,
              time_budget: float | None = None, preload: Sequence[str] = ()) -> list:
    """``function(*a)`` for each tuple of ``arguments``, results in order.

    With several jobs or a ``memory_budget`` (bytes), each call runs in a worker process of
    its own (``function`` must be a top-level function, its result picklable), up to
    ``jobs`` at once; a call whose worker ends without a result becomes ``lost(index,
    Lost)``, or with no ``lost`` given a ClosedformError naming the case. With one job and
    no memory budget the calls run here, one after the other."""
    jobs = max(1, min(jobs or os.cpu_count() or 1, len(arguments) or 1))
    if progress is not None and arguments:
        progress(0, len(arguments), names[0])
    finished = 0

    def done(index: int, result: object) -> object:
        nonlocal finished
        if isinstance(result, Lost):
            if lost is None:
                raise ClosedformError(f"{names[index]}: the case was not derived: "
                                      f"{result.reason}")
            result = lost(index, result)
        finished += 1
        if on_done is not None:
            on_done(index, result)
        if progress is not None:
            progress(finished, len(arguments), names[index])
        return result

    if not fork_available() or (jobs == 1 and memory_budget is None):
        return [done(i, function(*a)) for i, a in enumerate(arguments)]
    if len(arguments) > 1:    # imported once here, inherited by every forked worker
        for module in (function.__module__, *preload):
            importlib.import_module(module)
    results: list = [None] * len(arguments)

    def collect(index: int, result: object) -> None:
        results[index] = done(index, result)

    hard = time_budget * 1.5 + GRACE_SECONDS if time_budget else None
    run_tasks(function, arguments, jobs=jobs, memory_budget=memory_budget,
              hard_seconds=hard, on_done=collect)
    return results


class TerminalProgress:
    """A one-line progress bar on standard error, redrawn in place."""

    WIDTH = 24

    def __init__(self, stream) -> None:
        self.stream = stream

    def __call__(self, done: int, total: int, name: str) -> None:
        filled = round(self.WIDTH * done / total) if total else self.WIDTH
        bar = "#" * filled + "-" * (self.WIDTH - filled)
        line = f"[{bar}] {done}/{total} {name}"
        self.stream.write("\r" + line[:100].ljust(100))
        if done == total:
            self.stream.write("\n")
        self.stream.flush()


def worst_exit_code(outcomes: Sequence[CaseOutcome]) -> int:
    return max((o.exit_code for o in outcomes), default=0)


def require_cases(paths: Sequence[Path]) -> None:
    if not paths:
        raise CaseError("no case files found (expected .toml files or folders holding them)",
                        file="derive")
