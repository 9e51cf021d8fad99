"""The command line: argument parsing, exit codes and file output. No derivation here."""

from __future__ import annotations

import argparse
import importlib
import json
import os
import sys
import tempfile
from collections.abc import Sequence
from pathlib import Path

from . import __version__
from .budget import DEFAULT_SECONDS
from .errors import CaseError, ClosedformError

# Commands that live in modules of their own; each module has register(commands), which
# adds its sub-parser with set_defaults(run=function returning the exit code).
COMMAND_MODULES: tuple[str, ...] = ("closedform.audit", "closedform.appendix",
                                     "closedform.spectrum")


def main(argv: Sequence[str] | None = None) -> int:
    parser = _parser()
    try:
        arguments = parser.parse_args(argv)
    except SystemExit as exit_:
        return 2 if exit_.code not in (0, None) else 0
    try:
        return arguments.run(arguments)
    except ClosedformError as error:
        print(error.show(), file=sys.stderr)
        return error.exit_code
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 1
    except RecursionError:
        print("error: the input nests too deeply to process", file=sys.stderr)
        return 2
    except Exception as error:  # a defect in closedform itself: say so, without a traceback
        print(f"internal error ({type(error).__name__}: {error}); the case was not derived. "
              "Please report this with the case file.", file=sys.stderr)
        return 1


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="closedform",
        description="Exact piecewise responses of linear models to load histories, "
                    "checked independently, as derivation sheets.")
    parser.add_argument("--version", action="version", version=f"closedform {__version__}")
    commands = parser.add_subparsers(dest="command", required=True)

    derive = commands.add_parser("derive", help="derive the response of one or more cases")
    derive.add_argument("cases", type=Path, nargs="+", metavar="CASE",
                        help="case files (TOML) or folders holding them")
    derive.add_argument("-o", "--output", type=Path, help="folder for the sheet files")
    derive.add_argument("--format", default="md,json",
                        help=f"comma-separated output formats ({', '.join(output_formats())}); "
                             "default md,json")
    derive.add_argument("--json", dest="json_target", metavar="-",
                        help="print the JSON result on standard output ('-'); several cases "
                             "give a JSON array")
    derive.add_argument("--time-budget", type=float, default=DEFAULT_SECONDS, metavar="SECONDS",
                        help=f"stop a case whose derivation runs longer (default {DEFAULT_SECONDS:g})")
    derive.add_argument("--jobs", type=int, default=None,
                        help="processes for several cases (default: all cores)")
    derive.set_defaults(run=run_derive)
    for module in COMMAND_MODULES:
        importlib.import_module(module).register(commands)
    return parser


def output_formats() -> tuple[str, ...]:
    from .render import FORMATS
    return FORMATS


def parse_formats(text: str, known: Sequence[str] | None = None,
                  what: str = "output format") -> list[str]:
    """A comma-separated list of formats, each one of ``known``."""
    known = tuple(known or output_formats())
    formats = [f.strip() for f in text.split(",") if f.strip()]
    unknown = [f for f in formats if f not in known]
    if unknown or not formats:
        raise CaseError(f"unknown {what} '{', '.join(unknown) or text}' "
                        f"(expected some of: {', '.join(known)})", file="--format")
    return formats


def run_derive(arguments: argparse.Namespace) -> int:
    from .batch import case_sources, refuse_clashing_outputs, require_cases, run_cases, worst_exit_code

    if arguments.json_target not in (None, "-"):
        raise CaseError("--json takes '-' (standard output)", file="--json")
    if arguments.time_budget is not None and not arguments.time_budget > 0:
        raise CaseError("--time-budget must be a positive number of seconds", file="--time-budget")
    if arguments.jobs is not None and arguments.jobs < 1:
        raise CaseError("--jobs must be at least 1", file="--jobs")
    formats = parse_formats(arguments.format) if arguments.output is not None else []
    sources = case_sources(arguments.cases)
    paths = [path for path, _folder in sources]
    require_cases(paths)
    if arguments.output is not None:
        usable_output_folder(arguments.output)
        refuse_clashing_outputs(sources)
    outcomes = run_cases(paths, formats, time_budget=arguments.time_budget, jobs=arguments.jobs)
    for outcome, (_path, folder) in zip(outcomes, sources):
        for warning in outcome.warnings:
            print(f"warning: {warning}", file=sys.stderr)
        if outcome.result is None:
            print(outcome.message, file=sys.stderr)
        elif arguments.json_target is None:
            print(outcome.message)
        if arguments.output is not None and outcome.contents:
            write_atomically(arguments.output / folder, outcome.contents)
    if arguments.json_target == "-":
        results = [o.result for o in outcomes if o.result is not None]
        if len(paths) == 1:
            if results:
                sys.stdout.write(json.dumps(results[0], indent=2) + "\n")
        else:
            sys.stdout.write(json.dumps(results, indent=2) + "\n")
    return worst_exit_code(outcomes)


def write_outputs(derivation, folder: Path, formats: Sequence[str]) -> list[Path]:
    """Render everything first, then move each file into place (never half-written)."""
    from .render import render_outputs

    stem = Path(derivation.case.source).stem or "case"
    return write_atomically(folder, render_outputs(derivation, formats, stem))


def _umask() -> int:
    """The process umask (read by setting and restoring it)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def usable_output_folder(folder: Path, option: str = "-o") -> None:
    """Refuse, before any work, an output folder that is a file or could not be made; it is
    made only when there is something to write (a failed run leaves no empty folder)."""
    if folder.exists() and not folder.is_dir():
        raise CaseError(f"'{folder}' is a file, not a folder for the output", file=option)
    existing = folder.absolute()
    while not existing.exists():
        existing = existing.parent
    if not existing.is_dir():
        raise CaseError(f"cannot make the output folder '{folder}': '{existing}' is a file",
                        file=option)
    if not os.access(existing, os.W_OK | os.X_OK):
        raise CaseError(f"the output folder '{folder}' cannot be written in "
                        f"('{existing}' is not writable)", file=option)


def write_atomically(folder: Path, contents: dict[str, str | bytes]) -> list[Path]:
    try:
        return _write_atomically(folder, contents)
    except OSError as error:
        raise CaseError(f"cannot write into '{folder}': {error.strerror or error}",
                        file=str(folder)) from None


def _write_atomically(folder: Path, contents: dict[str, str | bytes]) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name, content in contents.items():
        target = folder / name
        data = content.encode("utf-8") if isinstance(content, str) else content
        handle, temporary = tempfile.mkstemp(dir=folder, prefix=f".{name}.", suffix=".part")
        try:
            with os.fdopen(handle, "wb") as stream:
                stream.write(data)
            os.chmod(temporary, 0o666 & ~_umask())
            os.replace(temporary, target)
        except BaseException:
            Path(temporary).unlink(missing_ok=True)
            raise
        written.append(target)
    return written


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
