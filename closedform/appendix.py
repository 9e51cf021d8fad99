"""``closedform appendix DIR -o OUTDIR``: every case of a folder in one appendix document.

The appendix opens with its status, a table of contents and a summary table (case,
reference, peak, dynamic load factor, claims confirmed/refuted, status) that lists the
failed cases first; then each case follows as a numbered section, in the sorted order of the
file names, rendered exactly as its own sheet, followed by the verdicts on its [claims] when
it has any (as ``closedform check`` gives them). A refuted claim is a finding about someone
else's numbers, not a failure of the case: it is counted in the summary, and does not change
the exit code.

Unusable case files are all reported, one line each (``FILE:LINE: KEY: message``), and then
nothing is written at all (exit 2): an appendix that silently leaves a case out would be
worse than none, and nothing is ever written half. A case that loads but cannot be derived
appears in the appendix as FAILED with the reason (exit 1), as does a case whose checks fail.

Each case goes through the batch worker (:mod:`closedform.batch`: load, derive, finish,
errors located) with :class:`AppendixSection` as its finisher, whose product, a
:class:`CaseEntry` of plain picklable values, comes back from the case's worker process.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from . import __version__, quantities, render
from .errors import CaseError
from .options import add_budgets, add_formats, add_jobs, add_output

if TYPE_CHECKING:
    from .batch import CaseOutcome, CaseTask, Finished
    from .chain import ChainDerivation
    from .derivation import Derivation

APPENDIX_FORMATS = ("md", "tex", "pdf")
DOCUMENT_NAME = "appendix"
STATUS_TEXT = {"verified": "verified", "failed": "FAILED", "not derived": "FAILED (not derived)"}


@dataclass(frozen=True)
class SummaryCells:
    """The summary-table cells of one case for one flavour (md or tex), already formatted."""

    peak: str | None
    dlf: str | None


@dataclass(frozen=True)
class CaseEntry:
    """One case of the appendix, derived and rendered (plain values only: picklable)."""

    number: int
    file: str                      # the case file's name
    stem: str                      # unique within the appendix: names labels and figures
    title: str
    reference: str
    status: str                    # "verified", "failed" or "not derived"
    problem: str = ""              # why a case was not derived
    bodies: dict[str, str] = field(default_factory=dict)     # flavour name → its section
    summary: dict[str, SummaryCells] = field(default_factory=dict)   # by flavour name
    files: dict[str, bytes] = field(default_factory=dict)
    confirmed: int | None = None   # claims confirmed and refuted (None: the case claims nothing)
    refuted: int | None = None
    claim_bodies: dict[str, str] = field(default_factory=dict)   # flavour name → its verdicts

    @property
    def passed(self) -> bool:
        return self.status == "verified"

    @property
    def markdown(self) -> str:
        return self.bodies.get(render.MARKDOWN.name, "")

    @property
    def latex(self) -> str:
        return self.bodies.get(render.LATEX.name, "")


@dataclass(frozen=True)
class Unusable:
    """A case file that cannot be used, with the one line that says why."""

    file: str
    message: str


def case_files(folder: Path) -> list[Path]:
    """The case files (*.toml) directly in ``folder``, sorted by name."""
    if not folder.is_dir():
        raise CaseError("not a folder (expected a folder of case files)", file=str(folder))
    files = sorted(path for path in folder.glob("*.toml") if path.is_file())
    if not files:
        raise CaseError("no case files (*.toml) in this folder", file=str(folder))
    return files


def unique_stems(files: Sequence[Path]) -> list[str]:
    """A distinct label-safe stem per file (``render.slug``; clashes get -2, -3 …)."""
    seen: set[str] = set()
    stems = []
    for path in files:
        base = render.slug(path.stem)
        stem, count = base, 1
        while stem in seen:
            count += 1
            stem = f"{base}-{count}"
        seen.add(stem)
        stems.append(stem)
    return stems


@dataclass(frozen=True)
class AppendixSection:
    """The finisher of ``appendix`` (see :mod:`closedform.batch`): a derived case rendered
    as section ``number`` of the appendix, with the verdicts on its [claims] if it has any;
    the :class:`CaseEntry` is the product."""

    number: int
    stem: str
    formats: tuple[str, ...]
    prints_sheet = True     # its sheet prints the equations: they are re-read

    def __call__(self, derivation: Derivation | ChainDerivation, path: str) -> Finished:
        from .batch import Finished

        case = derivation.case
        number, stem, formats = self.number, self.stem, self.formats
        flavours = render.flavours_of(formats)     # the texts the formats are written from
        bodies: dict[str, str] = {}
        files: dict[str, bytes] = {}
        for flavour in flavours:
            bodies[flavour.name] = render.render_sheet(derivation, flavour, stem=stem,
                                                       section=number, level=2,
                                                       standalone=False)
            files.update(render.figure_files(derivation, stem, flavour.figure_suffix))
        summary = {name: summary_cells(derivation, name) for name in render.FLAVOURS}
        audited: dict = {}
        if case.claims:
            from .audit import audit, render_claims
            from .claims import locate_claim
            try:
                result = audit(derivation)
            except CaseError as error:
                raise locate_claim(error, path) from None
            audited = {"confirmed": result.confirmed, "refuted": result.refuted,
                       "claim_bodies": {flavour.name: render_claims(
                           result, flavour.name, level=4, numbered="",
                           latex_heading="subsubsection") for flavour in flavours}}
        entry = CaseEntry(number, Path(path).name, stem, case.title, case.reference,
                          derivation.status, bodies=bodies, summary=summary, files=files,
                          **audited)
        return Finished(entry.status, 0 if derivation.passed else 1, product=entry)


def section_task(path: Path, number: int, stem: str, formats: tuple[str, ...],
                 time_budget: float | None = None) -> CaseTask:
    from .batch import CaseTask

    return CaseTask(str(path), time_budget, AppendixSection(number, stem, tuple(formats)))


def entry_of(outcome: CaseOutcome, number: int, stem: str) -> CaseEntry | Unusable:
    """The appendix's view of one case's outcome: an unusable file, a section that says
    why the case was not derived, or the rendered section."""
    name = Path(outcome.path).name
    if outcome.stage == "unusable":
        return Unusable(name, outcome.message)
    if outcome.stage == "not derived":
        # a case whose worker was lost has no title known here: its file name stands in
        return CaseEntry(number, name, stem, outcome.title or name, outcome.reference,
                         "not derived", problem=outcome.problem)
    entry: CaseEntry = outcome.product
    return entry


def prepare_case(path: Path, number: int, stem: str, formats: tuple[str, ...],
                 time_budget: float | None = None) -> CaseEntry | Unusable:
    """Load, derive and render one case for section ``number`` of the appendix, here.

    Returns :class:`Unusable` for a case file that cannot be used (instead of raising, so
    that every such file is reported), a :class:`CaseEntry` otherwise.
    """
    from .batch import run_case

    return entry_of(run_case(section_task(path, number, stem, formats, time_budget)),
                    number, stem)


def summary_cells(derivation: Derivation | ChainDerivation, target: str) -> SummaryCells:
    """Peak (in the case's report unit, with its time) and DLF, as inline math, for the
    flavour called ``target``."""
    units = render.Units(derivation.case)
    results = derivation.numbers
    escape = render.flavour(target).escape
    peak = None
    if results.peak is not None:
        response = derivation.case.system.response_dimension
        value_si, value_shown = units.show(float(results.peak.value), response,
                                           ("response", "displacement", "voltage", "current"))
        time_si, time_shown = units.show(float(results.peak.time), quantities.dimension("time"),
                                         ("time",))
        peak = f"{value_shown or value_si} {escape('at')} {time_shown or time_si}"
    shown = render.number(results.dlf, 4)
    dlf = None if shown is None else render.inline(shown)
    plastic = getattr(derivation, "plastic", None)
    if peak is not None and plastic is not None and plastic.ductility is not None:
        # a yielding spring: the ductility ratio beside the peak it comes from
        peak += escape("; ductility ") + render.inline(
            r"\mu = " + (render.number(plastic.ductility.value, 4) or ""))
    return SummaryCells(peak, dlf)


def build_appendix(folder: Path, formats: Sequence[str], progress: bool | None = False, *,
                   jobs: int | None = 1, time_budget: float | None = None,
                   memory_budget: int | None = None,
                   ) -> tuple[dict[str, str | bytes], list[CaseEntry], list[Unusable]]:
    """Every case in ``folder`` as one appendix: (file name → content, entries, unusable).

    The cases go through the batch worker in up to ``jobs`` processes (each in a worker
    process of its own under ``memory_budget`` bytes, when given); ``progress`` draws the
    progress bar (None: when standard error is a terminal). The contents are empty when any
    case file is unusable. Nothing is written here.
    """
    from .batch import run_cases

    formats = tuple(formats)
    render.require_tools(formats)      # before any work: name a missing tool
    files = case_files(folder)
    stems = unique_stems(files)
    numbered = list(enumerate(zip(files, stems), start=1))
    outcomes = run_cases([section_task(path, number, stem, formats, time_budget)
                          for number, (path, stem) in numbered],
                         jobs=jobs, progress=progress, memory_budget=memory_budget)
    results = [entry_of(outcome, number, stem)
               for outcome, (number, (_path, stem)) in zip(outcomes, numbered)]
    unusable = [r for r in results if isinstance(r, Unusable)]
    entries = [r for r in results if isinstance(r, CaseEntry)]
    if unusable:
        return {}, entries, unusable
    return assemble(entries, folder.name, formats), entries, []


def summary_order(entries: Sequence[CaseEntry]) -> list[CaseEntry]:
    """Failed and underived cases first, each group in section order."""
    return sorted(entries, key=lambda e: (e.passed, e.number))


class AppendixDocument(render.Document):
    """The appendix as a document for the writers of the output formats: its text in a
    flavour from the rendered entries, its figures gathered from theirs."""

    kind = "appendix"

    def __init__(self, entries: Sequence[CaseEntry], folder_name: str) -> None:
        super().__init__(DOCUMENT_NAME)
        self.entries = list(entries)
        self.folder_name = folder_name

    def render_text(self, flavour: render.Flavour) -> str:
        entries = self.entries
        failed = [e for e in entries if not e.passed]
        return flavour.render("appendix", {
            "folder": self.folder_name, "version": __version__, "count": len(entries),
            "failed_count": len(failed),
            "caution": render.CAUTION.replace("This sheet supports", "This appendix supports"),
            "preamble": render.Math(render.latex_preamble()),
            "entries": [_entry_context(e, flavour.name) for e in entries],
            "summary": [_entry_context(e, flavour.name) for e in summary_order(entries)]})

    def render_figures(self, suffix: str) -> dict[str, bytes]:
        return {n: c for e in self.entries for n, c in e.files.items() if n.endswith(f".{suffix}")}


def assemble(entries: Sequence[CaseEntry], folder_name: str,
             formats: Sequence[str]) -> dict[str, str | bytes]:
    """The appendix documents and their figure files from rendered entries."""
    return render.write_files(AppendixDocument(entries, folder_name), list(formats))


def _entry_context(entry: CaseEntry, target: str) -> dict:
    cells = entry.summary.get(target)
    return {
        "number": entry.number, "file": entry.file, "title": entry.title,
        "reference": entry.reference or None, "status": STATUS_TEXT[entry.status],
        "passed": entry.passed, "problem": entry.problem or None,
        "label": entry.stem,
        "peak": render.Math(cells.peak) if cells and cells.peak else None,
        "dlf": render.Math(cells.dlf) if cells and cells.dlf else None,
        "body": render.Math(entry.bodies.get(target, "")),
        "claims": None if entry.confirmed is None else
        f"{entry.confirmed} confirmed, {entry.refuted} refuted",
        "refuted": bool(entry.refuted),
        "claims_body": render.Math(entry.claim_bodies.get(target, "")),
    }


# ----------------------------------------------------------------------------- command line


def register(commands) -> None:
    """Add ``closedform appendix`` to the command line's sub-parsers."""
    parser = commands.add_parser(
        "appendix", help="every case of a folder in one appendix document",
        description="Derive every case file (*.toml) in DIR and write one appendix document "
                    "with a table of contents, a summary table (failed cases first) and a "
                    "numbered section per case. Exit 1 when any case fails its checks, 2 "
                    "(writing nothing) when any case file is unusable.")
    parser.add_argument("folder", type=Path, metavar="DIR", help="folder of case files")
    add_output(parser, required=True, metavar="OUTDIR", help="folder for the appendix files")
    add_formats(parser, default="md,tex",
                help=f"comma-separated formats ({', '.join(APPENDIX_FORMATS)}); default md,tex")
    add_jobs(parser, help="processes to derive the cases with (default: all cores)")
    add_budgets(parser)
    parser.set_defaults(run=run_appendix)


def run_appendix(arguments: argparse.Namespace) -> int:
    from .cli import usable_output_folder, write_atomically

    usable_output_folder(arguments.output)
    contents, entries, unusable = build_appendix(arguments.folder, arguments.formats, None,
                                                 jobs=arguments.jobs,
                                                 time_budget=arguments.time_budget,
                                                 memory_budget=arguments.memory_budget)
    if unusable:
        for problem in unusable:
            print(problem.message, file=sys.stderr)
        print(f"error: {len(unusable)} of {len(unusable) + len(entries)} case files are "
              "unusable; nothing was written", file=sys.stderr)
        return 2
    write_atomically(arguments.output, contents)
    failed = [e for e in entries if not e.passed]
    for entry in failed:
        reason = f": {entry.problem}" if entry.problem else ""
        print(f"{entry.file}: {STATUS_TEXT[entry.status]}{reason}", file=sys.stderr)
    print(f"{len(entries)} cases, {len(failed)} failed; wrote "
          f"{', '.join(sorted(n for n in contents if n.startswith(DOCUMENT_NAME + '.')))} "
          f"in {arguments.output}")
    return 1 if failed else 0


__all__ = ["APPENDIX_FORMATS", "AppendixDocument", "AppendixSection", "CaseEntry", "Unusable",
           "assemble", "build_appendix", "case_files", "entry_of", "prepare_case", "register",
           "run_appendix", "section_task"]
