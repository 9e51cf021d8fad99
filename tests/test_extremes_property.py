"""Property test: the peak of random exponential polynomials against a dense search.

Random sums Σ c·e^(σu)·cos|sin(ωu) with nearly coincident frequencies and rates, long
windows and tiny damping; the reported peak (results.extreme_magnitude) must be a value of
f, at least the maximum of |f| found independently, and proved maximal by the check's
enclosure (extremes.py). The dense search: f evaluated with mpmath at 60 digits on a dense grid
(64 points per shortest period), every local maximum of the samples refined by
mpmath.findroot of f′. A few examples by default; many more under the ``slow`` marker.
"""

from __future__ import annotations

import math

import mpmath
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from closedform.basis import NumericExponentialPolynomial
from closedform.checks.extremes import MAX_TOLERANCE, enclose_piece, prepare
from closedform.results import Interval, extreme_magnitude

DIGITS = 60


@st.composite
def functions(draw):
    """(rows, length): 1–3 oscillating modes, some pairs split by a tiny relative gap."""
    modes = draw(st.integers(1, 3))
    rows = []
    fastest = 0.0
    with mpmath.workdps(DIGITS):
        for _ in range(modes):
            omega = mpmath.mpf(draw(st.floats(0.3, 20.0)))
            zeta = mpmath.mpf(10) ** draw(st.integers(-9, -2)) * draw(st.sampled_from([0, 1]))
            sigma = -zeta * omega
            near = draw(st.booleans())
            group = [(sigma, omega)]
            if near:     # a second mode 10^−k apart: the beating that cancels in floats
                gap = mpmath.mpf(10) ** -draw(st.integers(3, 12))
                group.append((sigma * (1 + gap), omega * (1 + gap)))
            for s, w in group:
                fastest = max(fastest, float(w))
                for kind in ("cos", "sin"):
                    c = mpmath.mpf(draw(st.floats(-1.0, 1.0)))
                    if near:
                        c = c / mpmath.mpf(10) ** -2     # large coefficients that cancel
                    rows.append((0, s, w, kind, c))
    periods = draw(st.sampled_from([3, 30, 200]))
    length = mpmath.mpf(periods) * 2 * mpmath.pi / fastest
    return tuple(rows), length


def _value(rows, u):
    total = mpmath.mpf(0)
    for _p, s, w, kind, c in rows:
        trig = mpmath.cos(w * u) if kind == "cos" else mpmath.sin(w * u)
        total += c * mpmath.exp(s * u) * trig
    return total


def _slope(rows, u):
    total = mpmath.mpf(0)
    for _p, s, w, kind, c in rows:
        cos, sin = mpmath.cos(w * u), mpmath.sin(w * u)
        trig, dtrig = (cos, -w * sin) if kind == "cos" else (sin, w * cos)
        total += c * mpmath.exp(s * u) * (s * trig + dtrig)
    return total


def dense_maximum(rows, length):
    with mpmath.workdps(DIGITS):
        fastest = max(float(w) for _p, _s, w, _k, _c in rows)
        count = int(float(length) * fastest / (2 * math.pi) * 64) + 64
        step = length / count
        samples = [abs(_value(rows, i * step)) for i in range(count + 1)]
        best = max(samples[0], samples[-1])
        maxima = [i for i in range(1, count)
                  if samples[i] >= samples[i - 1] and samples[i] >= samples[i + 1]]
        top = max([samples[i] for i in maxima] + [best])
        # every local maximum of the samples that can hold the maximum (a sample 2π/64 of
        # the fastest period from a peak is at most (2π/64)²/2 < 5e-3 low), refined
        for i in [i for i in maxima if samples[i] >= top * (1 - 1e-2)]:
            try:
                root = mpmath.findroot(lambda u: _slope(rows, u),
                                       ((i - 1) * step, (i + 1) * step), solver="anderson")
            except (ValueError, ZeroDivisionError):
                root = i * step
            if not 0 <= root <= length:
                root = i * step
            best = max(best, samples[i], abs(_value(rows, root)))
        return best


def _compare(case):
    rows, length = case
    function = NumericExponentialPolynomial(rows, 30)
    found = extreme_magnitude([Interval(mpmath.mpf(0), length, function)])
    reference = dense_maximum(rows, length)
    with mpmath.workdps(DIGITS):       # a value of f at the reported time …
        assert abs(_value(rows, found.time_mp) - found.value_mp) <= \
            mpmath.mpf(10) ** -20 * (1 + abs(found.value_mp))
    # … none found larger by the dense search (a lower bound of the maximum) …
    assert abs(found.value_mp) >= reference * (1 - 1.5e-9)
    # and the independent enclosure of the check proves nothing larger
    with mpmath.workdps(DIGITS):
        terms = {}
        for _p, s, w, kind, c in rows:
            key = (0, mpmath.mpc(s, w))
            terms[key] = terms.get(key, 0) + (c if kind == "cos" else -1j * c)
    proof = enclose_piece(prepare(terms, length), float(length),
                          float(abs(found.value_mp)) * (1 + MAX_TOLERANCE))
    assert proof.proved, proof


@pytest.mark.parametrize("size", ["4.9406564584124654e-322", "1e-305", "1e-250", "1e305"])
def test_peak_of_coefficients_far_out_in_the_float_range(size):
    """Two beating modes with amplitudes at the edge of float64 (4.9e-322 is a subnormal of
    a few bits, found by the random search below): the float search lost the beat maximum,
    7.04e-322 at t ≈ 16.49, and reported the start value, until the coefficients were scaled
    by a power of two before it. (The check's enclosure refused the wrong value.)"""
    with mpmath.workdps(DIGITS):
        c = mpmath.mpf(size)
        zero, one, near = mpmath.mpf(0), mpmath.mpf(1), mpmath.mpf("1.001")
        rows = ((0, zero, one, "cos", c), (0, zero, one, "sin", zero),
                (0, zero, near, "cos", zero), (0, zero, near, "sin", c))
    _compare((rows, mpmath.mpf("18.830725196342417")))


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(functions())
def test_peak_of_random_exponential_polynomials(case):
    _compare(case)


@pytest.mark.slow
@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(functions())
def test_peak_of_random_exponential_polynomials_many(case):
    _compare(case)


@st.composite
def short_pieces(draw):
    """(terms, length) of the pieces of a long history: a constant and a ramp (powers), a
    damped or growing oscillation (a conjugate pair, combined on a short piece), sometimes
    a second, nearly equal exponent; lengths from a small to a large part of a period."""
    with mpmath.workdps(50):
        omega = mpmath.mpf(draw(st.floats(1.0, 200.0)))
        sigma = mpmath.mpf(draw(st.floats(-5.0, 2.0)))
        rate = mpmath.mpc(sigma, omega)
        amplitude = mpmath.mpc(draw(st.floats(-1, 1)), draw(st.floats(-1, 1)))
        terms = {(0, rate): amplitude, (0, mpmath.conj(rate)): mpmath.conj(amplitude),
                 (0, mpmath.mpc(0)): mpmath.mpf(draw(st.floats(-2, 2)))}
        if draw(st.booleans()):
            terms[(1, mpmath.mpc(0))] = mpmath.mpf(draw(st.floats(-50, 50)))
        if draw(st.booleans()):
            terms[(0, rate * (1 + mpmath.mpf(10) ** -draw(st.integers(3, 12))))] = -amplitude
        length = mpmath.mpf(draw(st.sampled_from([1e-4, 1e-3, 1e-2, 0.3]))) / omega * 2
    return terms, length


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(short_pieces(), min_size=1, max_size=12), st.floats(0.2, 3.0))
def test_pieces_settled_at_once_are_those_the_enclosure_settles_at_first_look(pieces, level):
    """The batched first look of the check of extremes (all short pieces of a history at
    once, stacked and padded) decides exactly as enclose_piece does piece by piece: every
    piece it settles, enclose_piece proves with the same number of cells (0: the envelope,
    1: the first cell); every one-cell piece it leaves, enclose_piece does not prove with one
    cell. The reference is the per-piece routine, whose own correctness the dense search of
    the test above establishes."""
    from closedform.checks.extremes import _one_cell, settled_at_once

    preps = {index: prepare(terms, length) for index, (terms, length) in enumerate(pieces)}
    lengths = [float(length) for _terms, length in pieces]
    with mpmath.workdps(30):
        peak = max(abs(_piece_value(terms, length * k / 8)) for terms, length in pieces
                   for k in range(9))
    limit = float(peak) * level
    settled = settled_at_once(preps, lengths, limit)
    for index, prep in preps.items():
        alone = enclose_piece(prep, lengths[index], limit)
        if index in settled:
            assert alone.proved and alone.cells == settled[index], (index, alone, settled)
        elif len(prep.c) and _one_cell(prep, lengths[index]):
            assert not (alone.proved and alone.cells <= 1), (index, alone)


def _piece_value(terms, v):
    return mpmath.re(mpmath.fsum(c * v ** power * mpmath.exp(rate * v)
                                 for (power, rate), c in terms.items()))


@st.composite
def interval_lists(draw):
    """Intervals of a long history as the peak search sees them: rows with powers, sine and
    cosine parts, repeated modes (a derivative's rows), non-oscillating and growing terms,
    an empty or zero-length interval, and sometimes two rates that are distinct at 30 digits
    but one number in float64."""
    from closedform.results import Interval

    with mpmath.workdps(40):
        omega = mpmath.mpf(draw(st.floats(0.5, 300.0)))
        sigma = mpmath.mpf(draw(st.floats(-20.0, 3.0)))
        near = sigma * (1 + mpmath.mpf(10) ** -25)        # float64 cannot tell it from sigma
        zero = mpmath.mpf(0)
        intervals, start = [], mpmath.mpf(0)
        for _ in range(draw(st.integers(1, 8))):
            rows = []
            for _ in range(draw(st.integers(0, 7))):
                rate, frequency = draw(st.sampled_from(
                    [(sigma, omega), (zero, zero), (sigma, zero), (zero, omega)]
                    + ([(near, omega)] if draw(st.booleans()) else [])))
                rows.append((draw(st.integers(0, 2)), rate, frequency,
                             draw(st.sampled_from(["cos", "sin"])),
                             mpmath.mpf(draw(st.floats(-1e3, 1e3)))))
            length = mpmath.mpf(draw(st.sampled_from([0.0, 1e-4, 1e-2, 0.5, 3.0])))
            intervals.append(Interval(start, start + length,
                                      NumericExponentialPolynomial(tuple(rows), 30)))
            start += length
    return intervals


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(interval_lists())
def test_first_look_of_all_intervals_is_that_of_each_interval_alone(intervals):
    """The batched first look of the peak search (float values and errors at the interval
    ends, float distinctness of the exponents, Taylor bound) gives, interval by interval,
    the numbers of FloatEvaluator, _float_error, _float_distinct and _taylor_bound on that
    interval alone: the same decisions, the values to rounding (sums in another order)."""
    from closedform.results import (
        FloatEvaluator,
        _ends_one_by_one,
        _taylor_bound,
        first_look,
    )

    look = first_look(intervals)
    for index, interval in enumerate(intervals):
        evaluator = FloatEvaluator(interval.function)
        ends, values, errors, distinct = _ends_one_by_one(evaluator, interval)
        assert look.ends[index] == ends
        assert look.distinct[index] == distinct
        size = max([1.0] + [abs(c) for *_, c in (
            (p, r, w, k, float(c)) for p, r, w, k, c in interval.function.rows)])
        for got, want in zip(look.values[index], values):
            assert got == pytest.approx(want, rel=1e-13, abs=1e-13 * size)
        for got, want in zip(look.errors[index], errors):
            assert got == pytest.approx(want, rel=1e-12)
        bound = _taylor_bound(evaluator, float(interval.end - interval.start))
        assert look.bounds[index] == pytest.approx(bound, rel=1e-12) or \
            (math.isinf(bound) and math.isinf(look.bounds[index]))
