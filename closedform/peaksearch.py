"""A complete search for the largest |f| of an exponential polynomial on an interval.

f(u) = Σ_(σ,ω) e^(σu)·Σ_k u^k (A_k cos ωu + B_k sin ωu) on [0, L]. Nothing is sampled and
trusted: the interval is cut into cells no longer than 1/Λ (Λ the largest |σ + iω|), and
every cell is either **excluded** or **resolved** by a bound that holds on the whole cell,
so no stationary point can be missed:

* Taylor form of order K about the cell's middle m, remainder from the next derivative:
  |f^(j)(m + h)| ≤ Σ_(i≤K−j) |f^(i+j)(m)|·r^i/i! + M_(K+1)·r^(K+1−j)/(K+1−j)!  for |h| ≤ r,
  with M_(K+1) ≥ sup |f^(K+1)| on the cell from the group amplitudes
  Σ e^(max σu)·Σ_k u^k·√(A_k² + B_k²) of the (K+1)-th derivative;
* a cell whose bound on |f| is below the largest value found so far (less the reporting
  tolerance) holds no candidate and is dropped;
* a cell where |f′| is bounded away from 0 has no stationary point and is dropped (its ends
  belong to neighbouring cells or are interval ends, which are candidates anyway);
* a cell where |f″| is bounded away from 0 has at most one stationary point (f′ monotone):
  it is a candidate exactly when f′ changes sign between the cell's ends, and that bracket
  is handed to the 30-digit refinement;
* any other cell is halved.

A part of the interval whose envelope (the group amplitudes, no phase) cannot exceed the best
value so far is skipped whole (free vibration that has decayed), so the work is bounded by
the pieces, not by the number of periods in a long window.

Where the terms cancel (nearly equal poles: coefficients 10¹⁶ for a response of order 1)
float64 cannot see f′; such intervals are searched in mpmath with enough digits to keep
DIGITS after the cancellation, and a higher order K (the remainder of a Taylor form of order
24 over a cell of Λr ≤ 1 is below 1/25! of the coefficients' size).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import mpmath
import numpy

BLOCK = 1 << 15                 # cells evaluated at once (float route)
FLOAT_ORDER = 3                 # Taylor order of the float route
PRECISE_ORDER = 24              # Taylor order of the mpmath route (cancelling terms)
CANCELLATION_LIMIT = 1e5        # size/|f| above this: the mpmath route
DEPTH_LIMIT = 80
ROUNDING = 2.0 ** -50           # float64 rounding allowed per unit of term size and phase


@dataclass(frozen=True)
class Found:
    """Candidates of one interval: local times (floats) of its ends and brackets of f′."""

    brackets: list              # (low, high) local times holding exactly one root of f′
    values: list                # float estimates of |f| at the brackets' middles
    precise: bool               # found on the mpmath route (cancelling terms)


def _amplitudes(groups: dict, convert=float) -> list:
    """(σ, [√(A_k² + B_k²)]) per group."""
    rows = []
    for (rate, _frequency), (a, b) in groups.items():
        rows.append((convert(rate), [abs(x) + abs(y) if convert is not float else math.hypot(x, y)
                                     for x, y in zip(a, b)]))
    return rows


def _envelope(amplitudes: list, lo, hi):
    """sup over [lo, hi] (0 ≤ lo ≤ hi) of Σ e^(σu) Σ_k u^k·amp_k, vectorised over lo/hi."""
    total = 0.0
    for rate, amps in amplitudes:
        growth = numpy.exp(numpy.maximum(rate * lo, rate * hi))
        poly = 0.0
        for k, amp in enumerate(amps):
            poly = poly + amp * hi ** k
        total = total + growth * poly
    return total


def search_float(evaluator, groups_all: list, length: float, best: float, tolerance: float,
                 prune: bool = True, locate=None):
    """The float route: brackets of the stationary points that may hold the maximum.

    ``evaluator`` gives f … f^(K) on arrays (results.FloatEvaluator with K + 1 orders);
    ``groups_all`` the groups of f … f^(K+1); ``locate(low, high)`` (optional) gives the float
    roots of f′ in brackets with |f| there and its float error, so that brackets that cannot
    hold the maximum are let go at once. Returns (brackets, estimates, best)."""
    K = FLOAT_ORDER
    remainder = _amplitudes(groups_all[K + 1])
    size_f = _amplitudes(groups_all[0])
    slope_size = _amplitudes(groups_all[1])
    curvature_size = _amplitudes(groups_all[2])
    fastest = 0.0
    for rate, frequency in groups_all[0]:
        fastest = max(fastest, math.hypot(rate, frequency))
    width = length if fastest * length <= 1 else 1.0 / fastest
    count = max(1, int(math.ceil(length / width)))
    width = length / count
    factorials = [math.factorial(i) for i in range(K + 3)]
    brackets, estimates = [], []
    start = 0
    while start < count:
        lo_block = start * width
        if prune and best > 0 and _envelope(size_f, lo_block, length) <= best * (1 + tolerance / 4):
            break                                  # nothing ahead can beat what was found
        stop = min(count, start + BLOCK)
        m = (numpy.arange(start, stop, dtype=float) + 0.5) * width
        r = numpy.full(len(m), width / 2 * (1 + 1e-12))
        depth = 0
        while len(m):
            if depth > DEPTH_LIMIT:
                raise ArithmeticError("the peak search did not resolve a cell in "
                                      f"{DEPTH_LIMIT} halvings")
            with numpy.errstate(over="ignore", invalid="ignore"):
                derivatives = evaluator(m)
                lo, hi = numpy.maximum(m - r, 0.0), m + r
                tail = _envelope(remainder, lo, hi)
                size = _envelope(size_f, lo, hi)
                phase = 8 + fastest * hi
                margin = ROUNDING * phase * size
                slope_margin = ROUNDING * phase * _envelope(slope_size, lo, hi)
                curvature_margin = ROUNDING * phase * _envelope(curvature_size, lo, hi)

                def bound(j, derivatives=derivatives, r=r, tail=tail):
                    total = 0.0
                    for i in range(K + 1 - j):
                        total = total + numpy.abs(derivatives[i + j]) * r ** i / factorials[i]
                    return total + tail * r ** (K + 1 - j) / factorials[K + 1 - j]

                value = numpy.abs(derivatives[0])
                if not numpy.all(numpy.isfinite(value)) or not numpy.all(numpy.isfinite(tail)):
                    raise OverflowError("the response leaves the float range")
                best = max(best, float(numpy.max(value - margin)))
                high = bound(0) + margin
                keep = high >= best * (1 - tolerance) if prune else numpy.ones(len(m), bool)
                keep &= high > 0                   # f ≡ 0 on the cell: nothing to find
                # no root of f′: |f′(m)| exceeds what the rest can take away
                f1 = numpy.abs(derivatives[1])
                rest1 = bound(1) - f1
                no_root = f1 - slope_margin > rest1
                f2 = numpy.abs(derivatives[2])
                rest2 = bound(2) - f2
                monotone = f2 - curvature_margin > rest2
                keep &= ~no_root
                single = keep & monotone
            if numpy.any(single):
                ends_lo, ends_hi = lo[single], hi[single]
                slopes = evaluator(numpy.concatenate([ends_lo, numpy.minimum(ends_hi, length)]))[1]
                n = len(ends_lo)
                near = slope_margin[single]
                change = ((numpy.sign(slopes[:n]) * numpy.sign(slopes[n:]) <= 0)
                          | (numpy.abs(slopes[:n]) <= near) | (numpy.abs(slopes[n:]) <= near))
                low, top = ends_lo[change], numpy.minimum(ends_hi, length)[change]
                estimate = high[single][change]
                if locate is not None and prune and len(low):
                    _roots, found, error = locate(low, top)
                    finite = numpy.isfinite(found) & numpy.isfinite(error)
                    if numpy.any(finite):
                        best = max(best, float(numpy.max((numpy.abs(found) - error)[finite])))
                    estimate = numpy.where(finite, numpy.abs(found) + 4 * error, estimate)
                    wanted = estimate >= best * (1 - tolerance)
                    low, top, estimate = low[wanted], top[wanted], estimate[wanted]
                brackets += [(float(a), float(b)) for a, b in zip(low, top)]
                estimates += [float(e) for e in estimate]
            split = keep & ~monotone
            if numpy.count_nonzero(split) > 32 * BLOCK:
                raise ArithmeticError("the peak search in double precision cannot separate the "
                                      "stationary points (rounding)")
            m, r = m[split], r[split]
            if len(m):
                r = r / 2
                m = numpy.concatenate([m - r, m + r])
                r = numpy.concatenate([r, r])
            depth += 1
        start = stop
        if prune and brackets:           # what the later cells found may rule out earlier ones
            kept = [(b, e) for b, e in zip(brackets, estimates) if e >= best * (1 - tolerance)]
            brackets, estimates = [b for b, _ in kept], [e for _, e in kept]
    return brackets, estimates, best


def search_precise(evaluator, groups_all: list, length, best, tolerance, digits: int):
    """The mpmath route, one cell at a time (intervals whose terms cancel)."""
    K = PRECISE_ORDER
    with mpmath.workdps(digits):
        remainder = _amplitudes(groups_all[K + 1], mpmath.mpf)
        fastest = mpmath.mpf(0)
        for rate, frequency in groups_all[0]:
            fastest = max(fastest, mpmath.hypot(rate, frequency))
        length = mpmath.mpf(length)
        width = length if fastest * length <= 1 else 1 / fastest
        count = max(1, int(mpmath.ceil(length / width)))
        width = length / count
        factorials = [mpmath.factorial(i) for i in range(K + 3)]
        brackets, estimates = [], []
        best = mpmath.mpf(best)
        size = _amplitudes(groups_all[0], mpmath.mpf)
        stack: list = []
        cell = 0
        while stack or cell < count:
            if not stack:          # the next cell, unless nothing ahead can beat the best
                ahead = mpmath.fsum(mpmath.exp(max(rate * cell * width, rate * length))
                                    * mpmath.fsum(a * length ** k for k, a in enumerate(amps))
                                    for rate, amps in size)
                # (a tolerance of 1 or more asks for every stationary point: no pruning)
                if 0 < tolerance < 1 and best > 0 and ahead <= best * (1 + mpmath.mpf(tolerance) / 4):
                    break
                stack.append(((cell + mpmath.mpf(1) / 2) * width, width / 2, 0))
                cell += 1
            m, r, depth = stack.pop()
            if depth > DEPTH_LIMIT:
                # A cell 2^-80 of the cell width wide that the bounds cannot settle holds a
                # multiple root of x′ (x′ = x″ = 0, e.g. where a pulse ends at rest on a
                # turning point). It is an extreme only if x′ changes sign across it; |x|
                # inside differs from its ends by far less than the tolerance either way, and
                # the independent extremes check judges the result.
                a, b = max(m - r, 0), min(m + r, length)
                if evaluator(a)[1] * evaluator(b)[1] <= 0:
                    brackets.append((a, b))
                    estimates.append(float(abs(evaluator(m)[0])))
                continue
            derivatives = evaluator(m)
            hi = m + r
            lo = max(m - r, 0)
            tail = mpmath.mpf(0)
            for rate, amps in remainder:
                tail += mpmath.exp(max(rate * lo, rate * hi)) * mpmath.fsum(
                    a * hi ** k for k, a in enumerate(amps))

            def bound(j, derivatives=derivatives, r=r, tail=tail):
                return mpmath.fsum(abs(derivatives[i + j]) * r ** i / factorials[i]
                                   for i in range(K + 1 - j)) \
                    + tail * r ** (K + 1 - j) / factorials[K + 1 - j]

            value = abs(derivatives[0])
            best = max(best, value)
            top = bound(0)
            if top < best * (1 - tolerance) or top == 0:
                continue
            if abs(derivatives[1]) > bound(1) - abs(derivatives[1]):
                continue
            if abs(derivatives[2]) > bound(2) - abs(derivatives[2]):
                a, b = lo, min(hi, length)
                if evaluator(a)[1] * evaluator(b)[1] <= 0:
                    brackets.append((a, b))
                    estimates.append(float(bound(0)))
                continue
            stack += [(m + r / 2, r / 2, depth + 1), (m - r / 2, r / 2, depth + 1)]
        return brackets, estimates, best
