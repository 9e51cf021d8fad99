"""The command line: argument parsing, exit codes and file output. No derivation here."""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import tempfile
from collections.abc import Sequence
from pathlib import Path

from . import __version__
from .errors import CaseError, ClosedformError

# Commands that live in modules of their own; each module has register(commands), which
# adds its sub-parser with set_defaults(run=function returning the exit code).
COMMAND_MODULES: tuple[str, ...] = ()


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

    derive = commands.add_parser("derive", help="derive the response of one case")
    derive.add_argument("case", type=Path, help="the case file (TOML)")
    derive.add_argument("-o", "--output", type=Path, help="folder for the sheet files")
    derive.add_argument("--format", default="md,json",
                        help=f"comma-separated output formats ({', '.join(output_formats())}); "
                             "default md,json")
    derive.add_argument("--json", dest="json_target", metavar="-",
                        help="print the JSON result on standard output ('-')")
    derive.set_defaults(run=run_derive)
    for module in COMMAND_MODULES:
        importlib.import_module(module).register(commands)
    return parser


def output_formats() -> tuple[str, ...]:
    from .render import FORMATS
    return FORMATS


def parse_formats(text: str) -> list[str]:
    known = output_formats()
    formats = [f.strip() for f in text.split(",") if f.strip()]
    unknown = [f for f in formats if f not in known]
    if unknown or not formats:
        raise CaseError(f"unknown output format '{', '.join(unknown) or text}' "
                        f"(expected some of: {', '.join(known)})", file="--format")
    return formats


def run_derive(arguments: argparse.Namespace) -> int:
    from .case import load_case
    from .derivation import derive

    if arguments.json_target not in (None, "-"):
        raise CaseError("--json takes '-' (standard output)", file="--json")
    formats = parse_formats(arguments.format)
    case = load_case(arguments.case)
    derivation = derive(case)
    if arguments.json_target == "-":
        sys.stdout.write(derivation.to_json() + "\n")
    if arguments.output is not None:
        write_outputs(derivation, arguments.output, formats)
    if arguments.json_target is None and arguments.output is None:
        print(summary_line(derivation))
    return 0 if derivation.passed else 1


def summary_line(derivation) -> str:
    results = derivation.results
    parts = [f"{derivation.case.source}: {derivation.status.upper()}"]
    if results.peak is not None:
        parts.append(f"peak {results.peak.value:.6g} at t = {results.peak.time:.6g} s")
    if results.dlf is not None:
        parts.append(f"DLF {results.dlf:.4g}")
    failed = [c.name for c in derivation.checks if not c.passed]
    if failed:
        parts.append(f"failed checks: {', '.join(failed)}")
    return "; ".join(parts)


def write_outputs(derivation, folder: Path, formats: Sequence[str]) -> list[Path]:
    """Render everything first, then move each file into place (never half-written)."""
    from .render import render_outputs

    stem = Path(derivation.case.source).stem or "case"
    return write_atomically(folder, render_outputs(derivation, formats, stem))


def write_atomically(folder: Path, contents: dict[str, str | bytes]) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for name, content in contents.items():
        target = folder / name
        data = content.encode("utf-8") if isinstance(content, str) else content
        handle, temporary = tempfile.mkstemp(dir=folder, prefix=f".{name}.", suffix=".part")
        try:
            with os.fdopen(handle, "wb") as stream:
                stream.write(data)
            os.replace(temporary, target)
        except BaseException:
            Path(temporary).unlink(missing_ok=True)
            raise
        written.append(target)
    return written


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
