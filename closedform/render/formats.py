"""The built-in output formats: Markdown, LaTeX, PDF, JSON, CSV and SVG plots.

Each is a function ``document -> {file name: content}`` and its :class:`~.documents.Writer`;
:mod:`.writers` lists them. Markdown brings its SVG plots along, LaTeX its PDF plots; PDF is
the compiled LaTeX (the plots inside it), SVG the plots alone.
"""

from __future__ import annotations

from .documents import Document, Files, Writer
from .flavours import LATEX, MARKDOWN
from .pdf import compile_pdf, require_latex


def write_markdown(document: Document) -> Files:
    return {**document.attachments(), f"{document.name}.md": document.text(MARKDOWN),
            **document.figures(MARKDOWN.figure_suffix)}


def write_latex(document: Document) -> Files:
    return {**document.attachments(), f"{document.name}.tex": document.text(LATEX),
            **document.figures(LATEX.figure_suffix)}


def write_pdf(document: Document) -> Files:
    pdf = compile_pdf(document.text(LATEX), document.figures(LATEX.figure_suffix),
                      name=document.name)
    return {**document.attachments(), f"{document.name}.pdf": pdf}


def write_json(document: Document) -> Files:
    return {f"{document.name}.json": document.json()}


def write_csv(document: Document) -> Files:
    return {f"{document.name}.csv": document.csv()}


def write_svg(document: Document) -> Files:
    return dict(document.figures(MARKDOWN.figure_suffix))


MD = Writer("md", write_markdown, MARKDOWN, description="Markdown sheet with SVG plots")
TEX = Writer("tex", write_latex, LATEX, description="LaTeX sheet with PDF plots")
PDF = Writer("pdf", write_pdf, LATEX, require_latex, "the LaTeX sheet compiled by pdflatex")
JSON = Writer("json", write_json, description="the JSON result")
CSV = Writer("csv", write_csv, description="the response sampled over the window")
SVG = Writer("svg", write_svg, description="the plots alone, as SVG")
