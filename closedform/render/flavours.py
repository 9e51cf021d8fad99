"""Flavours: one object per sheet target (Markdown, LaTeX) holding everything that differs
between them, so that no other code asks which target it is writing for.

A :class:`Flavour` gives the escaping of plain text, the Jinja2 delimiters (``"tex"`` uses
LaTeX-safe ones: ``((* block *))``, ``((( value )))``, ``((= comment =))``; ``"md"`` Jinja's
usual ones), the form of a displayed equation, the suffix of the figure files a sheet
references (SVG beside Markdown, PDF inside LaTeX), what an absent value prints as, and the
template of a document (``sheet`` → ``sheet.md.j2`` / ``sheet.tex.j2``). Both environments
have a ``finalize`` that escapes every plain string, while :class:`Math` passes unchanged.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import jinja2

from .escaping import Math, latex_escape, markdown_escape
from .typesetting import Display, available_width, visible_width


def markdown_equation(equation: Display) -> Math:
    """A displayed equation for Markdown viewers: $$ … $$, long ones as aligned lines."""
    if not isinstance(equation, Display):
        return Math(f"$$\n{Math(equation)}\n$$")
    note = rf" \qquad {equation.note}" if equation.note else ""
    if equation.single:
        return Math(f"$$\n{equation.lhs} = {equation.lines[0]}{note}\n$$")
    rows = [f"{equation.lhs} &= {equation.lines[0]}"]
    rows += [rf"&\quad {line}" for line in equation.lines[1:]]
    return Math("$$\n\\begin{aligned}\n" + " \\\\\n".join(rows) + note
                + "\n\\end{aligned}\n$$")


def fitted(line: str, width: float) -> str:
    """A display line that cannot be broken between terms (one term wider than the page,
    as exact forms of non-round inputs can be) scaled down to the line width instead of
    running off the page."""
    if visible_width(line) <= width:
        return line
    return (r"\resizebox{\ifdim\width>0.78\linewidth 0.78\linewidth\else\width\fi}{!}"
            r"{$\displaystyle " + line + "$}")


def latex_equation(equation: Display) -> Math:
    """A displayed equation for LaTeX: equation*, long ones in align* one line per row."""
    if not isinstance(equation, Display):
        return Math(f"\\begin{{equation*}}\n{Math(equation)}\n\\end{{equation*}}")
    width = available_width(equation.lhs) * 1.1
    equation = Display(equation.lhs, tuple(Math(fitted(line, width)) for line in equation.lines),
                       equation.note)
    note = rf" \qquad {equation.note}" if equation.note else ""
    if equation.single:
        return Math(f"\\begin{{equation*}}\n{equation.lhs} = {equation.lines[0]}{note}\n"
                    "\\end{equation*}")
    rows = [f"{equation.lhs} &= {equation.lines[0]}"]
    rows += [rf"&\quad {line}" for line in equation.lines[1:]]
    return Math("\\begin{align*}\n" + " \\\\\n".join(rows) + note + "\n\\end{align*}")



def _unbroken_latex(text: str) -> Math:
    return Math(r"\mbox{" + latex_escape(text) + "}")


@dataclass(frozen=True)
class Flavour:
    """What a sheet target is: its name (the output format and the templates' middle
    suffix), how it escapes text and prints equations, which figure files it references."""

    name: str
    escape: Callable[[str], str]
    equation: Callable[[Any], Math]     # a displayed equation (a Display or trusted LaTeX)
    figure_suffix: str                  # the plots it references: "svg" | "pdf"
    missing: str                        # what an absent value (None) prints as
    unbroken: Callable[[str], Any]      # a short text that must not be broken across lines
    document: str | None = None         # the template a standalone sheet is wrapped in
    delimiters: tuple[tuple[str, str], ...] = ()    # Jinja2's options, where not its defaults

    def template(self, document: str) -> str:
        """The template file of ``document`` ("sheet", "appendix", …) for this flavour."""
        return f"{document}.{self.name}.j2"

    def environment(self) -> jinja2.Environment:
        return make_environment(self.name)

    def render(self, document: str, context: Mapping[str, Any]) -> str:
        return self.environment().get_template(self.template(document)).render(context)


MARKDOWN = Flavour("md", markdown_escape, markdown_equation, "svg", "—", str)
LATEX = Flavour("tex", latex_escape, latex_equation, "pdf", "---", _unbroken_latex, "document",
                (("block_start_string", r"((*"), ("block_end_string", r"*))"),
                 ("variable_start_string", r"((("), ("variable_end_string", r")))"),
                 ("comment_start_string", r"((="), ("comment_end_string", r"=))")))
#: Every flavour by name; a new one (say HTML) is one more entry and its templates.
FLAVOURS = {flavour.name: flavour for flavour in (MARKDOWN, LATEX)}


def flavour(name: str) -> Flavour:
    """The flavour called ``name`` ("md" or "tex")."""
    try:
        return FLAVOURS[name]
    except KeyError:
        raise ValueError(f"unknown template target {name!r} (expected "
                         + " or ".join(repr(n) for n in sorted(FLAVOURS, reverse=True)) + ")") \
            from None


def _finalizer(flavour_: Flavour) -> Callable[[Any], str]:
    escape = flavour_.escape

    def finalize(value: Any) -> str:
        if isinstance(value, Math):
            return str(value)
        if isinstance(value, str):
            return escape(value)
        if isinstance(value, bool):
            raise TypeError("a template printed a boolean; say what it means in words")
        if isinstance(value, int):
            return str(value)
        if value is None:
            return flavour_.missing
        raise TypeError(f"a template printed a {type(value).__name__}; format it first "
                        "(render.number, render.typeset)")
    return finalize


@functools.cache
def make_environment(target: str = "tex") -> jinja2.Environment:
    """The Jinja2 environment of the flavour ``target`` ("tex" or "md").

    Templates are loaded from the package (they travel inside the wheel).
    """
    chosen = flavour(target)
    environment = jinja2.Environment(
        loader=jinja2.PackageLoader("closedform", "templates"), autoescape=False,
        keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True,
        undefined=jinja2.StrictUndefined, finalize=_finalizer(chosen), **dict(chosen.delimiters))
    environment.filters["equation"] = chosen.equation
    return environment
