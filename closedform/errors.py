"""One hierarchy of errors, each knowing the exit code the command line returns for it.

Exit codes follow the design contract: 2 for unusable input, 1 for a derivation that could
not be completed or did not pass its checks.
"""

from __future__ import annotations


class ClosedformError(Exception):
    """Base of every error closedform raises on purpose."""

    exit_code = 1

    def show(self) -> str:
        """The one line printed for the user (no traceback)."""
        return f"error: {self}"


class CaseError(ValueError, ClosedformError):
    """The case file (or a file it names) cannot be used as it stands.

    ``file`` is the case file (or CSV) path, ``key`` the TOML key such as ``load[2].duration``,
    ``line`` the line number when it is known.
    """

    exit_code = 2

    def __init__(self, message: str, *, file: str | None = None, key: str | None = None,
                 line: int | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.file = file
        self.key = key
        self.line = line

    def located(self, *, file: str | None = None, key: str | None = None,
                line: int | None = None) -> CaseError:
        """The same error with the missing location parts filled in."""
        return CaseError(self.message, file=self.file or file, key=self.key or key,
                         line=self.line if self.line is not None else line)

    def __str__(self) -> str:
        place = self.file or "<case>"
        if self.line is not None:
            place = f"{place}:{self.line}"
        if self.key:
            return f"{place}: {self.key}: {self.message}"
        return f"{place}: {self.message}"

    def show(self) -> str:
        return str(self)


class ExpressionError(CaseError):
    """A quantity or formula string is outside the whitelisted grammar."""


class DerivationError(ClosedformError):
    """The engine could not derive the response (an unsupported structure, an empty result)."""

    exit_code = 1


class TimeBudgetExceeded(DerivationError):
    """A symbolic stage ran past its time budget."""


def quote(text: str, limit: int = 40) -> str:
    """``text`` as it should appear inside a one-line message: quoted, escaped, shortened."""
    shown = text if len(text) <= limit else text[:limit]
    # repr escapes newlines and control characters, so a message always stays on one line.
    out = repr(shown)
    if not out.isascii():
        out = ascii(shown)
    return out + ("..." if len(text) > limit else "")
