"""One place for the command line's common options, defined and checked once.

Every sub-command (derive, check, appendix, spectrum) adds its common options with the
``add_…`` functions here, so they are named, defaulted and described the same way
(``-o/--output``, ``--format``, ``--time-budget``, ``--memory-budget``, ``--jobs``);
:func:`check_options` checks whichever of them a command has, once, before any work, raises
a CaseError located at the option (one line, exit 2), and leaves the checked values in
place: ``formats`` (a list; empty without ``-o``) and ``memory_budget`` (bytes). Light
module: standard library only, so that an input error is reported without importing the
engine.
"""

from __future__ import annotations

import argparse
import math
import os
import re
from collections.abc import Sequence
from pathlib import Path

from .budget import DEFAULT_SECONDS
from .errors import CaseError
from .workers import DEFAULT_MEMORY, format_size

#: Output formats of a case sheet (the same as render.FORMATS; a test keeps them equal).
SHEET_FORMATS = ("md", "tex", "pdf", "json", "csv", "svg")
#: Output formats of an appendix (the same as appendix.APPENDIX_FORMATS).
APPENDIX_FORMATS = ("md", "tex", "pdf")
#: Output formats of an audit sheet (the same as audit.AUDIT_FORMATS where it has one).
AUDIT_FORMATS = ("md", "tex", "pdf", "json")
#: The formats each command accepts in --format, and what they are called in messages.
COMMAND_FORMATS = {"derive": (SHEET_FORMATS, "output format"),
                   "check": (AUDIT_FORMATS, "audit format"),
                   "appendix": (APPENDIX_FORMATS, "appendix format")}
#: The largest time budget accepted: a week (the interval timer cannot take much more,
#: and no case needs it).
MAX_SECONDS = 7 * 24 * 3600.0
MAX_JOBS = 256
#: The smallest memory budget accepted (the engine alone takes about 200 MiB).
MIN_MEMORY = 256 * 1024 ** 2

_SIZE = re.compile(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*(KiB|MiB|GiB|TiB|KB|MB|GB|TB|K|M|G|T)\s*")
_UNITS = {"K": 1024, "M": 1024 ** 2, "G": 1024 ** 3, "T": 1024 ** 4,
          "KiB": 1024, "MiB": 1024 ** 2, "GiB": 1024 ** 3, "TiB": 1024 ** 4,
          "KB": 1000, "MB": 1000 ** 2, "GB": 1000 ** 3, "TB": 1000 ** 4}


def add_output(parser: argparse.ArgumentParser, *, help: str, required: bool = False,
               metavar: str | None = None) -> None:
    parser.add_argument("-o", "--output", type=Path, required=required, metavar=metavar,
                        help=help)


def add_formats(parser: argparse.ArgumentParser, *, default: str, help: str) -> None:
    """``--format``: checked by :func:`check_options` into ``formats`` (a list)."""
    parser.add_argument("--format", default=default, help=help)


def add_budgets(parser: argparse.ArgumentParser, *, what: str = "case") -> None:
    """``--time-budget`` (seconds) and ``--memory-budget`` (a size, checked into bytes)."""
    parser.add_argument("--time-budget", type=float, default=DEFAULT_SECONDS, metavar="SECONDS",
                        help=f"stop a {what} whose derivation runs longer "
                             f"(default {DEFAULT_SECONDS:g})")
    parser.add_argument("--memory-budget", default=format_size(DEFAULT_MEMORY).replace(" ", ""),
                        metavar="SIZE",
                        help=f"stop a {what} whose worker process uses more memory (default "
                             f"{format_size(DEFAULT_MEMORY)}; e.g. 512MiB, 8GiB)")


def add_jobs(parser: argparse.ArgumentParser, *, help: str) -> None:
    parser.add_argument("--jobs", type=int, default=None, help=help)


def physical_memory() -> int | None:
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return None


def parse_size(text: str, option: str = "--memory-budget") -> int:
    """``"4GiB"``, ``"512 MiB"``, ``"4G"`` (binary), ``"3GB"`` (decimal) → bytes."""
    match = _SIZE.fullmatch(text)
    if match is None:
        raise CaseError(f"expected a size such as 4GiB or 512MiB, got '{text}'", file=option)
    size = int(float(match.group(1)) * _UNITS[match.group(2)])
    total = physical_memory()
    if size < MIN_MEMORY:
        raise CaseError(f"must be at least 256MiB (the engine alone needs about 200 MiB), "
                        f"got '{text}'", file=option)
    if total is not None and size > total:
        raise CaseError(f"must not exceed this machine's memory ({total / 1024 ** 3:.3g} GiB), "
                        f"got '{text}'", file=option)
    return size


def _format_list(text: str) -> list[str]:
    return [f.strip() for f in text.split(",") if f.strip()]


def check_formats(text: str, known: Sequence[str], what: str = "output format") -> list[str]:
    """A comma-separated list of formats, each one of ``known``."""
    formats = _format_list(text)
    unknown = [f for f in formats if f not in known]
    if unknown or not formats:
        raise CaseError(f"unknown {what} '{', '.join(unknown) or text}' "
                        f"(expected some of: {', '.join(known)})", file="--format")
    return formats


def format_given(argv: Sequence[str]) -> bool:
    """Whether --format was written on the command line (not just its default)."""
    return any(a == "--format" or a.startswith("--format=") for a in argv)


def empty_output(argv: Sequence[str]) -> bool:
    """``-o ''``, ``--output ''`` or ``--output=`` (argparse turns '' into Path('.'))."""
    for i, argument in enumerate(argv):
        if argument in ("-o", "--output") and i + 1 < len(argv) and argv[i + 1] == "":
            return True
        if argument in ("--output=", "-o="):
            return True
    return False


def check_options(arguments: argparse.Namespace, argv: Sequence[str]) -> None:
    """Check every common option ``arguments`` has; raise a CaseError at the first bad one."""
    command = getattr(arguments, "command", None)
    if empty_output(argv):
        raise CaseError("must name a folder (use -o . for the current folder), got ''",
                        file="-o")
    seconds = getattr(arguments, "time_budget", None)
    if seconds is not None:
        if not (math.isfinite(seconds) and 0 < seconds <= MAX_SECONDS):
            raise CaseError(f"must be a positive number of seconds up to {MAX_SECONDS:g} "
                            f"(a week), got {seconds:g}", file="--time-budget")
    jobs = getattr(arguments, "jobs", None)
    if jobs is not None and not 1 <= jobs <= MAX_JOBS:
        raise CaseError(f"must be from 1 to {MAX_JOBS}, got {jobs}", file="--jobs")
    if isinstance(getattr(arguments, "memory_budget", None), str):
        arguments.memory_budget = parse_size(arguments.memory_budget)
    json_target = getattr(arguments, "json_target", None)
    if json_target is not None and json_target != "-":
        check_json_file(json_target)
    given = getattr(arguments, "format", None)
    if given is not None:
        known, what = COMMAND_FORMATS.get(str(command), (SHEET_FORMATS, "output format"))
        formats = check_formats(given, known, what)
        output = vars(arguments).get("output", "no such option")
        if format_given(argv) and output is None:
            raise CaseError(f"writing {', '.join(formats)} needs -o DIR "
                            "(the folder for the files); --json - prints the JSON "
                            "result", file="--format")
        arguments.formats = formats if output is not None else []


def check_json_file(target: str) -> None:
    if target == "" or target.endswith(os.sep):
        raise CaseError(f"expected '-' (standard output) or a file name, got '{target}'",
                        file="--json")
    path = Path(target)
    if path.is_dir():
        raise CaseError(f"'{target}' is a folder (expected '-' or a file name)", file="--json")
    parent = path.parent
    if not parent.is_dir():
        raise CaseError(f"the folder of '{target}' does not exist", file="--json")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise CaseError(f"the folder of '{target}' cannot be written in", file="--json")
