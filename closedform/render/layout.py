"""How a sheet is laid out: the names of its files, and excerpts of long lists.

Long histories: a table or list longer than EXCERPT_LIMIT is shown as its first and last
rows, with every row in a coefficient file beside the sheet (``<stem>-coefficients.csv``).
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

EXCERPT_LIMIT = 40
EXCERPT_HEAD, EXCERPT_TAIL = 12, 3
TERMS_INLINE = 4           # load terms written out as a sum up to this many; a table beyond


def excerpt(rows: list, gap: Callable[[int], Any]) -> list:
    """The first and last rows of a long list, with ``gap(omitted)`` between them (dropped
    when it is None); short lists are returned whole."""
    if len(rows) <= EXCERPT_LIMIT:
        return rows
    omitted = len(rows) - EXCERPT_HEAD - EXCERPT_TAIL
    middle = gap(omitted)
    return rows[:EXCERPT_HEAD] + ([middle] if middle is not None else []) + rows[-EXCERPT_TAIL:]


def is_long_history(derivation) -> bool:
    history = derivation.history
    return max(len(derivation.pieces), len(history.terms) + len(history.impulses)) > EXCERPT_LIMIT


def slug(stem: str) -> str:
    """A name safe in LaTeX labels, file names and Markdown links (letters, digits, -)."""
    return re.sub(r"-+", "-", re.sub(r"[^A-Za-z0-9-]+", "-", stem)).strip("-") or "case"


def figure_name(stem: str, kind: str, fmt: str) -> str:
    """The file name of one plot of a sheet: ``<slug>-load.svg``, ``<slug>-response.pdf``."""
    return f"{slug(stem)}-{kind}.{fmt}"


def coefficient_file_name(stem: str) -> str:
    return f"{slug(stem)}-coefficients.csv"
