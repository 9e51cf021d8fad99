"""What every check shares: ``Check`` and its outcome, the working precisions and
limits, and the small helpers for numbers (exact values to mpmath, short printing)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import mpmath
import sympy

T = sympy.Symbol("t", real=True)

EXACT_DIGITS = 60                  # numeric fallback for exact pieces
EXACT_TOLERANCE = mpmath.mpf("1e-40")
FLOAT_DIGITS = 30                  # pieces carrying 30-significant-digit coefficients
FLOAT_TOLERANCE = mpmath.mpf("1e-20")
INTEGRATION_DIGITS = 40            # the independent integration (≥ 25 asked)
INTEGRATION_TOLERANCE = mpmath.mpf("1e-12")
AREA_DIGITS = 40
AREA_TOLERANCE = mpmath.mpf("1e-20")
SAMPLES = 64                       # comparison points of the integration, at least
POINT_FRACTIONS = ("0.07", "0.23", "0.41", "0.59", "0.77", "0.93")
GAUSS_DEGREE = 3                   # mpmath's Gauss–Legendre degree 3: 12 nodes
STEP_LIMIT = 20_000                # integration steps per interval, at most
DRAWS = 3                          # random substitutions for symbols without a value
SEED = 1729
SIMPLIFY_OPS_LIMIT = 800           # larger symbolic expressions go straight to numbers
TINY = mpmath.mpf("1e-300")


@dataclass(frozen=True)
class Check:
    """One independent check: its name, whether it passed, and the figure behind it.

    ``inconclusive`` marks a check that could not reach its precision or finish its work
    (it says why in ``detail``): it is not passed — a result that cannot be established is
    not verified — but it is told apart from a check that found something wrong.
    """

    name: str
    passed: bool
    detail: str
    inconclusive: bool = False

    @property
    def outcome(self) -> str:
        """"passed", "failed" (something was found wrong) or "inconclusive"."""
        if self.passed:
            return "passed"
        return "inconclusive" if self.inconclusive else "failed"

# ----------------------------------------------------------------------------- numbers


def substitute(value: sympy.Expr | None, values: Mapping) -> sympy.Expr | None:
    if value is None or not values:
        return value
    return sympy.sympify(value).subs(values)


def is_zero(value: sympy.Expr) -> bool:
    return bool(sympy.sympify(value).is_zero)


def to_mpf(value: sympy.Expr, values: Mapping | None = None, dps: int = EXACT_DIGITS) -> mpmath.mpf:
    """A real number at ``dps`` digits (raises if symbols are left or it is not real)."""
    key = frozenset(values.items()) if values else None
    return _mp_cached(sympy.sympify(value), key, dps)


@lru_cache(maxsize=8192)
def _mp_cached(expr: sympy.Expr, values: frozenset | None, dps: int) -> mpmath.mpf:
    if values:
        expr = expr.subs(dict(values))
    if expr.free_symbols:
        raise ValueError(f"no numeric value for {expr} (symbols {sorted(map(str, expr.free_symbols))})")
    number = sympy.N(expr, dps + 5)
    real, imaginary = number.as_real_imag()
    if imaginary != 0 and abs(imaginary) > abs(real) * sympy.Float(10) ** (-dps):
        raise ValueError(f"{expr} is not real")
    with mpmath.workdps(dps + 5):
        return mpmath.mpf(str(real)) if real != 0 else mpmath.mpf(0)


def sum_terms(expr: sympy.Expr) -> tuple[sympy.Expr, ...]:
    return sympy.Add.make_args(sympy.sympify(expr))


def has_float(*expressions: sympy.Expr) -> bool:
    return any(sympy.sympify(e).has(sympy.Float) for e in expressions)


def short(value: sympy.Expr | mpmath.mpf | None) -> str:
    if value is None:
        return "end"
    if isinstance(value, (mpmath.mpf, float, int)):
        return f"{float(value):.6g}"
    value = sympy.sympify(value)
    if value.free_symbols:
        return str(value)
    return f"{float(sympy.N(value, 20)):.6g}"


def figure(value: Any) -> str:
    return mpmath.nstr(value, 2, min_fixed=-1, max_fixed=-1) if value != 0 else "0"

def same_time(a: mpmath.mpf, b: mpmath.mpf, scale: mpmath.mpf) -> bool:
    return abs(a - b) <= mpmath.mpf("1e-30") * max(abs(a), abs(b), scale)


def guard(name: str, function: Callable[[], tuple[bool, str]]) -> Check:
    """A check that cannot be evaluated has failed (and says why)."""
    try:
        passed, detail = function()
    except Exception as error:  # noqa: BLE001 - reported, never swallowed
        return Check(name, False, f"could not be evaluated: {type(error).__name__}: {error}")
    return Check(name, bool(passed), detail)
