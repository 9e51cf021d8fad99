"""The command line: argument parsing, exit codes and file output. No derivation here."""

from __future__ import annotations

import argparse
import importlib
import io
import json
import os
import sys
from collections.abc import Sequence
from pathlib import Path

from . import __version__
from .errors import CaseError, ClosedformError
from .options import SHEET_FORMATS, add_budgets, add_formats, add_jobs, add_output, check_options
from .workers import Stopped, install_stop_handlers, restore_handlers

# Commands that live in modules of their own; each module has register(commands), which
# adds its sub-parser with set_defaults(run=function returning the exit code). Those modules
# import the engine (sympy, pint, …), so a module is imported only when its command is the
# one being run; until then its command is listed by name and one-line help (kept equal to
# the module's own by tests/test_safety.py), so `closedform --help`, `--version` and an
# option error of `derive` import nothing heavy.
COMMAND_MODULES: dict[str, tuple[str, str]] = {
    "check": ("closedform.audit",
              "audit the [claims] of a case against a checked derivation"),
    "appendix": ("closedform.appendix", "every case of a folder in one appendix document"),
    "spectrum": ("closedform.spectrum",
                 "peak response of a single pulse against t_d/T_n (shock spectrum)"),
}


def main(argv: Sequence[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = _parser(argv)
    try:
        arguments = parser.parse_args(argv)
    except SystemExit as exit_:
        return 2 if exit_.code not in (0, None) else 0
    previous = install_stop_handlers()
    try:
        check_options(arguments, argv)
        json_file = None
        if getattr(arguments, "json_target", None) not in (None, "-"):
            json_file, arguments.json_target = Path(arguments.json_target), "-"
        if json_file is None:
            return arguments.run(arguments)
        return run_into_file(arguments, json_file)
    except ClosedformError as error:
        print(error.show(), file=sys.stderr)
        return error.exit_code
    except KeyboardInterrupt:
        print("interrupted (SIGINT); stopped", file=sys.stderr)
        return 130
    except Stopped as stop:
        print(f"interrupted ({stop.name}); stopped", file=sys.stderr)
        return stop.exit_code
    except RecursionError:
        print("error: the input nests too deeply to process", file=sys.stderr)
        return 2
    except Exception as error:  # a defect in closedform itself: say so, without a traceback
        print(f"internal error ({type(error).__name__}: {error}); the case was not derived. "
              "Please report this with the case file.", file=sys.stderr)
        return 1
    finally:
        restore_handlers(previous)


def run_into_file(arguments: argparse.Namespace, json_file: Path) -> int:
    """Run a command whose JSON goes to ``json_file``: what it would print on standard
    output is caught and written to the file as a whole (atomically), once it has run."""
    buffer = io.StringIO()
    real = sys.stdout
    sys.stdout = buffer
    try:
        code = arguments.run(arguments)
    finally:
        sys.stdout = real
    if buffer.getvalue():
        write_atomically(json_file.parent, {json_file.name: buffer.getvalue()})
    return code


def _parser(argv: Sequence[str] = ()) -> argparse.ArgumentParser:
    """The command line's parser; only the sub-command named in ``argv`` (if any) has its
    module imported to define its options."""
    parser = argparse.ArgumentParser(
        prog="closedform",
        description="Exact piecewise responses of linear models to load histories, "
                    "checked independently, as derivation sheets.")
    parser.add_argument("--version", action="version", version=f"closedform {__version__}")
    commands = parser.add_subparsers(dest="command", required=True)

    derive = commands.add_parser("derive", help="derive the response of one or more cases")
    derive.add_argument("cases", type=Path, nargs="+", metavar="CASE",
                        help="case files (TOML) or folders holding them")
    add_output(derive, help="folder for the sheet files")
    add_formats(derive, default="md,json",
                help=f"comma-separated output formats ({', '.join(SHEET_FORMATS)}); "
                     "default md,json; needs -o")
    derive.add_argument("--json", dest="json_target", metavar="FILE",
                        help="write the JSON result to FILE, or to standard output with '-'; "
                             "several cases give a JSON array")
    add_budgets(derive)
    add_jobs(derive, help="processes at once: several cases, or a long history's verification "
                          "beside its other checks (default: all cores; 1: one at a time)")
    derive.set_defaults(run=run_derive)
    chosen = next((a for a in argv if not a.startswith("-")), None)
    for name, (module, summary) in COMMAND_MODULES.items():
        if name == chosen:
            importlib.import_module(module).register(commands)
        else:
            commands.add_parser(name, help=summary)
    return parser


def run_derive(arguments: argparse.Namespace) -> int:
    from .batch import (
        CaseOutcome,
        CaseTask,
        SheetFiles,
        case_sources,
        refuse_clashing_outputs,
        require_cases,
        run_cases,
        worst_exit_code,
    )

    finish = SheetFiles(tuple(arguments.formats))
    sources = case_sources(arguments.cases)
    paths = [source.path for source in sources]
    require_cases(paths)
    if arguments.output is not None:
        usable_output_folder(arguments.output)
        refuse_clashing_outputs(sources)
    outcomes: list[CaseOutcome | None] = [None] * len(paths)
    written: list[str] = []
    unwritten: dict[int, str] = {}     # index → the one line saying why nothing was written
    shown = 0

    def finished(index: int, outcome: CaseOutcome) -> None:
        """Write a finished case's files at once (as one set), then report the cases
        finished so far in the order they were given."""
        nonlocal shown
        folder = sources[index].folder
        if arguments.output is not None and outcome.contents:
            try:
                write_atomically(arguments.output / folder, outcome.contents)
                written.append(str(paths[index]))
            except CaseError as error:
                unwritten[index] = (f"error: {display(str(paths[index]))}: derived, but "
                                    f"nothing of it was written: {error.message}")
        outcomes[index] = outcome
        while shown < len(outcomes) and outcomes[shown] is not None:
            report(shown)
            shown += 1

    def report(index: int) -> None:
        outcome = outcomes[index]
        assert outcome is not None
        for warning in outcome.warnings:
            print(f"warning: {warning}", file=sys.stderr)
        if index in unwritten:
            print(unwritten[index], file=sys.stderr)
        elif outcome.result is None:
            print(outcome.message, file=sys.stderr)
        elif arguments.json_target is None:
            print(outcome.message)

    try:
        done = run_cases([CaseTask(str(path), arguments.time_budget, finish) for path in paths],
                         jobs=arguments.jobs, memory_budget=arguments.memory_budget,
                         on_done=finished)
    except BaseException:
        if arguments.output is not None:
            count = f"{len(written)} of {len(paths)} cases written" + (
                f" ({', '.join(display(p) for p in written)})" if written else "")
            print(f"stopped: {count}; the others were not written", file=sys.stderr)
        raise
    if arguments.json_target is not None:
        results = [o.result for o in done if o.result is not None]
        text = json.dumps(results[0] if len(paths) == 1 else results, indent=2) + "\n" \
            if results or len(paths) != 1 else ""
        if text:
            sys.stdout.write(text)
    return max(worst_exit_code(done), 2 if unwritten else 0)


def display(path: str) -> str:
    from .case import display_name
    return display_name(path)


def usable_output_folder(folder: Path, option: str = "-o") -> None:
    """Refuse, before any work, an output folder that is a file or could not be made; it is
    made only when there is something to write (a failed run leaves no empty folder)."""
    if str(folder) == "":
        raise CaseError("the output folder must not be empty (use -o . for the current folder)",
                        file=option)
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
    """Write ``contents`` into ``folder`` as one set (all new files or all old ones); an
    OSError becomes a CaseError naming the folder, with nothing of the set left behind."""
    from .outputs import write_set

    try:
        return write_set(folder, contents)
    except OSError as error:
        raise CaseError(f"cannot write into '{folder}': {error.strerror or error}",
                        file=str(folder)) from None


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
