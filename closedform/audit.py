"""Auditing someone else's numbers: the [claims] of a case against our checked derivation.

Every claim gets a verdict line: claimed value, computed value, relative difference and
confirmed/refuted. A claimed response is checked twice: on its own against the equation
(with the same independent checks as our own derivation) and against our derivation,
reporting the interval and time of the largest deviation.
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import dataclass
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import mpmath
import sympy

from . import quantities
from .case import quantity_reader
from .errors import CaseError
from .expressions import parse_expression
from .response import t
from .results import real_number

NUMBER_TOLERANCE = sympy.Rational(5, 1000)      # 0.5 % for reported numbers
EXPRESSION_TOLERANCE = sympy.Rational(1, 10**6)  # 1e-6 relative for expressions
SAMPLES_PER_INTERVAL = 200


@dataclass(frozen=True)
class Verdict:
    """The verdict on one claim."""

    key: str
    claimed: str
    computed: str
    difference: float | None      # relative
    confirmed: bool
    detail: str = ""

    def line(self) -> str:
        word = "confirmed" if self.confirmed else "REFUTED"
        difference = "—" if self.difference is None else f"{self.difference:.3g}"
        text = (f"{self.key}: claimed {self.claimed}, computed {self.computed}, "
                f"relative difference {difference}: {word}")
        return f"{text} ({self.detail})" if self.detail else text

    def to_dict(self) -> dict[str, Any]:
        return {"key": self.key, "claimed": self.claimed, "computed": self.computed,
                "relative_difference": self.difference, "confirmed": self.confirmed,
                "detail": self.detail}


def _tolerances(claims, error) -> tuple[sympy.Expr, sympy.Expr]:
    tolerance = claims.get("tolerance")
    numbers, expressions = NUMBER_TOLERANCE, EXPRESSION_TOLERANCE
    if tolerance is None:
        return numbers, expressions
    if isinstance(tolerance, dict):
        unknown = set(tolerance) - {"numbers", "expressions"}
        if unknown:
            raise error("claims.tolerance", f"unknown key '{sorted(unknown)[0]}' (expected "
                                            "numbers, expressions)")
        if "numbers" in tolerance:
            numbers = _positive_number(tolerance["numbers"], "claims.tolerance.numbers", error)
        if "expressions" in tolerance:
            expressions = _positive_number(tolerance["expressions"],
                                           "claims.tolerance.expressions", error)
        return numbers, expressions
    value = _positive_number(tolerance, "claims.tolerance", error)
    return value, value


def _positive_number(value, key, error) -> sympy.Expr:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
        raise error(key, f"expected a positive relative tolerance such as 0.005, got {value!r}")
    return sympy.Rational(repr(value)) if isinstance(value, float) else sympy.Integer(value)


def audit(derivation) -> list[Verdict]:
    """Verdicts for every claim of the case (raises CaseError for an unusable claim)."""
    case = derivation.case
    claims = case.claims

    def error(key: str, message: str) -> CaseError:
        return CaseError(message, file=case.source, key=key)

    if not claims or set(claims) == {"tolerance"}:
        raise error("claims", "no [claims] to audit (expected peak, peak_time, dlf, static, "
                              "residual or response)")
    if not case.is_fully_valued:
        raise error("claims", "claims can be audited only when every symbol has a value")
    numbers, expressions = _tolerances(claims, error)
    result = derivation.to_dict()
    response = case.system.response_dimension
    verdicts = []
    peak = result.get("peak")
    residual = result.get("residual")
    computed = {
        "peak": (abs(peak["value"]) if peak else None, response, "magnitude of the peak"),
        "peak_time": (peak["time"] if peak else None, quantities.dimension("time"), ""),
        "dlf": (result.get("dlf"), quantities.dimension("dimensionless"), ""),
        "static": (result.get("static"), response, ""),
        "residual": (residual.get("amplitude") if isinstance(residual, dict) else None,
                     response, "free-vibration amplitude after the last load"),
    }
    for key in ("peak", "peak_time", "dlf", "static", "residual"):
        if key not in claims:
            continue
        value, dimension, note = computed[key]
        claimed = _claimed_number(claims[key], dimension, f"claims.{key}", case, error)
        if key == "peak":
            claimed = abs(claimed)
        verdicts.append(_number_verdict(key, claimed, value, numbers, dimension, note))
    if "response" in claims:
        verdicts.extend(_response_verdicts(derivation, claims["response"], expressions, error))
    return verdicts


def _claimed_number(value, dimension, key, case, error) -> float:
    quantity = quantity_reader(case).quantity(value, dimension, key)
    return float(sympy.N(quantity.subs(case.symbol_values()), 30))


def _number_verdict(key, claimed, value, tolerance, dimension, note) -> Verdict:
    unit = quantities.si_unit_text(dimension)
    unit = "" if unit == "1" else f" {unit}"
    if value is None:
        return Verdict(key, f"{claimed:.6g}{unit}", "not defined for this case", None, False,
                       "nothing to compare with")
    scale = max(abs(value), 1e-300)
    difference = abs(claimed - value) / scale
    confirmed = difference <= float(tolerance)
    detail = f"tolerance {float(tolerance):.3g}" + (f"; {note}" if note else "")
    return Verdict(key, f"{claimed:.6g}{unit}", f"{value:.6g}{unit}", difference, confirmed, detail)


@dataclass(frozen=True)
class ClaimedPiece:
    """A piece of someone else's response, shaped like ours so the checks can read it."""

    start: sympy.Expr
    end: sympy.Expr | None
    formula: sympy.Expr

    def expression(self, time: sympy.Symbol = t) -> sympy.Expr:
        return self.formula.subs(t, time)


def claimed_pieces(case, raw, error) -> list[ClaimedPiece]:
    if not isinstance(raw, list) or not raw:
        raise error("claims.response", "expected a list of { from, to, expr } pieces")
    names: dict[str, sympy.Expr] = {d.name: d.symbol for d in case.symbols}
    names["t"] = t
    pieces = []
    reader = quantity_reader(case)
    for i, item in enumerate(raw):
        key = f"claims.response[{i}]"
        if not isinstance(item, dict):
            raise error(key, "expected a table { from = …, to = …, expr = … }")
        unknown = set(item) - {"from", "to", "expr"}
        if unknown:
            raise error(f"{key}.{sorted(unknown)[0]}", "unknown key (expected from, to, expr)")
        if not isinstance(item.get("expr"), str):
            raise error(f"{key}.expr", "missing (the response on the interval, a formula in t "
                                       "in seconds and SI units)")
        start = reader.quantity(item.get("from", 0), "time", f"{key}.from")
        end = reader.quantity(item["to"], "time", f"{key}.to") if "to" in item else None
        formula = parse_expression(item["expr"], names=names, key=f"{key}.expr")
        pieces.append(ClaimedPiece(start, end, formula))
    return pieces


def _response_verdicts(derivation, raw, tolerance, error) -> list[Verdict]:
    from .verify import verify

    case = derivation.case
    values = case.symbol_values()
    pieces = claimed_pieces(case, raw, error)
    verdicts = []
    # 1. On its own against the equation: the same independent checks our derivation passed.
    alone = SimpleNamespace(case=case, pieces=tuple(pieces), window=derivation.window,
                            numbers=derivation.numbers, solution=None, model=None, history=None)
    own_checks = verify(alone)
    failed = [c for c in own_checks if not c.passed]
    detail = ("; ".join(f"{c.name}: {c.detail}" for c in failed[:3])
              if failed else f"all {len(own_checks)} checks passed")
    verdicts.append(Verdict("response (on its own)", _count(len(pieces), "piece"),
                            f"{len(failed)} of {len(own_checks)} independent checks failed", None,
                            not failed, detail))
    # 2. Against our derivation, on every claimed interval.
    ours = _compiled(derivation.pieces, values)
    until = derivation.window.until
    peak = derivation.numbers.peak
    scale = mpmath.mpf(abs(peak.value)) if peak and peak.value else mpmath.mpf(1)
    worst = (mpmath.mpf(0), None, None)
    with mpmath.workdps(30):
        for index, piece in enumerate(pieces):
            start = real_number(piece.start, values)
            end = real_number(piece.end if piece.end is not None else until, values)
            claimed = sympy.lambdify(t, piece.formula.subs(values), "mpmath")
            for k in range(1, SAMPLES_PER_INTERVAL):
                time = start + (end - start) * k / SAMPLES_PER_INTERVAL
                our = _our_value(ours, time)
                if our is None:
                    continue
                deviation = abs(mpmath.mpf(claimed(time)) - our)
                if deviation > worst[0]:
                    worst = (deviation, index, time)
    relative = float(worst[0] / scale)
    where = (f"largest deviation {relative:.3g} of the peak at t = {float(worst[2]):.6g} s in "
             f"claimed piece {worst[1] + 1}") if worst[1] is not None else "no deviation"
    verdicts.append(Verdict("response (against this derivation)", _count(len(pieces), "piece"),
                            _count(len(ours), "piece"), relative, relative <= float(tolerance),
                            f"{where}; tolerance {float(tolerance):.3g}"))
    return verdicts


def _count(number: int, noun: str) -> str:
    return f"{number} {noun}" if number == 1 else f"{number} {noun}s"


def _compiled(pieces, values) -> list[tuple]:
    return [(real_number(p.start, values), real_number(p.end, values) if p.end is not None else mpmath.inf,
             sympy.lambdify(t, p.expression(t).subs(values), "mpmath")) for p in pieces]


def _our_value(ours, time):
    for low, high, function in ours:
        if low <= time < high:
            return mpmath.mpf(function(time))
    return None


def register(commands) -> None:
    check = commands.add_parser("check", help="audit the [claims] of a case against a checked "
                                              "derivation")
    check.add_argument("case", type=Path, help="the case file with a [claims] table")
    check.add_argument("--json", dest="json_target", metavar="-",
                       help="print the JSON result with its claims on standard output ('-')")
    check.add_argument("--time-budget", type=float, default=60.0, metavar="SECONDS")
    check.set_defaults(run=run_check)


def run_check(arguments: argparse.Namespace) -> int:
    from .case import load_case, locate
    from .derivation import derive

    if arguments.json_target not in (None, "-"):
        raise CaseError("--json takes '-' (standard output)", file="--json")
    case = load_case(arguments.case)
    try:
        derivation = derive(case, time_budget=arguments.time_budget)
    except CaseError as error:        # raised past loading: name the file and the key's line
        raise locate(error, arguments.case) from None
    verdicts = audit(derivation)
    all_confirmed = all(v.confirmed for v in verdicts)
    if arguments.json_target == "-":
        result = derivation.to_dict()
        result["claims"] = [v.to_dict() for v in verdicts]
        sys.stdout.write(json.dumps(result, indent=2) + "\n")
    else:
        if not derivation.passed:
            print(f"{case.source}: our own derivation FAILED its checks; the audit below "
                  "cannot be relied on")
        for verdict in verdicts:
            print(verdict.line())
        refuted = sum(not v.confirmed for v in verdicts)
        print(f"{len(verdicts) - refuted} confirmed, {refuted} refuted")
    return 0 if all_confirmed and derivation.passed else 1
