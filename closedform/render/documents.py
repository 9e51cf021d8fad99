"""Documents and writers: what an output format is written from, and what writes it.

A :class:`Document` is one thing the commands write — the sheet of a case (``derive``), an
appendix of many cases (``appendix``), an audit sheet (``check``). It gives its text in a
flavour (Markdown, LaTeX), the figure files that text references, the files every sheet
text brings along, and, where it has them, its JSON and CSV data. Each is rendered once
however many formats ask for it.

A :class:`Writer` is one output format: its ``--format`` name, the function that turns a
document into file name → content, the flavour of text it is written from (which tells a
batch which texts to render for it) and the check, run before any work, that the tools it
needs are there. Writers are looked up by name in :mod:`.writers`.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from ..errors import ClosedformError
from .flavours import Flavour

Files = dict[str, str | bytes]


class Document:
    """One document to write, named ``name`` (the base of its file names)."""

    kind = "document"

    def __init__(self, name: str) -> None:
        self.name = name
        self._texts: dict[str, str] = {}
        self._figures: dict[str, dict[str, bytes]] = {}

    def text(self, flavour: Flavour) -> str:
        """The whole document in ``flavour`` (rendered once)."""
        if flavour.name not in self._texts:
            self._texts[flavour.name] = self.render_text(flavour)
        return self._texts[flavour.name]

    def figures(self, suffix: str) -> dict[str, bytes]:
        """The figure files (``suffix`` "svg" or "pdf") the document's text references."""
        if suffix not in self._figures:
            self._figures[suffix] = self.render_figures(suffix)
        return self._figures[suffix]

    def attachments(self) -> Files:
        """Files that come with any text of the document (none unless it says so)."""
        return {}

    def render_text(self, flavour: Flavour) -> str:
        raise self._missing(f"{flavour.name} text")

    def render_figures(self, suffix: str) -> dict[str, bytes]:
        return {}

    def json(self) -> str:
        raise self._missing("JSON")

    def csv(self) -> str:
        raise self._missing("CSV")

    def _missing(self, what: str) -> ClosedformError:
        return ClosedformError(f"internal: a {self.kind} has no {what} output")


@dataclass(frozen=True)
class Writer:
    """One output format: ``write(document)`` gives its files (nothing is written here)."""

    name: str
    write: Callable[[Document], Files]
    flavour: Flavour | None = None          # the text it is written from, if any
    requires: Callable[[], Any] | None = None   # raises, before any work, when a tool is missing
    description: str = ""


class SheetDocument(Document):
    """The sheet of one derivation, its figures named after ``stem``."""

    kind = "sheet"

    def __init__(self, derivation, stem: str) -> None:
        super().__init__(stem)
        self.derivation = derivation

    def render_text(self, flavour: Flavour) -> str:
        from .sheet import render_sheet
        return render_sheet(self.derivation, flavour, stem=self.name, standalone=True)

    def render_figures(self, suffix: str) -> dict[str, bytes]:
        from .figures import figure_files
        return figure_files(self.derivation, self.name, suffix)

    def attachments(self) -> Files:
        """The coefficient file of a long history (its tables are excerpts on the sheet)."""
        from .datafiles import render_coefficients
        from .layout import coefficient_file_name, is_long_history
        if not is_long_history(self.derivation):
            return {}
        return {coefficient_file_name(self.name): render_coefficients(self.derivation)}

    def json(self) -> str:
        return self.derivation.to_json() + "\n"

    def csv(self) -> str:
        from .datafiles import render_csv
        return render_csv(self.derivation)


def sheet_document(derivation, stem: str) -> Document:
    """The document of the sheet of ``derivation``: a :class:`SheetDocument`, or for several
    masses (``model = "chain"`` / ``"matrix"``) their own (``chain_sheet.ChainSheetDocument``)."""
    if getattr(derivation, "chain", None) is not None:
        from ..chain_sheet import ChainSheetDocument
        return ChainSheetDocument(derivation, stem)
    return SheetDocument(derivation, stem)
