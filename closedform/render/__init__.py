"""Rendering: derivation sheets in Markdown, LaTeX and PDF, with plots, JSON and CSV.

The sheet is rendered from the Derivation's data and trace; nothing is derived here.
Expressions are only typeset (``sympy.latex``, with long sums broken into lines), numbers
formatted, and values converted to the units the case asks for under ``[report] units``.

The package, one module per concern:

- :mod:`.escaping` — :class:`Math` (trusted LaTeX) and the escaping of plain text;
- :mod:`.flavours` — one :class:`Flavour` per target (``MARKDOWN``, ``LATEX``): escaping,
  Jinja2 delimiters, displayed equations, figure suffix, templates;
- :mod:`.typesetting`, :mod:`.units` — numbers, units and expressions as LaTeX;
- :mod:`.context` — :func:`sheet_context` from the section builders :mod:`.status`,
  :mod:`.problem`, :mod:`.loads`, :mod:`.transform`, :mod:`.fractions`, :mod:`.pieces`,
  :mod:`.results`, :mod:`.figures`; :mod:`.recorder` registers every displayed equation;
- :mod:`.sheet` — the Markdown and LaTeX sheet, and the printed-equations check;
- :mod:`.documents`, :mod:`.formats`, :mod:`.writers` — documents, the writers of the output
  formats and their registry, shared by ``derive``, ``appendix`` and ``check``;
- :mod:`.datafiles` (CSV, coefficient file), :mod:`.pdf` (pdflatex), :mod:`.console`.

Sheets are reproducible byte for byte: no dates, no absolute paths (the case file is shown
by its name only), fixed number formats and plot settings.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

# The names below are imported on first use (PEP 562), so that a run that prints no sheet
# (``derive --json -``) does not load the templates, Jinja2 and the section builders.
if TYPE_CHECKING:
    from .console import plain_number, summary_figures
    from .context import Sheet, sheet_context
    from .datafiles import CSV_POINTS, render_coefficients, render_csv
    from .documents import Document, SheetDocument, Writer, sheet_document
    from .escaping import Math, latex_escape, markdown_escape
    from .figures import figure_files
    from .flavours import FLAVOURS, LATEX, MARKDOWN, Flavour, flavour, make_environment
    from .layout import (
                         EXCERPT_HEAD,
                         EXCERPT_LIMIT,
                         EXCERPT_TAIL,
                         coefficient_file_name,
                         excerpt,
                         figure_name,
                         is_long_history,
                         slug,
    )
    from .loads import LOAD_VALUE_NAMES
    from .pdf import compile_pdf, latex_command, require_latex
    from .problem import CAUTION, COMMON_ASSUMPTIONS
    from .recorder import EquationRecorder
    from .sheet import (
                         LATEX_PACKAGES,
                         PAPER_OPTIONS,
                         latex_preamble,
                         printed_equation_check,
                         render_latex,
                         render_markdown,
                         render_sheet,
    )
    from .typesetting import (
                         DISPLAY_DIGITS,
                         LINE_WIDTH,
                         REPORT_DIGITS,
                         SHORT_DIGITS,
                         Display,
                         NumberStyle,
                         available_width,
                         decimal_float,
                         display,
                         grouped_terms,
                         inline,
                         is_short,
                         join_lines,
                         number,
                         ordered_terms,
                         polynomial_rows,
                         shown_digits,
                         typeset,
                         unit_latex,
                         unit_text,
                         visible_width,
                         with_unit,
    )
    from .units import RESPONSE_PREFER, DisplayUnit, Units
    from .writers import (
                         FORMATS,
                         WRITERS,
                         flavours_of,
                         register_writer,
                         render_outputs,
                         require_tools,
                         write_files,
                         writer_for,
                         writers_for,
    )

_HOME = {
    "CAUTION": "problem",
    "COMMON_ASSUMPTIONS": "problem",
    "CSV_POINTS": "datafiles",
    "DISPLAY_DIGITS": "typesetting",
    "Display": "typesetting",
    "DisplayUnit": "units",
    "Document": "documents",
    "EXCERPT_HEAD": "layout",
    "EXCERPT_LIMIT": "layout",
    "EXCERPT_TAIL": "layout",
    "EquationRecorder": "recorder",
    "FLAVOURS": "flavours",
    "FORMATS": "writers",
    "Flavour": "flavours",
    "LATEX": "flavours",
    "LATEX_PACKAGES": "sheet",
    "LINE_WIDTH": "typesetting",
    "LOAD_VALUE_NAMES": "loads",
    "MARKDOWN": "flavours",
    "Math": "escaping",
    "NumberStyle": "typesetting",
    "PAPER_OPTIONS": "sheet",
    "REPORT_DIGITS": "typesetting",
    "RESPONSE_PREFER": "units",
    "SHORT_DIGITS": "typesetting",
    "Sheet": "context",
    "SheetDocument": "documents",
    "Units": "units",
    "WRITERS": "writers",
    "Writer": "documents",
    "available_width": "typesetting",
    "coefficient_file_name": "layout",
    "compile_pdf": "pdf",
    "decimal_float": "typesetting",
    "display": "typesetting",
    "excerpt": "layout",
    "figure_files": "figures",
    "figure_name": "layout",
    "flavour": "flavours",
    "flavours_of": "writers",
    "grouped_terms": "typesetting",
    "inline": "typesetting",
    "is_long_history": "layout",
    "is_short": "typesetting",
    "join_lines": "typesetting",
    "latex_command": "pdf",
    "latex_escape": "escaping",
    "latex_preamble": "sheet",
    "make_environment": "flavours",
    "markdown_escape": "escaping",
    "number": "typesetting",
    "ordered_terms": "typesetting",
    "plain_number": "console",
    "polynomial_rows": "typesetting",
    "printed_equation_check": "sheet",
    "register_writer": "writers",
    "render_coefficients": "datafiles",
    "render_csv": "datafiles",
    "render_latex": "sheet",
    "render_markdown": "sheet",
    "render_outputs": "writers",
    "render_sheet": "sheet",
    "require_latex": "pdf",
    "require_tools": "writers",
    "sheet_context": "context",
    "sheet_document": "documents",
    "shown_digits": "typesetting",
    "slug": "layout",
    "summary_figures": "console",
    "typeset": "typesetting",
    "unit_latex": "typesetting",
    "unit_text": "typesetting",
    "visible_width": "typesetting",
    "with_unit": "typesetting",
    "write_files": "writers",
    "writer_for": "writers",
    "writers_for": "writers",
}


def __getattr__(name: str) -> Any:
    home = _HOME.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{home}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_HOME))


__all__ = [
    "CAUTION", "COMMON_ASSUMPTIONS", "CSV_POINTS", "DISPLAY_DIGITS",
    "EXCERPT_HEAD", "EXCERPT_LIMIT", "EXCERPT_TAIL", "FLAVOURS", "FORMATS", "LATEX", "LOAD_VALUE_NAMES",
    "LATEX_PACKAGES", "LINE_WIDTH", "MARKDOWN", "PAPER_OPTIONS", "REPORT_DIGITS",
    "RESPONSE_PREFER", "SHORT_DIGITS", "WRITERS", "Display", "DisplayUnit", "Document",
    "EquationRecorder", "Flavour", "Math", "NumberStyle", "Sheet", "SheetDocument", "Units",
    "Writer", "available_width", "coefficient_file_name", "compile_pdf", "decimal_float",
    "display", "excerpt", "figure_files", "figure_name", "flavour", "flavours_of",
    "grouped_terms", "inline", "is_long_history", "is_short", "join_lines", "latex_command",
    "latex_escape", "latex_preamble", "make_environment", "markdown_escape", "number",
    "ordered_terms", "plain_number", "polynomial_rows", "printed_equation_check",
    "register_writer", "render_coefficients", "render_csv", "render_latex", "render_markdown",
    "render_outputs", "render_sheet", "require_latex", "require_tools", "sheet_context",
    "sheet_document", "shown_digits", "slug", "summary_figures", "typeset", "unit_latex", "unit_text",
    "visible_width", "with_unit", "write_files", "writer_for", "writers_for",
]
