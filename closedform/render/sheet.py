"""The sheet of one case as Markdown or LaTeX, and the check that re-reads its printed
equations."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from ..checks import reread
from ..precision import own_precision
from .context import sheet_context
from .escaping import Math
from .flavours import LATEX, MARKDOWN, Flavour

if TYPE_CHECKING:
    from ..checks.base import Check

PAPER_OPTIONS = {"a4": "a4paper", "letter": "letterpaper"}
LATEX_PACKAGES = ("amsmath", "amssymb", "booktabs", "longtable", "array", "graphicx")


@own_precision
def render_sheet(derivation, flavour: Flavour, *, stem: str | None = None,
                 section: int | None = None, level: int = 1, standalone: bool = True) -> str:
    """The sheet in ``flavour``, its figures named after ``stem``. ``section`` and ``level``
    number and nest it inside an appendix; ``standalone`` wraps it in the flavour's
    document (LaTeX: preamble and paper size) where the flavour has one."""
    if getattr(derivation, "chain", None) is not None:     # several masses: their own sheet
        from ..chain_sheet import render_chain_sheet
        return render_chain_sheet(derivation, flavour, stem=stem, section=section, level=level,
                                  standalone=standalone)
    context = sheet_context(derivation, flavour.name, stem=stem, section=section)
    context.update({"h1": Math("#" * level), "h2": Math("#" * (level + 1)),
                    "label_anchor": f"case-{context['label']}" if section else None})
    body = flavour.render("sheet", context)
    if not standalone or flavour.document is None:
        return body
    return flavour.render(flavour.document, {
        "preamble": Math(latex_preamble()), "body": Math(body), "title": context["title"],
        "status": context["status"], "label": context["label"],
        "paper": Math(PAPER_OPTIONS[context["paper"]])})


def render_markdown(derivation, *, stem: str | None = None, section: int | None = None,
                    level: int = 1) -> str:
    """The sheet as Markdown with $…$ / $$…$$ math; figures are referenced as SVG files
    named after ``stem``. ``section`` and ``level`` number and nest it inside an appendix."""
    return render_sheet(derivation, MARKDOWN, stem=stem, section=section, level=level)


def latex_preamble() -> str:
    """The LaTeX preamble every sheet needs (for a document that \\input's fragments)."""
    return LATEX.render("preamble", {"packages": LATEX_PACKAGES})


def render_latex(derivation, standalone: bool = True, *, stem: str | None = None,
                 section: int | None = None) -> str:
    """The sheet as LaTeX: a complete document, or (``standalone=False``) a fragment that
    starts with \\section and can be \\input into an appendix whose preamble has
    :func:`latex_preamble`. Figures are referenced as PDF files named after ``stem``."""
    return render_sheet(derivation, LATEX, stem=stem, section=section, standalone=standalone)


def printed_equation_check(derivation) -> Check:
    """Every displayed equation of the Markdown sheet read back from the printed text and
    compared with the derivation at many points (see :mod:`closedform.checks.reread`)."""
    from ..checks.base import Check

    name = "printed equations re-read"
    try:
        context = sheet_context(derivation, MARKDOWN.name)
        context.update({"h1": Math("#"), "h2": Math("##"), "label_anchor": None})
        text = MARKDOWN.render("sheet", context)
        blocks = {}
        problems = []
        for record in context["printed"]:
            block = MARKDOWN.equation(record.display)
            blocks[block] = record
            if block not in text:
                problems.append(f"{record.what}: not printed as recorded")
                continue
            problem = reread.compare(record, block)
            if problem:
                problems.append(problem)
        printed = re.findall(r"^\$\$\n.*?\n\$\$$", text, flags=re.S | re.M)
        unrecorded = [b for b in printed if b not in blocks]
        if unrecorded:
            problems.append(f"{len(unrecorded)} printed equation(s) without a record, first: "
                            + " ".join(unrecorded[0].split())[:80])
    except (reread.Unreadable, ValueError, ZeroDivisionError, TypeError) as error:
        return Check(name, False, f"the sheet could not be re-read: {error}")
    numeric = sum(1 for r in context["printed"] if not r.form)
    if problems:
        return Check(name, False, f"{len(problems)} printed line(s) disagree with the "
                     f"derivation; first: {problems[0]}")
    points = sum(max(len(r.points), 1) for r in context["printed"] if not r.form)
    return Check(name, True, f"{numeric} displayed equations read back from the printed "
                 f"text agree with the derivation at {points} points "
                 f"({len(printed) - numeric} forms without numbers)")
