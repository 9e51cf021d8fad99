"""Auditing someone else's numbers: the [claims] of a case against our checked derivation.

Every claim gets one verdict, confirmed or refuted, with the claimed value, the computed
value, the relative difference and the tolerance:

* a result named as in the JSON result (``peak``, ``dlf``, ``peak_velocity`` …, see
  :mod:`closedform.claims`) against that result (relative difference to our value; peaks
  as magnitudes);
* a value at a time (``at``) against our pieces evaluated there with mpmath at 30 digits;
* a claimed formula (``response``) on its own interval [from, to] only, by two routes
  listed under its verdict:

  1. **against the equation**: the formula is put in place of our pieces on its interval,
     after our response up to ``from`` (which supplies the state it has to continue from),
     and the window is cut at ``to``; that response gets the very checks our own derivation
     gets, through the same registry (``checks.registry.run_checks``, its ``CLAIM`` families):
     ODE residual on the interval, initial values (``from = 0``) or continuity at ``from``,
     the independent integration of the equation and the energy balance. These checks
     keep the limits they have for our derivation (round-off of 30-digit arithmetic), so
     they pass only for a formula that solves the problem to those limits;
  2. **against our pieces**: the largest deviation from our response at 200 points inside
     the interval, relative to the magnitude of our peak, within the expressions tolerance.

  The verdict is the tolerance's: a formula whose deviation from our verified response is
  within the tolerance is confirmed. Route 1 then either passes too (the formula is exact)
  or fails only at limits far below the tolerance, as a formula with rounded coefficients
  must, and the verdict says so. A deviation beyond the tolerance is refuted, and route 1
  names the condition the formula breaks.

The audit sheet (:func:`render_audit`) lists the verdicts, the checks behind each claimed
formula, and then our derivation sheet as the basis.
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import mpmath
import sympy

from . import quantities, render
from .checks.base import Check
from .claims import (
    Claimable,
    ClaimedPiece,
    ClaimedValue,
    check_claim_names,
    claimable_results,
    claimed_number,
    locate_claim,
    read_response_claims,
    read_tolerances,
    read_value_claims,
)
from .derivation import Derivation, Window
from .errors import CaseError
from .options import add_budgets, add_formats, add_output
from .precision import own_precision
from .response import Piece, t
from .results import Results, real_number

if TYPE_CHECKING:
    from .batch import Finished
    from .case import Case
    from .chain import ChainDerivation
    from .derivation import DerivedResponse

SAMPLES_PER_INTERVAL = 200
AUDIT_FORMATS = ("md", "tex", "pdf", "json")


@dataclass(frozen=True)
class Verdict:
    """The verdict on one claim; ``checks`` are the checks of a claimed formula against the
    equation (empty for numbers)."""

    key: str
    claimed: str
    computed: str
    difference: float | None      # relative
    confirmed: bool
    detail: str = ""
    tolerance: float | None = None
    checks: tuple[Check, ...] = ()
    interval: str = ""
    comparison: str = ""          # a claimed formula against our pieces, in words

    @property
    def word(self) -> str:
        return "confirmed" if self.confirmed else "refuted"

    def line(self) -> str:
        word = "confirmed" if self.confirmed else "REFUTED"
        difference = "—" if self.difference is None else f"{self.difference:.3g}"
        text = (f"{self.key}: claimed {self.claimed}, computed {self.computed}, "
                f"relative difference {difference}: {word}")
        return f"{text} ({self.detail})" if self.detail else text

    def lines(self) -> list[str]:
        """The verdict line, then one indented line per check of a claimed formula."""
        rows = [self.line()]
        for check in self.checks:
            rows.append(f"    against the equation: {check.name}: "
                        + ("passed" if check.passed else f"FAILED ({check.detail})"))
        if self.interval:
            rows.append(f"    against this derivation: {self.comparison}")
        return rows

    def to_dict(self) -> dict[str, Any]:
        result: dict[str, Any] = {"key": self.key, "claimed": self.claimed, "computed": self.computed,
                  "relative_difference": self.difference, "tolerance": self.tolerance,
                  "confirmed": self.confirmed, "verdict": self.word, "detail": self.detail}
        if self.interval:
            result["interval"] = self.interval
            result["comparison"] = self.comparison
            result["checks"] = [{"name": c.name, "passed": c.passed, "detail": c.detail}
                                for c in self.checks]
        return result


@dataclass(frozen=True)
class Audit:
    """The verdicts on every claim of a case, with the derivation they were judged by."""

    derivation: Derivation | ChainDerivation
    verdicts: tuple[Verdict, ...]

    @property
    def confirmed(self) -> int:
        return sum(v.confirmed for v in self.verdicts)

    @property
    def refuted(self) -> int:
        return len(self.verdicts) - self.confirmed

    @property
    def exit_code(self) -> int:
        """0 when every claim is confirmed by a derivation that passed its checks, else 1."""
        return 0 if self.refuted == 0 and self.derivation.passed else 1

    def to_dict(self) -> dict[str, Any]:
        result = self.derivation.to_dict()
        result["claims"] = [v.to_dict() for v in self.verdicts]
        result["claims_summary"] = {"confirmed": self.confirmed, "refuted": self.refuted}
        return result


@dataclass(frozen=True)
class ClaimedResponse:
    """Our response up to a claimed formula's start, then the formula up to its end: a
    :class:`~closedform.derivation.DerivedResponse`, so that the checks our derivation gets
    can be run on it."""

    case: Case
    pieces: tuple[Piece | _FormulaPiece, ...]
    window: Window
    numbers: Results


class _NotExponentialPolynomial:
    """Stands for the local form of a claimed formula that has none: the checks that need
    one (the energy balance) report, as a failed check, why they cannot be evaluated."""

    def numeric(self, *_arguments, **_keywords):
        raise ValueError("the claimed formula is not a sum of terms u^k·e^(σu)·cos|sin(ωu), "
                         "u = t − from, which this check integrates")


@dataclass(frozen=True)
class _FormulaPiece:
    """A claimed formula that is not an exponential polynomial."""

    start: sympy.Expr
    end: sympy.Expr | None
    formula: sympy.Expr
    local: _NotExponentialPolynomial = _NotExponentialPolynomial()
    numeric: None = None

    def expression(self, time: sympy.Symbol = t) -> sympy.Expr:
        return self.formula.subs(t, time)

    def expression_text(self) -> str:
        return str(self.formula)


@own_precision
def audit(derivation: Derivation | ChainDerivation) -> Audit:
    """Verdicts for every claim of the case (raises CaseError for an unusable claim)."""
    from .case import quantity_reader

    case = derivation.case
    claims = case.claims

    def error(key: str, message: str) -> CaseError:
        return CaseError(message, file=case.source, key=key)

    result = derivation.to_dict()
    claimable = claimable_results(result, case.system.response_dimension)
    if not claims or set(claims) == {"tolerance"}:
        names = ", ".join(sorted(set(claimable) | {"response", "at"}))
        raise error("claims", f"no [claims] to audit (expected some of: {names})")
    if not case.is_fully_valued:
        raise error("claims", "claims can be audited only when every symbol has a value")
    check_claim_names(claims, claimable, error)
    if "response" in claims and getattr(derivation, "chain", None) is not None:
        raise error("claims.response", "claimed formulas are not supported for several masses "
                                       "(claim peak_mass_N, peak_stretch_N, … or values at "
                                       "times of the watched mass)")
    tolerances = read_tolerances(claims, error)
    reader = quantity_reader(case)
    values = case.symbol_values()
    until = derivation.window.until
    verdicts: list[Verdict] = []
    for key, raw in claims.items():
        if key in claimable:
            entry = claimable[key]
            claimed = claimed_number(reader, raw, entry.dimension, f"claims.{key}", values)
            verdicts.append(_number_verdict(entry, claimed, tolerances.numbers))
    if "at" in claims:
        claimed_values = read_value_claims(case, reader, claims["at"], until, error)
        ours = _compiled(derivation.pieces, values)
        verdicts.extend(_value_verdict(case, item, ours, values, tolerances.numbers)
                        for item in claimed_values)
    if "response" in claims and getattr(derivation, "plastic", None) is not None:
        raise error("claims.response", "a claimed formula cannot be audited for a yielding "
                                       "spring (its equation changes at every event); claim "
                                       "values instead: at = [...], ductility, peak, …")
    if "response" in claims:
        if not isinstance(derivation, Derivation):    # several masses: refused above
            raise error("claims.response", "claimed formulas are not supported for several "
                                           "masses")
        pieces = read_response_claims(case, reader, claims["response"], until, t, error)
        verdicts.extend(_response_verdict(derivation, piece, tolerances.expressions)
                        for piece in pieces)
    return Audit(derivation, tuple(verdicts))


def _unit_text(dimension) -> str:
    if dimension is None:
        return " (SI)"
    unit = quantities.si_unit_text(dimension)
    return "" if unit == "1" else f" {unit}"


def _number_verdict(entry: Claimable, claimed: float, tolerance) -> Verdict:
    unit = _unit_text(entry.dimension)
    value = entry.value
    if entry.magnitude:
        claimed = abs(claimed)
        value = None if value is None else abs(value)
    if value is None:
        return Verdict(entry.name, f"{claimed:.6g}{unit}", "not defined for this case", None,
                       False, "nothing to compare with", float(tolerance))
    difference = abs(claimed - value) / max(abs(value), 1e-300)
    confirmed = difference <= float(tolerance)
    detail = f"tolerance {float(tolerance):.3g}" + (f"; {entry.note}" if entry.note else "")
    return Verdict(entry.name, f"{claimed:.6g}{unit}", f"{value:.6g}{unit}", difference,
                   confirmed, detail, float(tolerance))


def _value_verdict(case, item: ClaimedValue, ours, values, tolerance) -> Verdict:
    unit = _unit_text(case.system.response_dimension)
    with mpmath.workdps(30):
        time = real_number(item.time, values)
        claimed = real_number(item.value, values)
        computed = _our_value(ours, time)
        difference = abs(claimed - computed) / max(abs(computed), mpmath.mpf("1e-300"))
    difference = float(difference)
    return Verdict(f"{item.key} (t = {float(time):.6g} s)", f"{float(claimed):.6g}{unit}",
                   f"{float(computed):.6g}{unit}", difference, difference <= float(tolerance),
                   f"tolerance {float(tolerance):.3g}; our pieces evaluated at 30 digits",
                   float(tolerance))


def claimed_response(derivation: Derivation, piece: ClaimedPiece) -> ClaimedResponse:
    """Our pieces before the claim's start (the last one cut there), then the claimed piece,
    in a window that ends where the claim ends."""
    values = derivation.case.symbol_values()
    until = derivation.window.until
    start = piece.start
    end = piece.end if piece.end is not None else until
    low = real_number(start, values)
    prefix = []
    for ours in derivation.pieces:
        if not real_number(ours.start, values) < low:
            break
        ours_end = ours.end if ours.end is not None else until
        if ours.end is None or real_number(ours_end, values) >= low:
            ours = replace(ours, end=start)
        prefix.append(ours)
    local = piece.local
    claimed: Piece | _FormulaPiece
    if local is not None:
        claimed = Piece(start, end, local)
    else:
        claimed = _FormulaPiece(start, end, piece.formula.subs(values))
    return ClaimedResponse(derivation.case, tuple(prefix) + (claimed,),
                           Window(end, "the end of the claimed formula"), derivation.numbers)


def claim_checks(response: DerivedResponse) -> tuple[Check, ...]:
    """The checks of our own derivation that apply to a claimed response (the registry's
    ``CLAIM`` families: the verification, then the energy balance)."""
    from .checks.registry import CLAIM, run_checks

    return run_checks(response, CLAIM)


def _response_verdict(derivation: Derivation, piece: ClaimedPiece, tolerance) -> Verdict:
    values = derivation.case.symbol_values()
    until = derivation.window.until
    checks = claim_checks(claimed_response(derivation, piece))
    failed = [c for c in checks if not c.passed]
    ours = _compiled(derivation.pieces, values)
    peak = derivation.numbers.peak
    scale = mpmath.mpf(abs(peak.value)) if peak and peak.value else mpmath.mpf(1)
    worst, where = mpmath.mpf(0), None
    with mpmath.workdps(30):
        start = real_number(piece.start, values)
        end = real_number(piece.end if piece.end is not None else until, values)
        claimed = sympy.lambdify(t, piece.formula.subs(values), "mpmath")
        for k in range(1, SAMPLES_PER_INTERVAL):
            time = start + (end - start) * k / SAMPLES_PER_INTERVAL
            deviation = abs(mpmath.mpf(claimed(time)) - _our_value(ours, time))
            if where is None or deviation > worst:
                worst, where = deviation, time
    assert where is not None        # set at the first of the samples
    relative = float(worst / scale)
    within = relative <= float(tolerance)
    interval = f"[{float(start):.6g}, {float(end):.6g}] s"
    route_1 = (f"all {len(checks)} checks against the equation passed" if not failed else
               f"{len(failed)} of {len(checks)} checks against the equation FAILED"
               + (" at this derivation's own limits (expected of rounded coefficients)"
                  if within else "") + ": "
               + "; ".join(c.name for c in failed[:3]) + ("; …" if len(failed) > 3 else ""))
    route_2 = (f"largest deviation from this derivation {relative:.3g} of the peak at "
               f"t = {float(where):.6g} s{'' if within else ' (beyond the tolerance)'}")
    return Verdict(f"{piece.key} on {interval}", f"x = {piece.text}",
                   f"this derivation's response on {interval}", relative,
                   within,
                   f"tolerance {float(tolerance):.3g}; {route_1}; {route_2}",
                   float(tolerance), checks, interval, route_2)


def _compiled(pieces, values) -> list[tuple]:
    return [(real_number(p.start, values), real_number(p.end, values) if p.end is not None
             else mpmath.inf, sympy.lambdify(t, p.expression(t).subs(values), "mpmath"))
            for p in pieces]


def _our_value(ours, time):
    """Our response at ``time`` (right-continuous; the last piece at the window's end)."""
    for low, high, function in ours:
        if low <= time < high:
            return mpmath.mpf(function(time))
    return mpmath.mpf(ours[-1][2](time))


# ----------------------------------------------------------------------------- sheets


def _sheet_context(result: Audit, target: str) -> dict[str, Any]:
    from . import __version__

    derivation = result.derivation
    case = derivation.case

    def figure(value: float | None) -> Any:
        shown = render.number(value, 3)
        return None if shown is None else render.inline(shown)

    claims = []
    for number, verdict in enumerate(result.verdicts, start=1):
        claims.append({
            "number": number, "key": verdict.key, "claimed": verdict.claimed,
            "computed": verdict.computed, "difference": figure(verdict.difference),
            "tolerance": figure(verdict.tolerance), "confirmed": verdict.confirmed,
            "verdict": "confirmed" if verdict.confirmed else "REFUTED",
            "detail": verdict.detail, "interval": verdict.interval,
            "checks": [{"name": c.name, "passed": c.passed, "detail": c.detail}
                       for c in verdict.checks]})
    return {"title": case.title, "reference": case.reference or "—",
            "case_file": Path(case.source).name, "sha256": case.sha256 or "—", "version": __version__,
            "claims": claims, "confirmed": result.confirmed, "refuted": result.refuted,
            "count": len(result.verdicts), "derivation_passed": derivation.passed,
            "caution": render.CAUTION.replace("This sheet supports", "This audit supports")}


def render_claims(result: Audit, target: str, *, level: int = 3, numbered: str = "1.",
                  latex_heading: str = "subsection") -> str:
    """The verdicts and the checks behind each claimed formula, as a Markdown or LaTeX
    fragment: the core of the audit sheet, also shown for each case of an appendix.
    ``numbered`` prefixes the two headings ("1." gives 1.1, 1.2; "" leaves them unnumbered);
    ``level`` is their Markdown heading level, ``latex_heading`` their LaTeX command."""
    context = _sheet_context(result, target)
    prefix = (lambda n: f"{numbered}{n} ") if numbered else (lambda n: "")
    context.update({"h3": render.Math("#" * level),
                    "verdicts_heading": f"{prefix(1)}Verdicts on the claims",
                    "formulas_heading": f"{prefix(2)}Claimed formulas against the equation",
                    "subsection": render.Math(latex_heading + ("" if numbered else "*"))})
    return render.flavour(target).render("audit_claims", context)


def render_audit_sheet(result: Audit, target: str, stem: str | None = None) -> str:
    """The audit sheet in the flavour called ``target``: the verdicts, then our derivation
    sheet as its basis (section 2)."""
    flavour = render.flavour(target)
    context = _sheet_context(result, flavour.name)
    basis = render.render_sheet(result.derivation, flavour, stem=stem, section=2, level=2,
                                standalone=False)
    return flavour.render("audit", context | {
        "basis": render.Math(basis), "preamble": render.Math(render.latex_preamble()),
        "fragment": render.Math(render_claims(result, flavour.name))})


def render_audit_markdown(result: Audit, stem: str | None = None) -> str:
    return render_audit_sheet(result, render.MARKDOWN.name, stem)


def render_audit_latex(result: Audit, stem: str | None = None) -> str:
    return render_audit_sheet(result, render.LATEX.name, stem)


class AuditDocument(render.Document):
    """The audit sheet as a document for the writers of the output formats
    (``STEM-audit.md`` / ``.tex`` / ``.pdf`` / ``.json``, the basis sheet's figures)."""

    kind = "audit sheet"

    def __init__(self, result: Audit, stem: str) -> None:
        super().__init__(f"{stem}-audit")
        self.result, self.stem = result, stem

    def render_text(self, flavour: render.Flavour) -> str:
        return render_audit_sheet(self.result, flavour.name, self.stem)

    def render_figures(self, suffix: str) -> dict[str, bytes]:
        return render.figure_files(self.result.derivation, self.stem, suffix)

    def json(self) -> str:
        return json.dumps(self.result.to_dict(), indent=2) + "\n"


def render_audit(result: Audit, formats, stem: str) -> dict[str, str | bytes]:
    """File name → content of the audit sheet in every requested format (nothing written):
    ``STEM-audit.md`` / ``.tex`` / ``.pdf`` / ``.json``, with the basis sheet's figures."""
    return render.write_files(AuditDocument(result, stem), list(formats))


# ----------------------------------------------------------------------------- command line


@dataclass(frozen=True)
class AuditSheet:
    """The finisher of ``check`` (see :mod:`closedform.batch`): the audit of a derived case,
    its sheet in ``formats`` and, as the product, what ``check`` prints on standard output
    (the JSON result with its claims when ``as_json``, else the verdicts)."""

    formats: tuple[str, ...]
    as_json: bool
    prints_sheet = True     # its sheet prints the equations: they are re-read

    def __call__(self, derivation: Derivation | ChainDerivation, path: str) -> Finished:
        from .batch import Finished

        try:
            result = audit(derivation)
        except CaseError as error:
            raise locate_claim(error, path) from None
        case = derivation.case
        contents = render_audit(result, self.formats, Path(case.source).stem or "case") \
            if self.formats else {}
        if self.as_json:
            printed = json.dumps(result.to_dict(), indent=2) + "\n"
        else:
            rows = [] if derivation.passed else [
                f"{case.source}: our own derivation FAILED its checks; the audit below "
                "cannot be relied on"]
            rows.extend(row for verdict in result.verdicts for row in verdict.lines())
            rows.append(f"{result.confirmed} confirmed, {result.refuted} refuted")
            printed = "".join(row + "\n" for row in rows)
        return Finished(f"{result.confirmed} confirmed, {result.refuted} refuted",
                        result.exit_code, contents, product=printed)


def register(commands) -> None:
    check = commands.add_parser("check", help="audit the [claims] of a case against a checked "
                                              "derivation")
    check.add_argument("case", type=Path, help="the case file with a [claims] table")
    check.add_argument("--json", dest="json_target", metavar="-",
                       help="print the JSON result with its claims on standard output ('-')")
    add_output(check, metavar="DIR",
               help="folder for the audit sheet (STEM-audit.md, .tex, .pdf, .json)")
    add_formats(check, default="md,json",
                help=f"comma-separated formats of the audit sheet ({', '.join(AUDIT_FORMATS)}); "
                     "default md,json")
    add_budgets(check)
    check.set_defaults(run=run_check)


def run_check(arguments: argparse.Namespace) -> int:
    """Audit one case through the batch worker, in a worker process of its own under the
    memory budget; an unusable case or claim is one located line (exit 2)."""
    from .batch import CaseTask, run_cases
    from .cli import usable_output_folder, write_atomically

    if arguments.json_target not in (None, "-"):
        raise CaseError("--json takes '-' (standard output)", file="--json")
    formats = tuple(arguments.formats)
    if arguments.output is not None:
        usable_output_folder(arguments.output)
    render.require_tools(formats)     # before any work: name a missing tool
    task = CaseTask(str(arguments.case), arguments.time_budget,
                    AuditSheet(formats, arguments.json_target == "-"))
    (outcome,) = run_cases([task], jobs=1, progress=False,
                           memory_budget=arguments.memory_budget)
    if outcome.stage != "done":
        print(outcome.message, file=sys.stderr)
        return outcome.exit_code
    sys.stdout.write(outcome.product)
    if outcome.contents:
        written = write_atomically(arguments.output, outcome.contents)
        if arguments.json_target is None:
            print(f"wrote {', '.join(p.name for p in written if '-audit.' in p.name)} in "
                  f"{arguments.output}")
    return outcome.exit_code
