"""The batch worker: load, derive and finish one case; many cases in worker processes.

Every command that derives case files (``derive``, ``appendix``, ``check``) runs each case
through :func:`run_case`: it loads the file, derives it and hands the derivation to the
command's *finisher* (what the command makes of a derived case: sheet files, an appendix
section, an audit), all under one time budget. It never raises for a problem with the case
itself: the :class:`CaseOutcome` says what happened (``stage``), with its exit code and the
one-line message, an input error raised after loading located at the key's line in the file
like those of loading. :func:`run_cases` runs a list of :class:`CaseTask` in worker
processes of their own under a memory budget (:mod:`closedform.workers`), so a batch keeps
going past a bad file, a lost worker or a slow case, and reports all of them.
"""

from __future__ import annotations

import importlib
import os
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal, Protocol, TextIO, TypeVar, cast

from .errors import CaseError, ClosedformError
from .outputs import safe_stem
from .workers import DEFAULT_MEMORY, GRACE_SECONDS, Lost, fork_available, format_size, run_tasks

if TYPE_CHECKING:
    from .chain import ChainDerivation
    from .derivation import Derivation

R = TypeVar("R")
#: What became of a case: ``done`` (derived and finished; exit 0, or 1 when its checks
#: failed), ``unusable`` (an input error, exit 2), ``not derived`` (the engine, the time or
#: memory budget or the worker stopped it, exit 1).
Stage = Literal["done", "unusable", "not derived"]


@dataclass(frozen=True)
class Finished:
    """What a finisher made of a derived case (plain values: sent back from the worker)."""

    message: str                                # the one line the command prints for it
    exit_code: int = 0
    contents: dict[str, str | bytes] = field(default_factory=dict)    # files to write
    result: dict[str, Any] | None = None        # the JSON result
    product: Any = None                         # anything else the command needs


class Finisher(Protocol):
    """A command's last step for one derived case, run in the worker under the case's time
    budget; a top-level class or function, so that it can be sent to a worker process. A
    CaseError it raises is reported like any other input error of the case. ``prints_sheet``
    False (a JSON result only) leaves out re-reading the printed equations."""

    @property
    def prints_sheet(self) -> bool: ...

    def __call__(self, derivation: Derivation | ChainDerivation, path: str) -> Finished: ...


@dataclass(frozen=True)
class CaseTask:
    """One case for the worker: its file, one time budget for all of it, the finisher."""

    path: str
    time_budget: float | None
    finish: Finisher
    spare_core: bool = False    # fewer cases run at once than there are cores (run_cases sets it)


@dataclass(frozen=True)
class CaseOutcome:
    """What one case produced: exit code 0/1/2, a one-line message, rendered files."""

    path: str
    exit_code: int
    message: str
    contents: dict[str, str | bytes] = field(default_factory=dict)
    result: dict[str, Any] | None = None   # the JSON result (None when the case was unusable)
    warnings: tuple[str, ...] = ()
    stage: Stage = "done"
    problem: str = ""          # why a case is unusable or not derived (no "error:" prefix)
    title: str = ""            # the case's title and reference, once it has loaded
    reference: str = ""
    product: Any = None        # the finisher's own product


@dataclass(frozen=True)
class CaseSource:
    """A case file to derive and the subfolder (of the output folder) its files go to."""

    path: Path
    folder: Path


def case_sources(arguments: Sequence[Path]) -> list[CaseSource]:
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
    return [CaseSource(path, folder) for path, folder in sources.items()]


def refuse_clashing_outputs(sources: Sequence[CaseSource]) -> None:
    """Two cases whose sheets would land on the same files (same name, same subfolder):
    refuse before deriving, rather than let the later one overwrite the earlier."""
    seen: dict[Path, Path] = {}
    for source in sources:
        path, folder = source.path, source.folder
        target = folder / safe_stem(path)
        if target in seen:
            raise CaseError(f"'{seen[target]}' and '{path}' would write the same sheet files "
                            f"({target}.*); rename one or derive them into separate folders",
                            file="-o")
        seen[target] = path


def run_case(task: CaseTask) -> CaseOutcome:
    """Load, derive and finish one case; errors become the outcome, not exceptions.

    The whole task (reading, deriving, finishing) runs under one time budget, so neither a
    huge table nor a slow sheet can hold up a batch longer than ``task.time_budget``
    seconds. An input error raised after loading (by the engine or the finisher) is located
    in the case file like one of loading: FILE:LINE: KEY: message.
    """
    from .budget import time_budget as budget_for
    from .casefile import read_case_file
    from .files import display_name

    path = task.path
    shown = display_name(str(path))
    title = reference = ""
    try:
        with budget_for(task.time_budget, shown) as budget:
            with budget.stage("reading the case file"):
                # an unreadable file or a TOML syntax error is refused before the engine
                # (sympy, pint) is imported
                document = read_case_file(path)
                from .case import load_case
                from .derivation import derive
                case = load_case(document)
            title, reference = case.title, case.reference
            derivation = derive(case, time_budget=task.time_budget,
                                sheet_check=task.finish.prints_sheet,
                                spare_core=task.spare_core)
            with budget.stage("rendering the sheets"):
                finished = task.finish(derivation, path)
        return CaseOutcome(path, finished.exit_code, finished.message, finished.contents,
                           finished.result, derivation.warnings, title=title,
                           reference=reference, product=finished.product)
    except CaseError as error:
        return unusable(path, error, title, reference)
    except ClosedformError as error:
        return CaseOutcome(path, error.exit_code, one_line(error.show()), stage="not derived",
                           problem=one_line(str(error)), title=title, reference=reference)
    except RecursionError:
        return CaseOutcome(path, 2, f"{shown}: the input nests too deeply to process",
                           stage="unusable", problem="the input nests too deeply to process",
                           title=title, reference=reference)
    except MemoryError:
        return not_derived(path, f"error: {shown}: the derivation ran out of memory "
                                 "(its worker's address-space limit)", title, reference)
    except Exception as error:  # a defect in closedform itself, reported without a traceback
        return not_derived(path, internal_error(shown, error), title, reference)


def unusable(path: str, error: CaseError, title: str = "", reference: str = "") -> CaseOutcome:
    """A case refused for its input (exit 2), located in its file: FILE:LINE: KEY: message."""
    from .casefile import locate

    located = locate(error, path)
    return CaseOutcome(path, error.exit_code, one_line(located.show()), stage="unusable",
                       problem=one_line(str(located)), title=title, reference=reference)


def not_derived(path: str, message: str, title: str = "", reference: str = "") -> CaseOutcome:
    """A case the engine or its worker could not finish (exit 1), with the line saying why."""
    problem = message.removeprefix("error: ")
    return CaseOutcome(path, 1, one_line(message), stage="not derived",
                       problem=one_line(problem), title=title, reference=reference)


#: The formats that print the derivation's equations (the others hold numbers or plots).
SHEETS_WITH_EQUATIONS = ("md", "tex", "pdf")


@dataclass(frozen=True)
class SheetFiles:
    """The finisher of ``derive``: the case's sheet files in ``formats`` (none: only the
    JSON result), named after the case file; ``renderer`` replaces ``render_outputs``."""

    formats: tuple[str, ...]
    renderer: Callable[[Derivation | ChainDerivation, Sequence[str], str], dict[str, str | bytes]] | None = None

    @property
    def prints_sheet(self) -> bool:
        """Whether a sheet with equations is written (not only the JSON result, its CSV or
        its plots)."""
        return any(name in SHEETS_WITH_EQUATIONS for name in self.formats)

    def __call__(self, derivation: Derivation | ChainDerivation, path: str) -> Finished:
        contents: dict[str, str | bytes] = {}
        if self.formats:
            from .render import render_outputs

            contents = (self.renderer or render_outputs)(derivation, self.formats,
                                                         safe_stem(path))
        return Finished(summary_line(derivation), 0 if derivation.passed else 1, contents,
                        derivation.to_dict())


def one_line(text: str, limit: int = 2000) -> str:
    """``text`` on one line: line breaks shown as spaces, shortened past ``limit``."""
    flat = " ".join(text.splitlines())
    return flat if len(flat) <= limit else flat[:limit - 3] + "..."


def internal_error(shown: str, error: BaseException) -> str:
    return one_line(f"{shown}: internal error ({type(error).__name__}: {error}); the case was "
                    "not derived. Please report it with the case file.")


def summary_line(derivation: Derivation | ChainDerivation) -> str:
    from .render import summary_figures

    parts = [f"{derivation.case.source}: {derivation.status.upper()}"]
    parts.extend(summary_figures(derivation))
    failed = [c.name for c in derivation.checks if c.outcome == "failed"]
    inconclusive = [c.name for c in derivation.checks if c.outcome == "inconclusive"]
    if failed:
        parts.append(f"failed checks: {', '.join(failed)}")
    if inconclusive:
        parts.append(f"inconclusive checks: {', '.join(inconclusive)}")
    return "; ".join(parts)


def run_cases(tasks: Sequence[CaseTask], *, jobs: int | None = None,
              progress: bool | None = None, memory_budget: int | None = DEFAULT_MEMORY,
              on_done: Callable[[int, CaseOutcome], None] | None = None) -> list[CaseOutcome]:
    """Every task's :func:`run_case`, in the given order, using up to ``jobs`` processes
    (default: all cores).

    Each case runs in a worker process of its own under ``memory_budget`` bytes; a case
    whose worker is lost (ended for memory or time, killed) gets an outcome naming it,
    exit 1. ``on_done(index, outcome)`` is called as each case finishes, in the parent.
    """
    show = sys.stderr.isatty() if progress is None else progress
    # An unreadable case file or a TOML syntax error is refused here, in the parent, with no
    # worker started for it: the same outcome run_case gives, at a fraction of the cost.
    refused: dict[int, CaseOutcome] = {}
    for index, task in enumerate(tasks):
        outcome = refused_unread(task)
        if outcome is not None:
            refused[index] = outcome
            if on_done is not None:
                on_done(index, outcome)
    kept = [i for i in range(len(tasks)) if i not in refused]
    if not kept:
        return [refused[i] for i in range(len(tasks))]
    if spare_core(jobs, len(kept)):
        tasks = [replace(task, spare_core=True) for task in tasks]
    budgets = [tasks[i].time_budget for i in kept]
    longest = None if None in budgets else max(b for b in budgets if b is not None)

    def lost(index: int, reason: Lost) -> CaseOutcome:
        return lost_outcome(tasks[kept[index]].path, reason, memory_budget)

    def done(index: int, outcome: CaseOutcome) -> None:
        if on_done is not None:
            on_done(kept[index], outcome)

    derived = map_cases(run_case, [(tasks[i],) for i in kept],
                        [Path(tasks[i].path).name for i in kept],
                        jobs=jobs, progress=TerminalProgress(sys.stderr) if show else None,
                        memory_budget=memory_budget, lost=lost, on_done=done,
                        time_budget=longest,
                        preload=("closedform.derivation", "closedform.render.writers",
                                 "closedform.render.sheet"))
    outcomes = dict(refused)
    outcomes.update(zip(kept, derived))
    return [outcomes[i] for i in range(len(tasks))]


def spare_core(jobs: int | None, cases: int) -> bool:
    """Whether a process is left over while ``cases`` run, up to ``jobs`` processes at once
    (default: as many as there are cores): then a long history's verification runs in it,
    alongside the case's other checks (:func:`closedform.derivation.derive`). ``--jobs 1``
    keeps a run to one process at a time."""
    processes = jobs or os.cpu_count() or 1
    return min(processes, cases) < processes


def refused_unread(task: CaseTask) -> CaseOutcome | None:
    """The outcome of a task whose case file cannot be read or is not TOML (as
    :func:`run_case` gives it), or None where the file reads (or nests too deeply to parse
    here: run_case words that one)."""
    from .casefile import read_case_file

    try:
        read_case_file(task.path)
    except CaseError as error:
        return unusable(task.path, error)
    except RecursionError:
        pass
    return None


def lost_outcome(path: str, reason: Lost, memory_budget: int | None) -> CaseOutcome:
    from .case import display_name

    shown = display_name(path)
    if reason.memory and memory_budget is not None:
        return not_derived(path, f"error: {shown}: the derivation ran past the memory budget "
                                 f"of {format_size(memory_budget)} (raise it with "
                                 "--memory-budget)")
    return not_derived(path, f"error: {shown}: the case was not derived: {reason.reason}")


def map_cases(function: Callable[..., R], arguments: Sequence[tuple], names: Sequence[str], *,
              jobs: int | None, progress: Callable[[int, int, str], None] | None = None,
              memory_budget: int | None = None,
              lost: Callable[[int, Lost], R] | None = None,
              on_done: Callable[[int, R], None] | None = None,
              time_budget: float | None = None, preload: Sequence[str] = ()) -> list[R]:
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

    def done(index: int, result: R | Lost) -> R:
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
    results: list[R | None] = [None] * len(arguments)

    def collect(index: int, result: R | Lost) -> None:
        results[index] = done(index, result)

    hard = time_budget * 1.5 + GRACE_SECONDS if time_budget else None
    run_tasks(function, arguments, jobs=jobs, memory_budget=memory_budget,
              hard_seconds=hard, on_done=collect)
    return cast("list[R]", results)      # run_tasks has given every index its result


class TerminalProgress:
    """A one-line progress bar on standard error, redrawn in place."""

    WIDTH = 24

    def __init__(self, stream: TextIO) -> None:
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
