"""Section: the sheet's heading, status, the checks and their verdicts, the warnings."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from .. import __version__
from .escaping import with_subscripts
from .layout import slug

if TYPE_CHECKING:
    from .context import Sheet


def status_context(sheet: Sheet) -> dict[str, Any]:
    derivation, case, section = sheet.derivation, sheet.case, sheet.section
    failed = [c for c in derivation.checks if not c.passed]
    return {
        "target": sheet.flavour.name,
        "prefix": f"{section}." if section else "",
        "title_number": f"{section}. " if section else "",
        "suffix": "" if section else ".",
        "title_prefix": "" if derivation.passed else "FAILED — do not use: ",
        "title": case.title,
        "reference": sheet.flavour.unbroken(case.reference) if case.reference else None,
        "case_file": Path(case.source).name,
        "sha256": case.sha256 or None,
        "version": __version__,
        "status": derivation.status,
        "passed": derivation.passed,
        "failed": [{"name": c.name, "detail": with_subscripts(c.detail, sheet.escape),
                    "outcome": c.outcome} for c in failed],
        "inconclusive_count": sum(1 for c in failed if c.outcome == "inconclusive"),
        "check_count": len(derivation.checks),
        "checks": [{"name": c.name, "passed": c.passed,
                    "detail": with_subscripts(c.detail, sheet.escape), "outcome": c.outcome}
                   for c in derivation.checks],
        "section": section,
        "label": slug(sheet.stem),
        "warnings": [w.removeprefix(f"{case.source}: ") for w in derivation.warnings],
        "paper": case.report.paper,
    }
