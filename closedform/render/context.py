"""The context of a sheet: everything a sheet template prints, built section by section.

:func:`sheet_context` sets the case's number style, gathers what every section needs in one
:class:`Sheet` and merges what each section builder of :data:`SECTIONS` returns. A section
builder is a function ``Sheet -> dict`` in the module of its section (:mod:`.status`,
:mod:`.problem`, :mod:`.loads`, :mod:`.transform`, :mod:`.fractions`, :mod:`.pieces`,
:mod:`.results`, :mod:`.figures`, :mod:`.yielding`, :mod:`.member`); a new section is one builder and its template lines.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any

from .. import quantities
from .figures import figures_context
from .flavours import Flavour, flavour
from .fractions import fractions_context
from .layout import coefficient_file_name
from .loads import loads_context
from .member import member_context
from .pieces import pieces_context
from .problem import problem_context
from .recorder import EquationRecorder
from .results import results_context
from .status import status_context
from .transform import transform_context
from .typesetting import REPORT_DIGITS, NumberStyle, number_style
from .units import Units, load_prefer
from .yielding import yielding_context


@dataclass(frozen=True)
class Sheet:
    """One sheet being built: the derivation, the flavour it is written in, the units it is
    shown in, the file stem of its figures and the recorder of its displayed equations."""

    derivation: Any
    flavour: Flavour
    stem: str
    section: int | None
    units: Units
    check: EquationRecorder

    @property
    def case(self):
        return self.derivation.case

    @property
    def model(self):
        return self.derivation.model

    @property
    def escape(self) -> Callable[[str], str]:
        return self.flavour.escape

    @property
    def variable(self) -> str:
        return self.derivation.model.variable

    @cached_property
    def time_dimension(self) -> Any:
        return quantities.dimension("time")

    @property
    def response_dimension(self) -> Any:
        return self.case.system.response_dimension

    @property
    def load_dimension(self) -> Any:
        return self.case.system.load_dimension

    @property
    def load_prefer(self) -> tuple[str, ...]:
        """The ``[report] units`` keys the load is shown in."""
        return load_prefer(self.case.system)

    @property
    def coefficient_file(self) -> str:
        return coefficient_file_name(self.stem)


#: The section builders, in the order their displayed equations are recorded.
SECTIONS: tuple[Callable[[Sheet], dict[str, Any]], ...] = (
    status_context, loads_context, transform_context, fractions_context, pieces_context,
    results_context, problem_context, figures_context, yielding_context, member_context)


def sheet_context(derivation, target: str = "md", *, stem: str | None = None,
                  section: int | None = None) -> dict[str, Any]:
    """Everything a sheet template prints, formatted for ``target`` ("md" or "tex").

    ``stem`` names the figure files, ``section`` numbers the case within an appendix.
    Numbers follow the case's ``[report] numbers`` and ``digits``.
    """
    report = derivation.case.report
    with number_style(NumberStyle(getattr(report, "numbers", "auto"),
                                  getattr(report, "digits", REPORT_DIGITS))):
        case = derivation.case
        sheet = Sheet(derivation, flavour(target), stem or (Path(case.source).stem or "case"),
                      section, Units(case), EquationRecorder(derivation))
        context: dict[str, Any] = {}
        for build in SECTIONS:
            context.update(build(sheet))
        context["printed"] = sheet.check.records
        return context
