"""PDF: a LaTeX document compiled with pdflatex in a private temporary folder."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from collections.abc import Mapping
from pathlib import Path

from ..errors import ClosedformError


def latex_command() -> list[str] | None:
    """The command that turns ``sheet.tex`` into a PDF here: pdflatex, called directly.

    Not latexmk: it reads rc files (from the working folder, the home folder and the system)
    whose Perl settings such as ``$pdflatex`` would decide what runs. pdflatex runs with
    shell escape off whatever texmf.cnf or the environment says; the reruns it needs for
    cross-references are done here.
    """
    if shutil.which("pdflatex"):
        return ["pdflatex", "-no-shell-escape", "-interaction=nonstopmode", "-halt-on-error"]
    return None


def require_latex() -> list[str]:
    """The LaTeX command, or a ClosedformError (exit 1) naming the tool that is missing."""
    command = latex_command()
    if command is None:
        raise ClosedformError("PDF output needs pdflatex on the PATH, and it was not found; "
                              "install a TeX distribution, or leave pdf out of --format")
    return command


#: The fixed name every document is compiled under (the caller renames the PDF it gets back):
#: no part of a case file's name ever reaches the LaTeX command line.
LATEX_JOB = "sheet"
_SAFE_FILE = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")
LATEX_RUNS = 3


def compile_pdf(tex: str, files: Mapping[str, bytes] | None = None, name: str = "sheet",
                timeout: float = 600) -> bytes:
    """Compile a LaTeX document (with its figure files) in a private temporary folder.

    The document is written as ``sheet.tex`` whatever ``name`` is (``name`` only labels
    messages), the command is a list run without a shell, and the figure files must have
    plain names (letters, digits, ``.``, ``_``, ``-``, not starting with ``-``). Dates and
    document ids in the PDF are fixed (SOURCE_DATE_EPOCH), so the same sheet gives the same
    PDF on a given TeX installation.
    """
    command = require_latex()
    for file_name in files or {}:
        if not _SAFE_FILE.fullmatch(file_name) or ".." in file_name:
            raise ClosedformError(f"internal: the LaTeX input file name {file_name!r} is not "
                                  "a plain file name")
    environment = dict(os.environ, SOURCE_DATE_EPOCH="0", FORCE_SOURCE_DATE="1",
                       openout_any="p", openin_any="a", shell_escape="f")
    with tempfile.TemporaryDirectory(prefix="closedform-latex-") as folder:
        root = Path(folder)
        for file_name, content in (files or {}).items():
            (root / file_name).write_bytes(content)
        (root / f"{LATEX_JOB}.tex").write_text(tex, encoding="utf-8")
        log_path = root / f"{LATEX_JOB}.log"
        for _ in range(LATEX_RUNS):
            try:
                finished = subprocess.run([*command, f"{LATEX_JOB}.tex"], cwd=root,
                                          env=environment, stdin=subprocess.DEVNULL,
                                          capture_output=True, timeout=timeout, check=False,
                                          shell=False)
            except subprocess.TimeoutExpired:
                raise ClosedformError(f"LaTeX did not finish within {timeout:.0f} s") from None
            if finished.returncode != 0:
                raise ClosedformError("LaTeX could not compile the sheet: "
                                      + _latex_error(log_path))
            log = log_path.read_text(encoding="utf-8", errors="replace")
            if "Rerun to get" not in log and "Label(s) may have changed" not in log:
                break
        pdf = root / f"{LATEX_JOB}.pdf"
        if not pdf.exists():
            raise ClosedformError("LaTeX produced no PDF: " + _latex_error(log_path))
        return pdf.read_bytes()


def _latex_error(log_path: Path) -> str:
    try:
        lines = log_path.read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError:
        return "no log was written"
    for i, line in enumerate(lines):
        if line.startswith("!"):
            return " ".join(part.strip() for part in lines[i:i + 3] if part.strip())
    return "see the LaTeX log (no error line found)"


