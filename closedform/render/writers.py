"""The writer registry: output format name → :class:`~.documents.Writer`, one registry for
every command that writes files (``derive``'s sheets, ``appendix``, ``check``'s audit).

A command checks the formats it offers against its own list, then hands a
:class:`~.documents.Document` and the formats to :func:`write_files`: the writers' tools are
checked before any work, each writer adds its files, and nothing is written here. A new
format is a new module with its writer function and :class:`~.documents.Writer`, and one
entry in :data:`WRITERS` (or :func:`register_writer` at run time).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from .documents import Document, Files, Writer, sheet_document
from .flavours import Flavour
from .formats import CSV, JSON, MD, PDF, SVG, TEX

#: Every output format by name, in the order their files are gathered.
WRITERS: dict[str, Writer] = {writer.name: writer for writer in (MD, TEX, PDF, JSON, CSV, SVG)}
#: The built-in formats of a case sheet (``closedform derive --format``).
FORMATS = tuple(WRITERS)


def register_writer(writer: Writer, *, replace: bool = False) -> Writer:
    """Add ``writer`` to the registry under its name (a second one of that name only with
    ``replace``); returns it."""
    if writer.name in WRITERS and not replace:
        raise ValueError(f"an output format called {writer.name!r} is registered already")
    WRITERS[writer.name] = writer
    return writer


def writer_for(name: str) -> Writer:
    try:
        return WRITERS[name]
    except KeyError:
        raise ValueError(f"unknown output format {name!r} (known: {', '.join(WRITERS)})") \
            from None


def writers_for(formats: Iterable[str]) -> list[Writer]:
    """The writers of ``formats``, each once, in the registry's order."""
    wanted = set(formats)
    for name in wanted:
        writer_for(name)
    return [writer for name, writer in WRITERS.items() if name in wanted]


def flavours_of(formats: Iterable[str]) -> list[Flavour]:
    """The text flavours the writers of ``formats`` are written from, each once."""
    flavours: list[Flavour] = []
    for writer in writers_for(formats):
        if writer.flavour is not None and writer.flavour not in flavours:
            flavours.append(writer.flavour)
    return flavours


def require_tools(formats: Iterable[str]) -> None:
    """Before any work: a ClosedformError naming any tool a format needs that is missing."""
    for writer in writers_for(formats):
        if writer.requires is not None:
            writer.requires()


def write_files(document: Document, formats: Sequence[str]) -> Files:
    """File name → content of ``document`` in every format (nothing is written here)."""
    writers = writers_for(formats)
    require_tools(formats)
    contents: Files = {}
    for writer in writers:
        contents.update(writer.write(document))
    return contents


def render_outputs(derivation, formats, stem: str) -> Files:
    """File name → content of the sheet of ``derivation`` in every requested format
    (nothing is written here): ``md`` brings its SVG plots along, ``tex`` its PDF plots;
    ``pdf`` is the compiled sheet, ``svg`` the plots alone, ``json`` the result contract and
    ``csv`` the response sampled over the window; a long history adds its coefficient file
    to any sheet text."""
    return write_files(sheet_document(derivation, stem), list(formats))
