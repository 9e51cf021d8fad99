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

Deriving one case and rendering its pieces is the top-level function :func:`prepare_case`,
whose arguments and result are plain picklable values, so that the cases can be spread
over a process pool.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

from . import __version__, quantities, render
from .errors import CaseError, DerivationError

APPENDIX_FORMATS = ("md", "tex", "pdf")
DOCUMENT_NAME = "appendix"
STATUS_TEXT = {"verified": "verified", "failed": "FAILED", "not derived": "FAILED (not derived)"}


@dataclass(frozen=True)
class SummaryCells:
    """The summary-table cells of one case for one target (md or tex), already formatted."""

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
    markdown: str = ""
    latex: str = ""
    summary: dict[str, SummaryCells] = field(default_factory=dict)
    files: dict[str, bytes] = field(default_factory=dict)
    confirmed: int | None = None   # claims confirmed and refuted (None: the case claims nothing)
    refuted: int | None = None
    claims_markdown: str = ""
    claims_latex: str = ""

    @property
    def passed(self) -> bool:
        return self.status == "verified"


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


def prepare_case(path: Path, number: int, stem: str, formats: tuple[str, ...],
                 time_budget: float | None = None) -> CaseEntry | Unusable:
    """Load, derive and render one case for section ``number`` of the appendix.

    Returns :class:`Unusable` for a case file that cannot be used (instead of raising, so
    that every such file is reported), a :class:`CaseEntry` otherwise.
    """
    from .case import load_case
    from .derivation import derive

    try:
        case = load_case(path)
    except CaseError as error:
        return Unusable(path.name, error.show())
    try:
        derivation = derive(case, time_budget=time_budget)
    except CaseError as error:
        return Unusable(path.name, error.show())
    except DerivationError as error:
        return CaseEntry(number, path.name, stem, case.title, case.reference, "not derived",
                         problem=str(error))
    markdown = latex = ""
    files: dict[str, bytes] = {}
    if "md" in formats:
        markdown = render.render_markdown(derivation, stem=stem, section=number, level=2)
        files.update(render.figure_files(derivation, stem, "svg"))
    if "tex" in formats or "pdf" in formats:
        latex = render.render_latex(derivation, standalone=False, stem=stem, section=number)
        files.update(render.figure_files(derivation, stem, "pdf"))
    summary = {target: summary_cells(derivation, target) for target in ("md", "tex")}
    audited = {}
    if case.claims:
        from .audit import audit, render_claims
        from .claims import locate_claim
        try:
            result = audit(derivation)
        except CaseError as error:
            return Unusable(path.name, locate_claim(error, path).show())
        audited = {"confirmed": result.confirmed, "refuted": result.refuted}
        if "md" in formats:
            audited["claims_markdown"] = render_claims(result, "md", level=4, numbered="")
        if "tex" in formats or "pdf" in formats:
            audited["claims_latex"] = render_claims(result, "tex", numbered="",
                                                     latex_heading="subsubsection")
    return CaseEntry(number, path.name, stem, case.title, case.reference, derivation.status,
                     markdown=markdown, latex=latex, summary=summary, files=files, **audited)


def summary_cells(derivation, target: str) -> SummaryCells:
    """Peak (in the case's report unit, with its time) and DLF, as inline math."""
    units = render.Units(derivation.case)
    results = derivation.numbers
    escape = render.latex_escape if target == "tex" else render.markdown_escape
    peak = None
    if results.peak is not None:
        response = derivation.case.system.response_dimension
        value_si, value_shown = units.show(float(results.peak.value), response,
                                           ("response", "displacement", "voltage", "current"))
        time_si, time_shown = units.show(float(results.peak.time), quantities.dimension("time"),
                                         ("time",))
        peak = f"{value_shown or value_si} {escape('at')} {time_shown or time_si}"
    dlf = render.inline(render.number(results.dlf, 4)) if results.dlf is not None else None
    plastic = getattr(derivation, "plastic", None)
    if peak is not None and plastic is not None and plastic.ductility is not None:
        # a yielding spring: the ductility ratio beside the peak it comes from
        peak += escape("; ductility ") + render.inline(
            r"\mu = " + render.number(plastic.ductility.value, 4))
    return SummaryCells(peak, dlf)


def build_appendix(folder: Path, formats: Sequence[str],
                   progress: Callable[[int, int, str], None] | None = None, *,
                   jobs: int | None = 1, time_budget: float | None = None,
                   ) -> tuple[dict[str, str | bytes], list[CaseEntry], list[Unusable]]:
    """Every case in ``folder`` as one appendix: (file name → content, entries, unusable).

    The cases are derived in up to ``jobs`` processes. The contents are empty when any case
    file is unusable. Nothing is written here.
    """
    from .batch import map_cases

    formats = tuple(formats)
    if "pdf" in formats:
        render.require_latex()
    files = case_files(folder)
    stems = unique_stems(files)
    arguments = [(path, number, stem, formats, time_budget)
                 for number, (path, stem) in enumerate(zip(files, stems), start=1)]
    results = map_cases(prepare_case, arguments, [p.name for p in files], jobs=jobs,
                        progress=progress)
    unusable = [r for r in results if isinstance(r, Unusable)]
    entries = [r for r in results if isinstance(r, CaseEntry)]
    if unusable:
        return {}, entries, unusable
    return assemble(entries, folder.name, formats), entries, []


def summary_order(entries: Sequence[CaseEntry]) -> list[CaseEntry]:
    """Failed and underived cases first, each group in section order."""
    return sorted(entries, key=lambda e: (e.passed, e.number))


def assemble(entries: Sequence[CaseEntry], folder_name: str,
             formats: Sequence[str]) -> dict[str, str | bytes]:
    """The appendix documents and their figure files from rendered entries."""
    contents: dict[str, str | bytes] = {}
    figures_svg = {n: c for e in entries for n, c in e.files.items() if n.endswith(".svg")}
    figures_pdf = {n: c for e in entries for n, c in e.files.items() if n.endswith(".pdf")}
    failed = [e for e in entries if not e.passed]
    context = {"folder": folder_name, "version": __version__, "count": len(entries),
               "failed_count": len(failed),
               "caution": render.CAUTION.replace("This sheet supports", "This appendix supports")}
    if "md" in formats:
        environment = render.make_environment("md")
        contents[f"{DOCUMENT_NAME}.md"] = environment.get_template("appendix.md.j2").render(
            context | {"entries": [_entry_context(e, "md") for e in entries],
                       "summary": [_entry_context(e, "md") for e in summary_order(entries)]})
        contents.update(figures_svg)
    if "tex" in formats or "pdf" in formats:
        environment = render.make_environment("tex")
        tex = environment.get_template("appendix.tex.j2").render(
            context | {"preamble": render.Math(render.latex_preamble()),
                       "entries": [_entry_context(e, "tex") for e in entries],
                       "summary": [_entry_context(e, "tex") for e in summary_order(entries)]})
        if "tex" in formats:
            contents[f"{DOCUMENT_NAME}.tex"] = tex
            contents.update(figures_pdf)
        if "pdf" in formats:
            contents[f"{DOCUMENT_NAME}.pdf"] = render.compile_pdf(tex, figures_pdf,
                                                                  name=DOCUMENT_NAME)
    return contents


def _entry_context(entry: CaseEntry, target: str) -> dict:
    cells = entry.summary.get(target)
    return {
        "number": entry.number, "file": entry.file, "title": entry.title,
        "reference": entry.reference or None, "status": STATUS_TEXT[entry.status],
        "passed": entry.passed, "problem": entry.problem or None,
        "label": entry.stem,
        "peak": render.Math(cells.peak) if cells and cells.peak else None,
        "dlf": render.Math(cells.dlf) if cells and cells.dlf else None,
        "body": render.Math(entry.markdown if target == "md" else entry.latex),
        "claims": None if entry.confirmed is None else
        f"{entry.confirmed} confirmed, {entry.refuted} refuted",
        "refuted": bool(entry.refuted),
        "claims_body": render.Math(entry.claims_markdown if target == "md" else entry.claims_latex),
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
    parser.add_argument("-o", "--output", type=Path, required=True, metavar="OUTDIR",
                        help="folder for the appendix files")
    parser.add_argument("--format", default="md,tex",
                        help=f"comma-separated formats ({', '.join(APPENDIX_FORMATS)}); "
                             "default md,tex")
    parser.add_argument("--jobs", type=int, default=None,
                        help="processes to derive the cases with (default: all cores)")
    parser.add_argument("--time-budget", type=float, default=60.0, metavar="SECONDS",
                        help="stop a case whose derivation runs longer (default 60)")
    parser.set_defaults(run=run_appendix)


def run_appendix(arguments: argparse.Namespace) -> int:
    from .batch import TerminalProgress
    from .cli import parse_formats, usable_output_folder, write_atomically

    formats = parse_formats(arguments.format, APPENDIX_FORMATS, "appendix format")
    usable_output_folder(arguments.output)
    progress = TerminalProgress(sys.stderr) if sys.stderr.isatty() else None
    contents, entries, unusable = build_appendix(arguments.folder, formats, progress,
                                                 jobs=arguments.jobs,
                                                 time_budget=arguments.time_budget)
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


__all__ = ["APPENDIX_FORMATS", "CaseEntry", "Unusable", "assemble", "build_appendix",
           "case_files", "prepare_case", "register", "run_appendix"]
