"""Independent check of every reported extreme (peak, peak velocity, support reaction, …).

The search for the extremes (results.py) and this check share nothing but the pieces: the
pieces are read again by the verification's own parser (checks.long.Parser) into complex
exponential terms, and the quantity behind each JSON name is rebuilt here from the model's
equation (spring force k·x, support reaction k·x + c·x′, current C·v′, …), never taken from
the engine's definitions. For each reported extreme (signed value P at time t*) the check
establishes three things:

1. **the value**: the quantity at t*, evaluated at PARSE_DIGITS digits from the parsed terms,
   equals P (relative VALUE_TOLERANCE);
2. **the time**: t* is the end of an interval, or the derivative of the quantity vanishes
   there (|q′(t*)|·τ ≤ VALUE_TOLERANCE·|P|, τ the fastest time scale of the piece);
3. **nothing larger**: |q(t)| ≤ |P|·(1 + MAX_TOLERANCE) on every piece, closed at both
   ends (one-sided values at load steps), proved by enclosure rather than sampled.

The enclosure (3) is the second-order mean-value form: on a cell [m − r, m + r]

    |q(t)| ≤ |q(m)| + |q′(m)|·r + M₂·r²/2,   M₂ ≥ sup |q″| over the cell,

with M₂ summed term by term from the parsed terms (|C|·e^(Re λ·v)·(|λ|²vᵖ + 2p|λ|vᵖ⁻¹ +
p(p−1)vᵖ⁻²)). Cells whose bound stays below the limit are done; the others are halved
until they are, or until a point above the limit is found (the check fails there), or the
work limit is reached (the check fails: a result that cannot be established is not
verified; the check is marked inconclusive, not wrong). Terms whose exponents lie within 1/(length of the piece) of each other (nearly
equal poles, nearly critical damping) are first combined exactly into
C₁e^(λ₁v) + C₂e^(λ₂v) = (C₁ + C₂)e^(λ₁v) + C₂δ·e^(λ₁v)·(e^(δv) − 1)/δ, δ = λ₂ − λ₁, so that
neither the values nor the bound M₂ (the divided difference bounded through the derivative
in λ along the segment [λ₁, λ₂]) carry the huge cancelling coefficients.

Cells are evaluated in float64, many at once, with the rounding allowed for: phases ω·v are
formed in double-double arithmetic (Dekker's product) so that long windows do not lose the
phase, and each bound carries 8·2⁻⁵³·(8 + |Re λ·v| + p) times the size of the terms added.
The cells of a piece are processed in blocks of BLOCK cells, so memory does not grow with
the length of the window; the rest of a piece is proved at once where the sum of the
terms' magnitudes (no phase) stays below the limit (a decayed tail, or a response whose
peaks all reach the same value).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields
from typing import Any

import mpmath
import numpy
import sympy

from .base import Check, T, substitute
from .long import LOCAL_TIME, PARSE_DIGITS, OutsideStructure, Parser
from .model import equation_of, load_between
from .substitutions import resolved_values

#: Quantities that add the load itself to the weighted response (support displacement:
#: absolute displacement x = u + y).
WITH_LOAD = ("peak_absolute_displacement",)

MAX_TOLERANCE = 1.5e-9        # no |q| above |P|·(1 + this): the reported value is the earliest
                              # within 1e-9 of the maximum, so it may lie up to 1e-9 below it;
                              # the search may stop 2.5e-10 short in a decayed tail
VALUE_TOLERANCE = 1e-12       # q(t*) against P, and the stationarity figure
BLOCK = 1 << 16               # cells evaluated at once
WORK_LIMIT = 400_000_000      # cell evaluations per extreme, at most
DEPTH_LIMIT = 64              # halvings of one cell, at most
ROUNDING = 8 * 2.0 ** -53
INCONCLUSIVE = "could not be established"   # the start of an inconclusive check's detail


# ----------------------------------------------------------------------------- terms


Terms = dict  # {(power, λ): C}: Re Σ C·v^power·e^(λv) in the local time v of a piece


def _poly_from_factors(factors) -> list:
    """Π (s·v + q)^k expanded: coefficients, lowest power first."""
    coefficients = [mpmath.mpf(1)]
    for s, q, k in factors:
        for _ in range(k):
            grown = [c * q for c in coefficients] + [mpmath.mpf(0)]
            for r, c in enumerate(coefficients):
                grown[r + 1] += c * s
            coefficients = grown
    return coefficients


class _Rate(mpmath.mpc):
    """An exponent λ as it keys the terms: equal to, and hashed as, the mpc of the same
    value, its hash worked out once (the terms of every piece and order are keyed by it)."""

    def __hash__(self) -> int:
        kept = self.__dict__.get("hash")
        if kept is None:
            kept = self.__dict__["hash"] = mpmath.mpc.__hash__(self)
        return kept


def _add_parsed(terms: Terms, parsed, factor) -> None:
    _add_expanded(terms, _expanded(parsed), factor)


def _expanded(parsed) -> list[tuple[Any, Any, list[tuple[tuple[int, _Rate], Any]]]]:
    """Each parsed term C·Π(s·v + q)^k·e^(λv + μ) as (C, e^μ, [((power, λ), c)]) with c
    the non-zero coefficients of the expanded product, at the working precision: worked out
    once for a mode that many pieces share."""
    expanded = []
    for term in parsed:
        rate = _Rate(term.rate)
        powers = [((power, rate), c) for power, c in enumerate(_poly_from_factors(term.factors))
                  if c != 0]
        expanded.append((term.coefficient, mpmath.exp(term.offset), powers))
    return expanded


def _add_expanded(terms: Terms, expanded, factor) -> None:
    for coefficient, exponential, powers in expanded:
        base = factor * coefficient * exponential
        for key, c in powers:
            terms[key] = terms.get(key, 0) + base * c


def piece_terms(piece: Any, values: Mapping, parser: Parser,
                modes_read: dict | None = None) -> Terms:
    """The piece in its local time v = t − start, read by the verification's parser.

    ``modes_read`` keeps each distinct mode's parsed and expanded terms for the pieces read
    with the same parser and values (the pieces of one history share their modes)."""
    terms: Terms = {}
    local = piece.local
    modes_read = {} if modes_read is None else modes_read
    with mpmath.workdps(PARSE_DIGITS):
        modes = getattr(local, "terms", None)
        if isinstance(modes, Mapping):
            for mode, coefficient in modes.items():
                # (substitute: no sympy subs where there are no symbol values, the long
                # histories; it cost a quarter of the re-reading of 10 000 pieces)
                c = parser.number(substitute(sympy.sympify(coefficient), values))
                expanded = modes_read.get(mode)
                if expanded is None:
                    expanded = modes_read[mode] = _expanded(parser.terms(
                        substitute(sympy.sympify(mode.expression(LOCAL_TIME)), values)))
                _add_expanded(terms, expanded, c)
        else:
            _add_parsed(terms, parser.terms(
                substitute(sympy.sympify(local.expression(LOCAL_TIME)), values)), 1)
    return {key: c for key, c in terms.items() if c != 0}


def derivative(terms: Terms) -> Terms:
    result: Terms = {}
    with mpmath.workdps(PARSE_DIGITS):
        for (power, rate), c in terms.items():
            if power > 0:
                key = (power - 1, rate)
                result[key] = result.get(key, 0) + c * power
            if rate != 0:
                key = (power, rate)
                result[key] = result.get(key, 0) + c * rate
    return {key: c for key, c in result.items() if c != 0}


def combination(weighted: Sequence[tuple[Any, Terms]]) -> Terms:
    live = [(weight, terms) for weight, terms in weighted if weight != 0]
    if len(live) == 1 and live[0][0] == 1:      # x′, x″ alone: the terms as they are
        return {key: c for key, c in live[0][1].items() if c != 0}
    result: Terms = {}
    with mpmath.workdps(PARSE_DIGITS):
        for weight, terms in live:
            for key, c in terms.items():
                result[key] = result.get(key, 0) + weight * c
    return {key: c for key, c in result.items() if c != 0}


def value_at(terms: Terms, v) -> mpmath.mpf:
    with mpmath.workdps(PARSE_DIGITS):
        v = mpmath.mpf(v)
        return mpmath.re(mpmath.fsum(c * v**power * mpmath.exp(rate * v)
                                     for (power, rate), c in terms.items()))


def fastest_rate(terms: Terms) -> float:
    return max([float(abs(rate)) for _power, rate in terms] + [0.0])


# ----------------------------------------------------------------------------- the quantities


def quantity_weights(case) -> dict[str, tuple]:
    """JSON name → weights (w₀, w₁, w₂) of x, x′, x″, from the model's own equation."""
    system = case.system
    equation = equation_of(system)
    values = resolved_values(case)

    def number(expr):
        return mpmath.mpf(str(sympy.N(sympy.sympify(expr).subs(values), PARSE_DIGITS)))

    with mpmath.workdps(PARSE_DIGITS):
        one, zero = mpmath.mpf(1), mpmath.mpf(0)
        weights: dict[str, tuple] = {"peak": (one,)}
        model = system.model
        if model in ("spring-mass-damper", "base-excitation"):
            m, c, k = (number(a) for a in equation.coefficients)
            prefix = "peak_relative_" if model == "base-excitation" else "peak_"
            weights[f"{prefix}velocity"] = (zero, one)
            weights[f"{prefix}acceleration"] = (zero, zero, one)
            weights["peak_spring_force"] = (k,)
            weights["peak_support_reaction"] = (k, c)
            if model == "base-excitation":    # u″ + a_g = −(k·u + c·u′)/m from the equation
                weights["peak_absolute_acceleration"] = (-k / m, -c / m)
                if system.input == "support-displacement":
                    weights["peak_absolute_displacement"] = (one,)      # u + y
        elif model == "series-rlc":
            weights["peak_current"] = (zero, number(system.parameters["capacitance"]))
            weights["peak_capacitor_voltage"] = (one,)
        elif model == "first-order":
            weights["peak_rate"] = (zero, one)
        else:
            weights["peak_derivative"] = (zero, one)
            weights["peak_second_derivative"] = (zero, zero, one)
    return weights


# ----------------------------------------------------------------------------- float enclosure


@dataclass
class _Prepared:
    """Float arrays of a piece's quantity: plain terms C·vᵖ·e^(λv) and combined pairs
    D·vᵖ·e^(λv)·(e^(δv) − 1)/δ."""

    c: numpy.ndarray
    p: numpy.ndarray
    sigma: numpy.ndarray
    omega_hi: numpy.ndarray
    omega_lo: numpy.ndarray
    d: numpy.ndarray        # pair coefficient C₂δ (0 for plain terms)
    delta: numpy.ndarray    # δ = λ₂ − λ₁ (0 for plain terms)
    top_abs: numpy.ndarray  # max(|λ₁|, |λ₂|) for the bound
    top_sigma: numpy.ndarray
    pair: numpy.ndarray     # bool


def _split(value) -> tuple[float, float]:
    hi = float(value)
    return hi, float(value - mpmath.mpf(hi))


@dataclass(frozen=True)
class _Plan:
    """How prepare arranges the terms of a set of keys on a piece of a given length: the
    keys in order, which are combined in pairs, and every array that depends on the
    exponents alone (the pieces of one history share their keys, and mostly their length)."""

    keys: tuple                    # the keys in prepare's order, a pair's partner after it
    partners: tuple                # per row: the index in keys of the partner, or None
    deltas: tuple                  # per row: δ = λ₂ − λ₁ (mpmath), 0 for a plain term
    arrays: dict


_PLANS: dict[tuple, _Plan] = {}
_PLAN_LIMIT = 512


def _plan(keys: tuple, length) -> _Plan:
    items = sorted(keys, key=lambda key: (key[0], float(mpmath.re(key[1])),
                                          float(mpmath.im(key[1]))))
    used = [False] * len(items)
    order, partners, deltas, rows = [], [], [], []
    for i, (power, rate) in enumerate(items):
        if used[i]:
            continue
        used[i] = True
        partner = None
        for j in range(i + 1, len(items)):
            p2, rate2 = items[j]
            if not used[j] and p2 == power and abs(rate2 - rate) * length < 1:
                partner = j
                break
        order.append(items[i])
        if partner is None:
            partners.append(None)
            deltas.append(0)
            rows.append((power, rate, abs(rate), mpmath.re(rate), False))
            continue
        used[partner] = True
        rate2 = items[partner][1]
        partners.append(len(order))
        order.append(items[partner])
        deltas.append(rate2 - rate)
        rows.append((power, rate, max(abs(rate), abs(rate2)),
                     max(mpmath.re(rate), mpmath.re(rate2)), True))
    split = [_split(mpmath.im(r[1])) for r in rows]
    arrays = {"p": numpy.array([r[0] for r in rows], dtype=float),
              "sigma": numpy.array([float(mpmath.re(r[1])) for r in rows]),
              "omega_hi": numpy.array([hi for hi, _lo in split]),
              "omega_lo": numpy.array([lo for _hi, lo in split]),
              "delta": numpy.array([complex(d) for d in deltas], dtype=complex),
              "top_abs": numpy.array([float(r[2]) for r in rows]),
              "top_sigma": numpy.array([float(r[3]) for r in rows]),
              "pair": numpy.array([r[4] for r in rows], dtype=bool)}
    for array in arrays.values():
        array.flags.writeable = False          # shared by every piece of the plan
    return _Plan(tuple(order), tuple(partners), tuple(deltas), arrays)


def prepare(terms: Terms, length) -> _Prepared:
    """Float arrays of the terms, nearby exponents combined (see the module docstring)."""
    with mpmath.workdps(PARSE_DIGITS):
        signature = (tuple(terms), length)
        plan = _PLANS.get(signature)
        if plan is None:
            if len(_PLANS) >= _PLAN_LIMIT:
                _PLANS.clear()
            plan = _PLANS[signature] = _plan(signature[0], length)
        c, d = [], []
        row = 0
        for partner, delta in zip(plan.partners, plan.deltas):
            first = terms[plan.keys[row]]
            if partner is None:
                c.append(complex(first))
                d.append(0j)
                row += 1
                continue
            second = terms[plan.keys[partner]]
            c.append(complex(first + second))
            d.append(complex(second * delta))
            row += 2
        return _Prepared(numpy.array(c, dtype=complex), d=numpy.array(d, dtype=complex),
                         **plan.arrays)


_SPLITTER = 134217729.0   # 2^27 + 1 (Dekker)


def _two_product(a: numpy.ndarray, b: numpy.ndarray) -> tuple[numpy.ndarray, numpy.ndarray]:
    """a·b = p + e exactly (Dekker's algorithm, no fused multiply-add needed)."""
    p = a * b
    ca = _SPLITTER * a
    a_hi = ca - (ca - a)
    a_lo = a - a_hi
    cb = _SPLITTER * b
    b_hi = cb - (cb - b)
    b_lo = b - b_hi
    e = ((a_hi * b_hi - p) + a_hi * b_lo + a_lo * b_hi) + a_lo * b_lo
    return p, e


def _enclose(prep: _Prepared, m: numpy.ndarray, r: numpy.ndarray):
    """|q(m)|, the bound of |q| on [m − r, m + r], and the rounding margin, per cell.

    The terms are one piece's (1-D arrays, shared by every cell) or one row per cell
    (2-D arrays from ``_stacked``: each cell on its own piece)."""
    mm = m[:, None]
    c, p_, sigma, omega_hi, omega_lo, d, delta_, top_abs, top_sigma, pair_ = (
        x[None, :] if x.ndim == 1 else x for x in (
            prep.c, prep.p, prep.sigma, prep.omega_hi, prep.omega_lo, prep.d, prep.delta,
            prep.top_abs, prep.top_sigma, prep.pair))
    powers = bool(numpy.any(prep.p))
    pairs = bool(numpy.any(prep.pair))
    growing = bool(numpy.any(prep.sigma)) or (pairs and bool(numpy.any(prep.top_sigma)))
    with numpy.errstate(over="ignore", invalid="ignore", divide="ignore"):
        theta, theta_err = _two_product(omega_hi, mm)
        theta_err += omega_lo * mm
        phase = numpy.exp(1j * theta) * (1 + 1j * theta_err)   # |θ_err| ≤ 1e-16·|θ|: cos ≈ 1
        e = numpy.exp(sigma * mm) * phase if growing else phase
        lam = sigma + 1j * (omega_hi + omega_lo)
        base = c * e
        if powers:
            vp = mm ** p_
            vp1 = numpy.where(p_ > 0, p_ * mm ** numpy.maximum(p_ - 1, 0), 0.0)
            value = base * vp
            slope = base * (vp1 + lam * vp)
        else:
            vp, vp1 = 1.0, 0.0
            value = base
            slope = base * lam
        size_value = numpy.abs(value).sum(axis=1)
        size_slope = numpy.abs(slope).sum(axis=1)
        q = numpy.real(value.sum(axis=1))
        dq = numpy.real(slope.sum(axis=1))
        hi = (m + r)[:, None]
        if growing:
            lo = numpy.maximum(m - r, 0)[:, None]
            grow_plain = numpy.exp(numpy.maximum(sigma * lo, sigma * hi))
        else:
            grow_plain = 1.0
        if powers:
            m2 = (numpy.abs(c) * grow_plain * _second(p_, numpy.abs(lam), hi)).sum(axis=1)
        else:
            m2 = (numpy.abs(c) * numpy.abs(lam) ** 2 * grow_plain).sum(axis=-1) \
                if growing else numpy.broadcast_to(
                    (numpy.abs(c) * numpy.abs(lam) ** 2).sum(axis=-1), m.shape)
        if pairs:
            # pairs: D·vᵖ·e^(λv)·E(v), E = expm1(δv)/δ, E′ = 1 + δE
            dv = delta_ * mm
            small = numpy.abs(dv) < 1e-8
            delta = numpy.where(pair_, delta_, 1.0)
            big_e = numpy.where(small, mm * (1 + dv / 2 + dv * dv / 6), numpy.expm1(dv) / delta)
            pe = d * e
            pair_value = numpy.where(pair_, pe * vp * big_e, 0)
            pair_slope = numpy.where(pair_, pe * ((vp1 + lam * vp) * big_e
                                                  + vp * (1 + delta_ * big_e)), 0)
            q = q + numpy.real(pair_value.sum(axis=1))
            dq = dq + numpy.real(pair_slope.sum(axis=1))
            lo = numpy.maximum(m - r, 0)[:, None]
            grow_top = numpy.exp(numpy.maximum(top_sigma * lo, top_sigma * hi))
            m2 = m2 + numpy.where(pair_, numpy.abs(d) * grow_top
                                  * _second(p_ + 1, top_abs, hi), 0).sum(axis=1)
            size_value = size_value + numpy.abs(pair_value).sum(axis=1)
            size_slope = size_slope + numpy.abs(pair_slope).sum(axis=1)
        size = size_value + r * size_slope
        scale = 8 + numpy.max(p_, axis=-1, initial=0.0)
        if growing:
            scale = scale + numpy.max(numpy.abs(sigma) * mm, axis=1, initial=0.0)
        margin = ROUNDING * scale * size + ROUNDING * (m2 * r * r)
        bound = numpy.abs(q) + numpy.abs(dq) * r + m2 * r * r / 2
    return numpy.abs(q), bound, margin


def _second(p: numpy.ndarray, lam: numpy.ndarray, v: numpy.ndarray) -> numpy.ndarray:
    """sup over [0, v] of |d²/dv² (vᵖ e^(λv))| / e^(Re λ·v), term bound."""
    with numpy.errstate(invalid="ignore", divide="ignore"):
        a = lam * lam * v ** p
        b = numpy.where(p >= 1, 2 * p * lam * v ** numpy.maximum(p - 1, 0), 0.0)
        c = numpy.where(p >= 2, p * (p - 1) * v ** numpy.maximum(p - 2, 0), 0.0)
    return a + b + c


def _envelope(prep: _Prepared, lo, hi):
    """sup of Σ|term| over [lo, hi] (0 ≤ lo ≤ hi): |C|·e^(max Re λ·v)·hiᵖ, and for a combined
    pair |D|·hi^(p+1)·e^(max over the segment [λ₁, λ₂] of Re λ·v) (|E(v)| ≤ v·e^(max(Re δ·v, 0)));
    inf where it overflows. One piece (lo, hi numbers), or stacked pieces (``_stacked``; lo
    and hi columns, one row a piece: one envelope per piece)."""
    with numpy.errstate(over="ignore", invalid="ignore"):
        plain = numpy.abs(prep.c) * numpy.exp(numpy.maximum(prep.sigma * lo, prep.sigma * hi)) \
            * hi ** prep.p
        pair = numpy.where(prep.pair, numpy.abs(prep.d) * hi ** (prep.p + 1) * numpy.exp(
            numpy.maximum(prep.top_sigma * lo, prep.top_sigma * hi)), 0.0)
        total = numpy.sum(plain, axis=-1) + numpy.sum(pair, axis=-1)
    return numpy.where(numpy.isfinite(total), total, numpy.inf)


def _raw_envelope(terms: Terms, length: float) -> float:
    """sup over [0, length] of Σ|C|·vᵖ·e^(Re λ·v) for the terms as read (the triangle
    inequality: a bound of |q| on the whole piece), in double precision; inf if it
    overflows. Cheaper than preparing the piece, and enough for most pieces of a long
    history, whose local free vibration stays well below the peak."""
    total = 0.0
    try:
        for (power, rate), c in terms.items():
            sigma = float(mpmath.re(rate))
            total += float(abs(c)) * length ** power * math.exp(max(0.0, sigma * length))
    except OverflowError:
        return math.inf
    return total if math.isfinite(total) else math.inf


def _stacked(preps: Sequence[_Prepared]) -> _Prepared:
    """Prepared pieces as the rows of 2-D arrays, one row a piece, padded with terms of zero
    coefficient, rate and power (which add nothing to a value, slope, bound or margin)."""
    width = max(len(prep.c) for prep in preps)
    arrays = []
    for field in fields(_Prepared):
        first = getattr(preps[0], field.name)
        stacked = numpy.zeros((len(preps), width), dtype=first.dtype)
        for row, prep in enumerate(preps):
            column = getattr(prep, field.name)
            stacked[row, :len(column)] = column
        arrays.append(stacked)
    return _Prepared(*arrays)


def _cells(prep: _Prepared, length: float) -> tuple[int, float]:
    """(count, width) of the cells enclose_piece covers a piece with: one cell where the
    fastest rate turns through at most 1 over the piece, else cells of 1/rate. Raises
    ArithmeticError or ValueError where that cannot be formed (rates not finite, a piece of
    zero length)."""
    fastest = float(numpy.max(numpy.abs(prep.sigma + 1j * prep.omega_hi)))
    fastest = max(fastest, float(numpy.max(prep.top_abs)))
    width = length if fastest * length <= 1 else 1.0 / fastest
    count = max(1, int(math.ceil(length / width)))
    return count, length / count


def _one_cell(prep: _Prepared, length: float) -> bool:
    """Whether enclose_piece covers the piece with a single cell (where it would raise, it is
    left to enclose_piece, which then raises as it always did)."""
    try:
        return _cells(prep, length)[0] == 1
    except (ArithmeticError, ValueError):
        return False


def settled_at_once(preps: Mapping[int, _Prepared], lengths: Sequence[float], limit: float
                    ) -> dict[int, int]:
    """{piece: cells} for the pieces that enclose_piece would prove with its first look,
    worked out for all of them at once: short pieces (one cell across the piece, as in most
    of a long history) whose envelope or first cell already stays below the limit. Every
    other piece is left to enclose_piece, which then does exactly what it would have done;
    the numbers and the decisions are those of enclose_piece, only batched."""
    chosen = [index for index, prep in preps.items()
              if len(prep.c) and _one_cell(prep, lengths[index])]
    settled: dict[int, int] = {}
    for begin in range(0, len(chosen), BLOCK):
        block = chosen[begin:begin + BLOCK]
        stacked = _stacked([preps[index] for index in block])
        width = numpy.array([lengths[index] for index in block])
        envelope = _envelope(stacked, 0.0, width[:, None])
        at_once = envelope * (1 + 64 * ROUNDING) <= limit
        m = 0.5 * width
        r = width / 2 * (1 + 1e-12)
        value, bound, margin = _enclose(stacked, m, r)
        closed = (numpy.isfinite(bound) & numpy.isfinite(margin) & ~(value - margin > limit)
                  & ~(bound + margin > limit))
        for index, envelope_below, cell_closed in zip(block, at_once, closed):
            if envelope_below:
                settled[index] = 0
            elif cell_closed:
                settled[index] = 1
    return settled


@dataclass(frozen=True)
class Enclosure:
    """What the enclosure of one piece found."""

    proved: bool
    above: tuple[float, float] | None   # (local time, |q|) of a point above the limit
    cells: int
    reason: str = ""


def enclose_piece(prep: _Prepared, length: float, limit: float) -> Enclosure:
    """Prove |q| ≤ limit on [0, length], or find a point above it, or say why not."""
    if len(prep.c) == 0:
        return Enclosure(True, None, 0) if limit >= 0 else Enclosure(False, (0.0, 0.0), 0)
    count, width = _cells(prep, length)
    work = 0
    start = 0
    while start < count:
        if _envelope(prep, start * width, length) * (1 + 64 * ROUNDING) <= limit:
            break          # no term arrangement can exceed the limit on the rest of the piece
        stop = min(count, start + BLOCK)
        index = numpy.arange(start, stop, dtype=float)
        r = numpy.full(len(index), width / 2 * (1 + 1e-12))
        m = (index + 0.5) * width
        depth = 0
        while len(m):
            work += len(m)
            if work > WORK_LIMIT or depth > DEPTH_LIMIT or len(m) > 64 * BLOCK:
                return Enclosure(False, None, work,
                                 f"the enclosure did not close within {work} cells "
                                 f"(halved {depth} times)")
            value, bound, margin = _enclose(prep, m, r)
            if not (numpy.all(numpy.isfinite(bound)) and numpy.all(numpy.isfinite(margin))):
                return Enclosure(False, None, work, "the bound is not finite in double precision "
                                 "(the response overflows the float range)")
            above = value - margin > limit
            if numpy.any(above):
                i = int(numpy.argmax(numpy.where(above, value, -numpy.inf)))
                return Enclosure(False, (float(m[i]), float(value[i])), work)
            open_ = bound + margin > limit
            m, r = m[open_], r[open_]
            if len(m):
                r = r / 2
                m = numpy.concatenate([m - r, m + r])
                r = numpy.concatenate([r, r])
            depth += 1
        start = stop
    return Enclosure(True, None, work)


# ----------------------------------------------------------------------------- the check


def _pieces(derivation, values: Mapping) -> list[tuple[mpmath.mpf, mpmath.mpf, Terms]]:
    parser = Parser(LOCAL_TIME)
    pieces = derivation.pieces
    with mpmath.workdps(PARSE_DIGITS):
        starts = [_number(p.start, values) for p in pieces]
        until = _number(derivation.window.until, values)
    ends = starts[1:] + [until]
    modes_read: dict = {}
    return [(a, b, piece_terms(p, values, parser, modes_read))
            for a, b, p in zip(starts, ends, pieces)]


def _load_terms(case, pieces, values: Mapping) -> list[Terms]:
    """The load on each piece in its local time, from the checks' own load evaluator."""
    parser = Parser(LOCAL_TIME)
    result = []
    with mpmath.workdps(PARSE_DIGITS):
        for start, end, _terms in pieces:
            load = load_between(case, start, end, values)
            terms: Terms = {}
            if load != 0:
                shifted = sympy.sympify(load).subs(T, sympy.Float(mpmath.nstr(start, PARSE_DIGITS),
                                                                  PARSE_DIGITS) + LOCAL_TIME)
                _add_parsed(terms, parser.terms(sympy.expand(shifted)), 1)
            result.append({key: c for key, c in terms.items() if c != 0})
    return result


def _number(value, values: Mapping) -> mpmath.mpf:
    value = sympy.sympify(value).subs(values)
    if value.is_Rational:
        return mpmath.mpf(int(value.p)) / int(value.q)
    return mpmath.mpf(str(sympy.N(value, PARSE_DIGITS)))


def _reported(derivation) -> list[tuple[str, Any]]:
    results = derivation.numbers
    reported = [("peak", results.peak)]
    reported += [(q.name, q.extreme) for q in results.quantities]
    return [(name, extreme) for name, extreme in reported if extreme is not None]


def extreme_checks(derivation) -> list[Check]:
    """One check per reported extreme; never raises (a failure to check is a failed check)."""
    case = derivation.case
    if not case.is_fully_valued:
        return []
    reported = _reported(derivation)
    if not reported:
        return []
    try:
        values = resolved_values(case)
        pieces = _pieces(derivation, values)
        weights = quantity_weights(case)
    except (OutsideStructure, ValueError, ArithmeticError, TypeError) as error:
        return [Check("extremes read again", False,
                      f"the pieces could not be read for the check of the extremes: "
                      f"{type(error).__name__}: {error}")]
    derived = [[terms] for _a, _b, terms in pieces]
    checks = []
    for name, extreme in reported:
        label = "peak" if name == "peak" else name
        if name not in weights:
            checks.append(Check(f"extreme {label}", False, "no independent definition of this "
                                "quantity in the check of the extremes"))
            continue
        w = weights[name]
        for orders in derived:
            while len(orders) < len(w) + 1:
                orders.append(derivative(orders[-1]))
        quantity = [combination(list(zip(w, orders))) for orders in derived]
        slopes = [combination(list(zip(w, orders[1:]))) for orders in derived]
        if name in WITH_LOAD:
            try:
                loads = _load_terms(case, pieces, values)
            except (OutsideStructure, ValueError, ArithmeticError, TypeError) as error:
                checks.append(Check(f"extreme {label}", False, "the load could not be read: "
                                    f"{type(error).__name__}: {error}"))
                continue
            quantity = [combination([(1, q), (1, y)]) for q, y in zip(quantity, loads)]
            slopes = [combination([(1, q), (1, derivative(y))]) for q, y in zip(slopes, loads)]
        checks.append(_check_one(label, extreme, pieces, quantity, slopes))
    return checks


def _check_one(label: str, extreme, pieces, quantity: list[Terms], slopes: list[Terms]) -> Check:
    name = f"extreme {label}"
    try:
        passed, detail = _run(extreme, pieces, quantity, slopes)
    except (ArithmeticError, ValueError, OverflowError) as error:
        return Check(name, False, f"could not be established: {type(error).__name__}: {error}",
                     inconclusive=True)
    return Check(name, passed, detail, inconclusive=detail.startswith(INCONCLUSIVE))


def _run(extreme, pieces, quantity, slopes) -> tuple[bool, str]:
    with mpmath.workdps(PARSE_DIGITS):
        value = mpmath.mpf(extreme.value_mp if extreme.value_mp is not None else extreme.value)
        time = mpmath.mpf(extreme.time_mp if extreme.time_mp is not None else extreme.time)
        size = abs(value)
        if not mpmath.isfinite(value) or not mpmath.isfinite(time):
            return False, f"the reported value {_show(value)} at t = {_show(time)} s is not finite"
        # 1 and 2: value and stationarity at the reported time (either side of a boundary)
        best = None
        window = pieces[-1][1]
        for index, (a, b, _terms) in enumerate(pieces):
            slack = mpmath.mpf(10) ** -25 * max(abs(window), 1)
            if not a - slack <= time <= b + slack:
                continue
            v = min(max(time - a, 0), b - a)
            q = value_at(quantity[index], v)
            mismatch = abs(q - value) / max(size, mpmath.mpf(10) ** -300)
            at_end = v <= slack or b - a - v <= slack
            rate = max(fastest_rate(quantity[index]), 1 / max(b - a, slack))
            stationary = abs(value_at(slopes[index], v)) / rate / max(size, mpmath.mpf(10) ** -300)
            ok = mismatch <= VALUE_TOLERANCE and (at_end or stationary <= VALUE_TOLERANCE)
            figure = (mismatch, at_end, stationary, index)
            if best is None or ok or (not best[0] and mismatch < best[1][0]):
                best = (ok, figure)
            if ok:
                break
        if best is None:
            return False, f"the reported time t = {_show(time)} s lies outside the window"
        ok, (mismatch, at_end, stationary, index) = best
        if not ok:
            if mismatch > VALUE_TOLERANCE:
                return False, (f"the value at the reported time t = {_show(time)} s differs from "
                               f"the reported {_show(value)} by {_show(mismatch)} (relative; "
                               f"limit {VALUE_TOLERANCE:g})")
            return False, (f"the reported time t = {_show(time)} s is neither an interval end nor "
                           f"a stationary point: |q′|·τ/|P| = {_show(stationary)} (limit "
                           f"{VALUE_TOLERANCE:g})")
        where = "an interval end" if at_end else f"a stationary point (|q′|·τ/|P| = {_show(stationary)})"
    # 3: nothing larger anywhere
    limit = float(size) * (1 + MAX_TOLERANCE)
    if not math.isfinite(limit):
        return False, (f"{INCONCLUSIVE}: the enclosure works in double precision and the "
                       f"reported |value| {_show(size)} overflows the float range")
    cells = 0
    lengths = [float(b - a) for a, b, _terms in pieces]
    # Σ|C|·vᵖ·e^(Re λ·v) bounds |q| on the whole piece: where it stays below, nothing to enclose
    enveloped = [length >= 0 and _raw_envelope(terms, length) * (1 + 64 * ROUNDING) <= limit
                 for length, terms in zip(lengths, quantity)]
    preps: dict[int, _Prepared] = {}
    for index, ((a, b, _terms), terms) in enumerate(zip(pieces, quantity)):
        if lengths[index] >= 0 and not enveloped[index]:
            try:
                preps[index] = prepare(terms, b - a)
            except (ArithmeticError, ValueError):
                break              # raised again below, in its turn
    settled = settled_at_once(preps, lengths, limit)
    for index, ((a, b, _terms), terms) in enumerate(zip(pieces, quantity)):
        length = lengths[index]
        if length < 0:
            return False, f"piece at t = {_show(a)} s has a negative length"
        if index in settled:
            cells += settled[index]
            continue
        if enveloped[index]:
            continue
        prep = preps[index] if index in preps else prepare(terms, b - a)
        result = enclose_piece(prep, length, limit)
        cells += result.cells
        if not result.proved:
            if result.above is not None:
                t_above = a + mpmath.mpf(result.above[0])
                exact = value_at(terms, mpmath.mpf(result.above[0]))
                return False, (f"|q| = {_show(abs(exact))} at t = {_show(t_above)} s exceeds the "
                               f"reported {_show(size)} (relative excess "
                               f"{_show((abs(exact) - size) / size)}); the reported extreme is wrong")
            return False, f"{INCONCLUSIVE} on the piece from t = {_show(a)} s: {result.reason}"
    return True, (f"value {_show(value)} at t = {_show(time)} s, {where}; "
                  f"|q| ≤ |P|·(1 + {MAX_TOLERANCE:g}) proved on {len(pieces)} piece(s) by "
                  f"second-order enclosure over {cells} cells (verification's own parse of the "
                  f"pieces; quantity rebuilt from the equation)")


def _show(value) -> str:
    try:
        return f"{float(value):.10g}"
    except (OverflowError, ValueError):
        return mpmath.nstr(value, 10)


# ----------------------------------------------------------------------------- response metrics


METRIC_TOLERANCE = 1e-10      # |x(t) − level| against the response's scale (float times)


def metric_checks(derivation) -> list[Check]:
    """The step-response metrics and level crossings read again: at every reported time the
    response, evaluated from the verification's own parse of the pieces, has the value the
    metric says (a level, 10 %/90 % of the final value, the edge of the 2 % band, the
    overshoot), and the final value is the constant of the last piece with every other term
    decaying. A crossing at a breakpoint where x jumps must have the level between the two
    one-sided values."""
    metrics = getattr(derivation, "metrics", None)
    if metrics is None or (metrics.final_value is None and not metrics.crossings):
        return []
    name = "response metrics read again"
    try:
        values = resolved_values(derivation.case)
        pieces = _pieces(derivation, values)
        with mpmath.workdps(PARSE_DIGITS):
            return [_metric_check(name, metrics, pieces)]
    except (OutsideStructure, ValueError, ArithmeticError, TypeError) as error:
        return [Check(name, False, f"could not be evaluated: {type(error).__name__}: {error}",
                      inconclusive=True)]


def _metric_check(name: str, metrics, pieces) -> Check:
    starts = [a for a, _b, _terms in pieces]
    slopes = [derivative(terms) for _a, _b, terms in pieces]
    peak = max(abs(value_at(terms, 0)) for _a, _b, terms in pieces)

    def sides(time):
        moment = mpmath.mpf(time)
        index = 0
        for i, a in enumerate(starts):
            if a <= moment + mpmath.mpf(10) ** -14 * max(1, abs(moment)):
                index = i
        a, _b, terms = pieces[index]
        v = mpmath.mpf(time) - a
        right = (value_at(terms, v), value_at(slopes[index], v))
        left = None
        if index > 0 and abs(v) <= mpmath.mpf(10) ** -12 * max(1, abs(a)):
            previous = pieces[index - 1]
            left = value_at(previous[2], a - previous[0])
        return right, left

    wanted = []          # (label, time, expected value)
    problems = []
    final = metrics.final_value
    if final is not None:
        last = pieces[-1][2]
        constant = mpmath.re(mpmath.fsum(c for (p, r), c in last.items() if p == 0 and r == 0))
        if abs(constant - final) > METRIC_TOLERANCE * abs(final):
            problems.append(f"final value {final:.10g} but the last piece's constant is "
                            f"{_show(constant)}")
        if any(mpmath.re(r) >= 0 for (p, r), c in last.items() if not (p == 0 and r == 0)):
            problems.append("the last piece keeps a term that does not decay")
        peak = max(peak, abs(final))
        if metrics.rise_time is not None:
            wanted += [("10 % of x_f", metrics.rise_time.start, final / 10),
                       ("90 % of x_f", metrics.rise_time.end, 9 * final / 10)]
        settling = metrics.settling_time
        if settling.value is not None and settling.value > 0:
            wanted.append(("the 2 % band", settling.value, None))
        if metrics.overshoot is not None and metrics.overshoot.time is not None:
            wanted.append(("the overshoot", metrics.overshoot.time,
                           final * (1 + metrics.overshoot.value / 100)))
    for crossing in metrics.crossings:
        wanted += [(f"level {crossing.level:.6g}", time, crossing.level) for time in crossing.times]
    worst = mpmath.mpf(0)
    for label, time, expected in wanted:
        (value, slope), left = sides(time)
        if expected is None:                                  # |x − x_f| = band
            expected = final + (0.02 * abs(final) if value > final else -0.02 * abs(final))
        scale = max(peak, abs(expected))
        allowed = METRIC_TOLERANCE * scale + abs(slope) * abs(time) * 1e-15
        if left is not None and min(left, value) - allowed <= expected <= max(left, value) + allowed:
            continue                                          # across a jump at a breakpoint
        error = abs(value - expected)
        worst = max(worst, error / scale)
        if error > allowed:
            problems.append(f"{label} at t = {time:.10g} s: x = {_show(value)}, expected "
                            f"{expected:.10g}")
    if problems:
        return Check(name, False, "; ".join(problems[:4]))
    return Check(name, True, f"{len(wanted)} reported time(s) give the values they state "
                             f"(largest deviation {float(worst):.1e} of the response's scale, "
                             f"limit {METRIC_TOLERANCE:g}; the verification's own parse of the "
                             "pieces); the final value is the constant of the last piece, every "
                             "other term decaying")
