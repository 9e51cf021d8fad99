"""Exact integrals of exponential polynomials, for the energy balance of the checks.

A *row* is P(v)·e^{λv} with a polynomial P (coefficients lowest power first) and a rate λ,
or the real part Re(P(v)·e^{λv}) when P or λ is complex. Every piece of a response, its
velocity and every load branch made of polynomials, exponentials, sines and cosines is a
short sum of rows, and so are their products:

    Re(A)·Re(B) = ½ Re(A·B) + ½ Re(A·B̄)        (A, B complex),
    Re(A)·B     = Re(A·B)                      (B real).

The integral of a row over [0, L] is Σ_k p_k·I_k(λ, L) with I_k = ∫₀ᴸ v^k e^{λv} dv, which
is closed: I_k = (L^k e^{λL} − k·I_{k−1})/λ (integration by parts), summed forwards (with
guard digits) where |λL| is above the arithmetic's series reach, and the power series
I_k = L^{k+1} Σ_n (λL)ⁿ / (n!·(n+k+1)) below it, where the forward recursion would lose
digits. So an interval costs a few operations per pair of rows whatever its length in
periods.

The same code runs in two arithmetics: float64 (Python floats and complex numbers, for long
histories, fast) and mpmath at a chosen precision. Each integral also returns the size of
what was added for it, Σ|p_k·I_k|, so that the caller can bound its rounding error.
"""

from __future__ import annotations

import cmath
import contextlib
import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any

import mpmath


@dataclass(frozen=True)
class Arithmetic:
    """How numbers are made and exponentiated, how far the power series is used, the unit
    of rounding, and the guard for the forward recursion."""

    name: str
    number: Callable[[Any], Any]          # an mpmath real or complex number → this arithmetic's
    exp: Callable[[Any], Any]
    series_reach: float
    unit: float                           # relative rounding of one operation
    guard: Callable[[int], Any]           # context manager: extra bits for the recursion

    def is_precise(self) -> bool:
        return self.name != FLOAT64.name


def _float_number(value: Any) -> Any:
    if isinstance(value, mpmath.mpc):
        return complex(float(value.real), float(value.imag))
    return float(value)


def _float_exp(z: Any) -> Any:
    return cmath.exp(z) if isinstance(z, complex) else math.exp(z)


FLOAT64 = Arithmetic("float64", _float_number, _float_exp, 2.0, 2.0 ** -52,
                     lambda bits: contextlib.nullcontext())


def precise(digits: int) -> Arithmetic:
    """mpmath at ``digits`` (the caller sets mpmath's working precision to it)."""
    return Arithmetic(f"{digits} digits", lambda value: +value, mpmath.exp, 0.5,
                      10.0 ** -digits, mpmath.extraprec)


@dataclass(frozen=True)
class Row:
    """P(v)·e^{λv} (``real``) or Re(P(v)·e^{λv}); ``poly`` lowest power first."""

    poly: tuple[Any, ...]
    rate: Any
    real: bool


def canonical(row: Row) -> Row | None:
    """The same function with a complex rate in the upper half-plane, a real row where the
    rate is real (the real part of the polynomial), and None where it vanishes."""
    poly, rate, real = row.poly, row.rate, row.real
    if not real:
        if rate.imag < 0:
            poly, rate = tuple(c.conjugate() for c in poly), rate.conjugate()
        if rate.imag == 0:
            poly, rate, real = tuple(c.real for c in poly), rate.real, True
    while poly and poly[-1] == 0:
        poly = poly[:-1]
    if not poly:
        return None
    return Row(poly, rate, real)


def combined(rows: Iterable[Row]) -> list[Row]:
    """Rows of one rate and kind added together (canonical rows)."""
    groups: dict[tuple, list] = {}
    for row in rows:
        row = canonical(row)
        if row is None:
            continue
        total = groups.setdefault((row.rate, row.real), [])
        for k, c in enumerate(row.poly):
            if k < len(total):
                total[k] += c
            else:
                total.append(c)
    result = []
    for (rate, real), poly in groups.items():
        row = canonical(Row(tuple(poly), rate, real))
        if row is not None:
            result.append(row)
    return result


def derivative(row: Row) -> Row:
    """d/dv of P e^{λv} = (P′ + λP) e^{λv} (and of its real part, the real part)."""
    poly = [row.rate * c for c in row.poly]
    for k in range(1, len(row.poly)):
        poly[k - 1] += k * row.poly[k]
    return Row(tuple(poly), row.rate, row.real)


def _poly_times(p: Sequence, q: Sequence) -> tuple:
    out = [0 * p[0] * q[0]] * (len(p) + len(q) - 1)
    for i, a in enumerate(p):
        for j, b in enumerate(q):
            out[i + j] += a * b
    return tuple(out)


def times(a: Row, b: Row) -> list[Row]:
    """The rows of the product of two rows."""
    if a.real or b.real:
        return [Row(_poly_times(a.poly, b.poly), a.rate + b.rate, a.real and b.real)]
    same = tuple(c / 2 for c in _poly_times(a.poly, b.poly))
    crossed = tuple(c / 2 for c in _poly_times(a.poly, [c.conjugate() for c in b.poly]))
    return [Row(same, a.rate + b.rate, False), Row(crossed, a.rate + b.rate.conjugate(), False)]


def products(left: Sequence[Row], right: Sequence[Row]) -> list[Row]:
    return combined(product for a in left for b in right for product in times(a, b))


def shifted(row: Row, by: Any, arithmetic: Arithmetic) -> Row:
    """The row in w = v − by: P(w + by)·e^{λ·by} e^{λw}."""
    if by == 0:
        return row
    degree = len(row.poly) - 1
    powers = [1]
    for _ in range(degree):
        powers.append(powers[-1] * by)
    factor = arithmetic.exp(row.rate * by)
    poly = tuple(sum(row.poly[k] * math.comb(k, j) * powers[k - j]
                     for k in range(j, degree + 1)) * factor for j in range(degree + 1))
    return Row(poly, row.rate, row.real)


def value(rows: Sequence[Row], v: Any, arithmetic: Arithmetic) -> tuple[Any, Any]:
    """(Σ rows at v, Σ |each row at v|) — the value and the size of what was added."""
    total = size = 0
    for row in rows:
        p = 0
        for c in reversed(row.poly):
            p = p * v + c
        term = p * arithmetic.exp(row.rate * v) if row.rate != 0 else p
        if not row.real:
            term = term.real
        total += term
        size += abs(term)
    return total, size


def power_integrals(rate: Any, length: Any, top: int, arithmetic: Arithmetic) -> list:
    """I_k = ∫₀ᴸ v^k e^{λv} dv for k = 0 … top (λ real or complex)."""
    if rate == 0:
        return [length ** (k + 1) / (k + 1) for k in range(top + 1)]
    z = rate * length
    reach = float(abs(z))
    if reach <= arithmetic.series_reach:
        return _series(z, length, top, reach, arithmetic)
    # the recursion multiplies the error of I_{k−1} by k/|λL|: guard bits for it
    with arithmetic.guard(4 * top + 8):
        grow = arithmetic.exp(z)
        result = [(grow - 1) / rate]
        power = 1
        for k in range(1, top + 1):
            power *= length
            result.append((power * grow - k * result[-1]) / rate)
    return [+r for r in result]


def _series(z: Any, length: Any, top: int, reach: float, arithmetic: Arithmetic) -> list:
    """I_top = L^{top+1} Σ_n zⁿ/(n!·(n+top+1)) for z = λL within the series reach, then
    downwards I_{k−1} = (L^k e^{z} − λ·I_k)/k, which divides the error by k/|z| ≥ 1/…"""
    cutoff = arithmetic.unit / 64
    count, size = 1, 1.0
    while size > cutoff or count <= reach:         # |z|ⁿ/n! falls below the rounding unit
        size *= reach / count
        count += 1
    term, total, growth = z * 0 + 1, 0, 0
    for n in range(count + 1):
        total += term / (n + top + 1)
        growth += term
        term = term * z / (n + 1)
    powers = [length]
    for _ in range(top):
        powers.append(powers[-1] * length)
    result = [total * powers[top]]                  # I_top
    rate = z / length
    for k in range(top, 0, -1):                     # I_{k−1} from I_k: stable for |z| ≲ k
        result.append((powers[k - 1] * growth - rate * result[-1]) / k)
    return result[::-1]


def integral(row: Row, length: Any, arithmetic: Arithmetic) -> tuple[Any, Any]:
    """(∫₀ᴸ row dv, Σ_k |p_k·I_k|): the value and the size of what was added for it (the
    scale of its rounding error)."""
    parts = [c * i for c, i in zip(row.poly, power_integrals(row.rate, length,
                                                             len(row.poly) - 1, arithmetic))]
    total = sum(parts)
    if not row.real:
        total = total.real
    return total, sum(abs(p.real) + abs(p.imag) for p in parts)


def integral_of_sum(rows: Sequence[Row], length: Any, arithmetic: Arithmetic) -> tuple[Any, Any]:
    """(∫₀ᴸ Σ rows dv, the size of what was added)."""
    total = size = 0
    for row in rows:
        v, s = integral(row, length, arithmetic)
        total += v
        size += s
    return total, size
