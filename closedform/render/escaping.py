"""Escaping: plain text made safe for LaTeX or Markdown, and :class:`Math` for trusted LaTeX.

A template cannot print user text unescaped by accident: every plain string is escaped by
the environment's ``finalize`` (see :mod:`.flavours`), while :class:`Math` strings (LaTeX
from ``sympy.latex`` and this package's own typesetting) pass through unchanged.
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Callable


class Math(str):
    """LaTeX that is trusted (from ``sympy.latex`` or this module): printed unescaped.

    Joining two Math strings with ``+`` gives Math; joining Math with a plain string gives a
    plain string, which is escaped when printed.
    """

    __slots__ = ()

    def __add__(self, other: str) -> str:
        joined = str.__add__(self, other)
        return Math(joined) if isinstance(other, Math) else joined

    def __radd__(self, other: str) -> str:
        joined = str.__add__(other, self)
        return Math(joined) if isinstance(other, Math) else joined


_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
    "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
    "|": r"\textbar{}", "<": r"\textless{}", ">": r"\textgreater{}",
}
_MATH_CHARACTERS = {
    "−": "-", "·": r"\cdot", "≤": r"\le", "≥": r"\ge", "→": r"\rightarrow", "←": r"\leftarrow",
    "±": r"\pm", "×": r"\times", "÷": r"\div", "∫": r"\int", "√": r"\surd", "≡": r"\equiv",
    "≈": r"\approx", "≠": r"\ne", "∞": r"\infty", "°": r"^\circ", "µ": r"\mu", "∑": r"\Sigma",
    "∏": r"\Pi", "∂": r"\partial", "′": r"'", "″": r"''", "∈": r"\in", "∆": r"\Delta",
    "Ω": r"\Omega", "↔": r"\leftrightarrow", "⇒": r"\Rightarrow", "⇔": r"\Leftrightarrow",
    "↦": r"\mapsto",
}
_TEXT_CHARACTERS = {
    "…": r"\ldots{}", "—": "---", "–": "--", "‘": "`", "’": "'", "“": "``", "”": "''",
    "ß": r"\ss{}", "æ": r"\ae{}", "Æ": r"\AE{}", "ø": r"\o{}", "Ø": r"\O{}", "œ": r"\oe{}",
    "Œ": r"\OE{}", "ł": r"\l{}", "Ł": r"\L{}", "å": r"\aa{}", "Å": r"\AA{}", "ı": r"\i{}",
    "\u00a0": "~", "\u2009": r"\,", "\u202f": r"\,",
}
_SUPERSCRIPTS = dict(zip("⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻⁼⁽⁾ⁿⁱʰ", "0123456789+-=()nih"))
_SUBSCRIPTS = dict(zip("₀₁₂₃₄₅₆₇₈₉₊₋₌₍₎ᵢⱼₙ", "0123456789+-=()ijn"))
_ACCENTS = {"\u0300": "`", "\u0301": "'", "\u0302": "^", "\u0303": "~", "\u0304": "=",
            "\u0306": "u", "\u0307": ".", "\u0308": '"', "\u030a": "r", "\u030b": "H",
            "\u030c": "v", "\u0327": "c", "\u0328": "k"}
_GREEK_CAPITALS = {"GAMMA", "DELTA", "THETA", "LAMDA", "XI", "PI", "SIGMA", "UPSILON", "PHI",
                   "PSI", "OMEGA"}


#: Combining marks of Greek letters as math accents (tonos is the acute accent).
_GREEK_MATH_ACCENTS = {"\u0301": "acute", "\u0308": "ddot", "\u0300": "grave"}


def _latex_character(character: str) -> str:
    """One non-ASCII character for pdfLaTeX with its default fonts (no extra packages)."""
    if character in _TEXT_CHARACTERS:
        return _TEXT_CHARACTERS[character]
    if character in _MATH_CHARACTERS:
        return r"\ensuremath{" + _MATH_CHARACTERS[character] + "}"
    if character in _SUPERSCRIPTS:
        return r"\ensuremath{^{" + _SUPERSCRIPTS[character] + "}}"
    if character in _SUBSCRIPTS:
        return r"\ensuremath{_{" + _SUBSCRIPTS[character] + "}}"
    name = unicodedata.name(character, "")
    if name.startswith("GREEK ") and " WITH " in name:   # ά, ϊ …: the letter under a math accent
        base, *marks = unicodedata.normalize("NFD", character)
        text = _latex_character(base) if base != character else ""
        if text.startswith(r"\ensuremath{") and all(mark in _GREEK_MATH_ACCENTS for mark in marks):
            inner = text[len(r"\ensuremath{"):-1]
            for mark in marks:
                inner = "\\" + _GREEK_MATH_ACCENTS[mark] + "{" + inner + "}"
            return r"\ensuremath{" + inner + "}"
    if name.startswith("GREEK ") and " WITH " not in name:
        letter = name.split()[-1]
        small = " SMALL " in name
        if letter == "LAMDA":
            letter = "LAMBDA"
        if "FINAL" in name:
            return r"\ensuremath{\varsigma}"
        if small and letter != "OMICRON":
            return "\\ensuremath{\\" + letter.lower() + "}"
        if not small and name.split()[-1] in _GREEK_CAPITALS:
            return "\\ensuremath{\\" + letter.capitalize() + "}"
    decomposed = unicodedata.normalize("NFD", character)
    if len(decomposed) >= 2 and decomposed[0].isascii() and decomposed[0].isalpha() \
            and all(mark in _ACCENTS for mark in decomposed[1:]):
        text = decomposed[0] if decomposed[0] not in "ij" or len(decomposed) == 1 \
            else "\\" + decomposed[0]
        for mark in decomposed[1:]:
            text = "\\" + _ACCENTS[mark] + "{" + text + "}"
        return text
    return rf"\texttt{{[U+{ord(character):04X}]}}"


def latex_escape(text: str) -> str:
    """Plain text made safe for LaTeX: every special character and non-ASCII character
    becomes a command pdfLaTeX prints as that character; line breaks become spaces."""
    out = []
    for i, character in enumerate(str(text)):
        if character in _LATEX_SPECIAL:
            out.append(_LATEX_SPECIAL[character])
        elif character in "\n\r\t":
            out.append(" ")
        elif ord(character) < 32 or ord(character) == 127:
            continue
        elif character == "-" and text[i + 1:i + 2] == "-":
            out.append("-{}")       # no en/em-dash ligature from the user's "--"
        elif character.isascii():
            out.append(character)
        else:
            out.append(_latex_character(character))
    return "".join(out)


_MARKDOWN_SPECIAL = set("\\`*_[]<>|$#~")


def markdown_escape(text: str) -> str:
    """Plain text made safe for Markdown: no emphasis, links, HTML, math or table breaks."""
    out = []
    for character in str(text):
        if character in _MARKDOWN_SPECIAL:
            out.append("\\" + character)
        elif character in "\n\r\t":
            out.append(" ")
        elif ord(character) < 32 or ord(character) == 127:
            continue
        else:
            out.append(character)
    return "".join(out)



#: A symbol with a subscript written in plain text: one Latin letter, "_", then one to three
#: letters or digits (K_LM, R_m, M_p, k_E), not part of a longer word (peak_time and a name
#: such as x_integrated stay as they are).
_SUBSCRIPTED = re.compile(r"(?<![A-Za-z0-9_\\])([A-Za-z])_([A-Za-z0-9]{1,3})(?![A-Za-z0-9_])")


def with_subscripts(text: str, escape: Callable[[str], str]) -> Math:
    """Plain text whose symbols with subscripts (``K_LM``, ``R_m``) become inline math
    (``$K_{LM}$``), the rest escaped by ``escape`` (the sheet's, LaTeX or Markdown): a label
    written once in plain words reads K with the subscript LM on either sheet, not "K_LM"."""
    parts, last = [], 0
    for found in _SUBSCRIPTED.finditer(text):
        parts += [escape(text[last:found.start()]), f"${found[1]}_{{{found[2]}}}$"]
        last = found.end()
    parts.append(escape(text[last:]))
    return Math("".join(parts))
