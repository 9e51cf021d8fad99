"""An independent check of every point of a pulse shock spectrum.

The spectrum's numbers come from the Laplace-transform engine at 30 digits (spectrum.py).
This module re-derives the response by another route and tests the reported numbers against
it, sharing no code with the engine or its peak search:

* the motion x″ + 2ζx′ + x = f(t) (ω_n = 1) is solved per stretch of the load by
  undetermined coefficients — the particular solution of a linear load a + b·u is
  (a − 2ζb) + b·u, that of sin Ωt is X sin Ωt + Y cos Ωt with
  (1 − Ω²)X − 2ζΩY = 1, 2ζΩX + (1 − Ω²)Y = 0 — plus the free vibration
  e^(−ζu)(C cos ω_d u + D sin ω_d u) fitted to the state at the start of the stretch, all
  in float64 (the undamped half-sine from rest in a form without cancellation, so that it
  holds at and near the resonant ratio ½);
* **no larger |x| anywhere**: on every step [a, b] of a grid, |x| ≤ max(|x(a)|, |x(b)|) +
  M(b − a)²/8 (an interior extreme lies within (b − a)/2 of an end and has x′ = 0), where M
  bounds |x″| on the step: x‴ = f′ − 2ζx″ − x′ gives M ≤ (|x″(a)| + h(|f′| + R))/(1 − 2ζh),
  h = b − a, with R bounding |x′|: for R = √(x² + x′²), dR/dt ≤ |f| ≤ F, so
  R ≤ R(a) + hF; on a linear or free stretch also |x| ≤ |p| + √(C² + D²)·e^(−ζu) (the
  particular part plus the free vibration's envelope). Steps whose bound exceeds
  the reported |peak|·(1 + 10⁻⁹) are halved until it does not (or a larger value is met: the
  point fails). The search covers the pulse and the first half damped period after it: after
  the pulse the motion is free, its extremes come every π/ω_d and never grow;
* the reported value is x at the reported time (to 10⁻¹⁰ of the peak), that time is a
  stationary point or a load breakpoint, and no earlier hump comes within 10⁻⁹ of the peak
  (the earliest-time rule);
* the residual amplitude is √(x² + ((x′ + ζx)/ω_d)²) of the state at the end of the pulse.

A point outside the range of ratios given by ``RATIO_RANGE`` is refused before any work.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import mpmath
import numpy

RATIO_RANGE = (1e-6, 1e4)     # t_d/T_n the spectrum computes and checks
PEAK_TOLERANCE = 1e-9         # the earliest-time rule and the no-larger-value bound
VALUE_TOLERANCE = 1e-10       # reported value against the independent one, of the peak
STATIONARY_TOLERANCE = 1e-7   # |x′| at the reported time, of the motion's size R
FLOAT_ERROR = 1e-14           # float64 evaluation error per unit of term size
STEP = math.pi / 8            # starting grid step (ω_n = 1: 16 steps a natural period)
MAX_LEVELS = 60               # halvings of a step, at most


@dataclass(frozen=True)
class PointCheck:
    name: str
    passed: bool
    detail: str


@dataclass(frozen=True)
class _Stretch:
    start: float
    end: float
    kind: str              # "linear" | "sine" | "free"
    a: float = 0.0         # linear: f = a + b·(t − start); sine: f = sin(Ω t)
    b: float = 0.0
    omega: float = 0.0
    ratio: float = 0.0     # sine: t_d/T_n (Ω = 1/(2·ratio))


def stretches(shape: str, ratio: float, zeta: float, peak_at: float = 0.5,
              rise: float = 0.0, hold: float = 0.0, fall: float = 0.0) -> list[_Stretch]:
    """The load of peak 1 lasting t_d = 2π·ratio, stretch by stretch, then half a damped
    period of free vibration."""
    duration = 2 * math.pi * ratio
    parts: list[_Stretch] = []

    def linear(t0: float, t1: float, f0: float, f1: float) -> None:
        if t1 > t0:
            parts.append(_Stretch(t0, t1, "linear", f0, (f1 - f0) / (t1 - t0)))

    if shape == "rectangle":
        linear(0.0, duration, 1.0, 1.0)
    elif shape == "decay":
        linear(0.0, duration, 1.0, 0.0)
    elif shape == "triangle":
        linear(0.0, peak_at * duration, 0.0, 1.0)
        linear(peak_at * duration, duration, 1.0, 0.0)
    elif shape == "trapezoid":
        t1, t2 = rise * duration, (rise + hold) * duration
        linear(0.0, t1, 0.0, 1.0)
        linear(t1, t2, 1.0, 1.0)
        linear(t2, duration, 1.0, 0.0)
    elif shape == "half-sine":
        parts.append(_Stretch(0.0, duration, "sine", omega=math.pi / duration, ratio=ratio))
    else:
        raise ValueError(f"unknown shape {shape!r}")
    damped = math.sqrt(1 - zeta * zeta)
    parts.append(_Stretch(duration, duration + math.pi / damped, "free"))
    return parts


class _Float:
    """float64 arithmetic on numpy arrays."""

    exp, cos, sin, sqrt = numpy.exp, numpy.cos, numpy.sin, numpy.sqrt
    error = FLOAT_ERROR

    @staticmethod
    def array(values) -> numpy.ndarray:
        return numpy.asarray(values, dtype=float)

    @staticmethod
    def sinc_half(eps, t):
        """sin(εt/2)/ε (t/2 at ε = 0)."""
        return t / 2 * numpy.sinc(eps * t / (2 * math.pi))


class _Precise:
    """mpmath at PRECISE_DIGITS on numpy object arrays: used where float64 would lose the
    digits the check needs (a short pulse whose ramps cancel, e.g. t_d/T_n = 1e-6)."""

    exp = numpy.frompyfunc(mpmath.exp, 1, 1)
    cos = numpy.frompyfunc(mpmath.cos, 1, 1)
    sin = numpy.frompyfunc(mpmath.sin, 1, 1)
    sqrt = numpy.frompyfunc(mpmath.sqrt, 1, 1)
    error = 1e-35

    @staticmethod
    def array(values) -> numpy.ndarray:
        return numpy.array([mpmath.mpf(v) for v in numpy.ravel(values)], dtype=object)

    @staticmethod
    def sinc_half(eps, t):
        if eps == 0:
            return t / 2
        return _Precise.sin(eps * t / 2) / eps


PRECISE_DIGITS = 40


class _Motion:
    """x and x′ on one stretch from the state (x0, v0) at its start, vectorised in t."""

    def __init__(self, stretch: _Stretch, zeta, x0, v0, ops=_Float) -> None:
        self.s, self.ops = stretch, ops
        one = ops.array([1.0])[0]
        self.zeta = zeta * one
        self.damped = ops.sqrt(ops.array([1 - self.zeta * self.zeta]))[0]
        self.stable_sine = stretch.kind == "sine" and zeta == 0 and x0 == 0 and v0 == 0
        self.start = stretch.start * one
        self.X = self.Y = 0 * one
        zeta = self.zeta
        if stretch.kind == "sine":       # Ω = π/t_d = 1/(2·t_d/T_n)
            self.omega = one / (2 * stretch.ratio) if ops is _Precise else stretch.omega
        if stretch.kind == "sine" and not self.stable_sine:
            w = self.omega
            det = (1 - w * w) ** 2 + (2 * zeta * w) ** 2
            self.X, self.Y = (1 - w * w) / det, -2 * zeta * w / det
            t0 = ops.array([self.start])
            p0 = (self.X * ops.sin(w * t0) + self.Y * ops.cos(w * t0))[0]
            q0 = (w * (self.X * ops.cos(w * t0) - self.Y * ops.sin(w * t0)))[0]
        elif stretch.kind == "linear":
            self.a, self.b = stretch.a * one, stretch.b * one
            p0, q0 = self.a - 2 * zeta * self.b, self.b
        else:
            p0 = q0 = 0 * one
        self.C = x0 - p0
        self.D = (v0 - q0 + zeta * self.C) / self.damped
        self.size = float(abs(self.C) + abs(self.D) + abs(p0) + abs(q0) + abs(self.X)
                          + abs(self.Y))

    def force_bound(self) -> tuple[float, float]:
        """Bounds of |f| and |f′| on the stretch."""
        s = self.s
        if s.kind == "linear":
            return max(abs(s.a), abs(s.a + s.b * (s.end - s.start))), abs(s.b)
        return (1.0, s.omega) if s.kind == "sine" else (0.0, 0.0)

    def envelope(self, left, right):
        """A second bound of |x| on steps of a linear or free stretch: |p| at the step's ends
        (p linear) plus the free vibration's envelope √(C² + D²)·e^(−ζu) at its start."""
        if self.s.kind == "sine":
            return None
        ops, zeta = self.ops, self.zeta
        if self.s.kind == "linear":
            p = [numpy.abs(self.a - 2 * zeta * self.b + self.b * (t - self.start))
                 for t in (left, right)]
            largest = numpy.maximum(p[0], p[1])
        else:
            largest = 0
        return largest + ops.sqrt(ops.array([self.C * self.C + self.D * self.D]))[0] \
            * ops.exp(-zeta * (left - self.start))

    def force(self, t):
        s = self.s
        if s.kind == "linear":
            return self.a + self.b * (t - self.start)
        if s.kind == "sine":
            return self.ops.sin(self.omega * t)
        return 0 * t

    def __call__(self, t) -> tuple[numpy.ndarray, numpy.ndarray]:
        ops, s, zeta, wd = self.ops, self.s, self.zeta, self.damped
        t = ops.array(t) if ops is _Precise and getattr(getattr(t, "dtype", None), "kind", "") != "O" else t
        if self.stable_sine:
            # x = (sin Ωt − Ω sin t)/(1 − Ω²) written with ε = Ω − 1 and S = sin(εt/2)/ε:
            # x = (sin t − 2 cos((Ω+1)t/2)·S)/(Ω+1), x′ = 2Ω sin((Ω+1)t/2)·S/(Ω+1)
            w = self.omega
            half = (w + 1) * t / 2
            S = ops.sinc_half(w - 1, t)
            return ((ops.sin(t) - 2 * ops.cos(half) * S) / (w + 1),
                    2 * w * ops.sin(half) * S / (w + 1))
        u = t - self.start
        decay = ops.exp(-zeta * u)
        c, d = ops.cos(wd * u), ops.sin(wd * u)
        x = decay * (self.C * c + self.D * d)
        v = decay * ((-zeta * self.C + wd * self.D) * c + (-zeta * self.D - wd * self.C) * d)
        if s.kind == "linear":
            x = x + self.a - 2 * zeta * self.b + self.b * u
            v = v + self.b
        elif s.kind == "sine":
            w = self.omega
            x = x + self.X * ops.sin(w * t) + self.Y * ops.cos(w * t)
            v = v + w * (self.X * ops.cos(w * t) - self.Y * ops.sin(w * t))
        return x, v


def _motions(parts: list[_Stretch], zeta: float, ops=_Float) -> list[_Motion]:
    motions = []
    x = v = ops.array([0.0])[0]
    for part in parts:
        motion = _Motion(part, zeta, x, v, ops)
        motions.append(motion)
        end_x, end_v = motion(ops.array([part.end]))
        x, v = end_x[0], end_v[0]
    return motions


def check_point(shape: str, zeta: float, ratio: float, peak_value: float, peak_time: float,
                residual: float, **shape_parameters: float) -> list[PointCheck]:
    """The independent checks of one spectrum point (normalised: ω_n = 1, F/k = 1;
    ``peak_time`` in that time, t_m = peak_time)."""
    P = abs(peak_value)
    if not (math.isfinite(peak_value) and math.isfinite(peak_time) and P > 0):
        return [PointCheck("finite nonzero peak", False, f"peak {peak_value!r} at {peak_time!r}")]
    parts = stretches(shape, ratio, zeta, **shape_parameters)
    motions = _motions(parts, zeta)
    if _Float.error * max(m.size for m in motions) > 1e-2 * VALUE_TOLERANCE * P:
        with mpmath.workdps(PRECISE_DIGITS):
            return _checks(parts, _motions(parts, zeta, _Precise), _Precise, zeta, peak_value,
                           peak_time, residual)
    return _checks(parts, motions, _Float, zeta, peak_value, peak_time, residual)


def _checks(parts, motions, ops, zeta, peak_value, peak_time, residual) -> list[PointCheck]:
    size = ops.error / FLOAT_ERROR * max(m.size for m in motions)   # scaled: FLOAT_ERROR·size
    P = abs(peak_value)
    checks = []

    # 1. the reported value at the reported time
    index = next((k for k, p in enumerate(parts) if p.start <= peak_time <= p.end), None)
    if index is None:
        return [PointCheck("peak time inside the pulse and the first half period after it",
                           False, f"t_m = {peak_time:.17g} outside [0, {parts[-1].end:.17g}]")]
    x, v = (float(a[0]) for a in motions[index](ops.array([peak_time])))
    allowed = VALUE_TOLERANCE * P + FLOAT_ERROR * size
    checks.append(PointCheck("value at the reported time", abs(x - peak_value) <= allowed,
                             f"independent x = {x:.15g}, reported {peak_value:.15g}"))
    # 2. a stationary point or a load breakpoint
    breakpoint_ = any(abs(peak_time - p.start) <= 1e-12 * max(1.0, p.end) for p in parts)
    radius = math.hypot(x, v)
    stationary = abs(v) <= STATIONARY_TOLERANCE * radius + FLOAT_ERROR * size
    checks.append(PointCheck("stationary point or load breakpoint", breakpoint_ or stationary,
                             f"x′ = {v:.3g} at t_m" + (" (a load breakpoint)" if breakpoint_
                                                       else "")))
    # 3. no larger |x| anywhere; no earlier hump within the tolerance
    larger, earlier, unresolved = _search(parts, motions, ops, zeta, P, peak_time, size)
    checks.append(PointCheck(
        "no larger |x| in the pulse and the free vibration", larger is None and not unresolved,
        "bound max(|x(a)|,|x(b)|) + M·h²/8 on every step ≤ |peak|·(1 + 1e-9)" if larger is None
        and not unresolved else (f"|x| = {larger[1]:.15g} at t = {larger[0]:.15g}" if larger
                                 else "a step could not be resolved")))
    checks.append(PointCheck("earliest time of the peak", earlier is None,
                             "no earlier hump within 1e-9 of the peak" if earlier is None else
                             f"|x| = {earlier[1]:.15g} already at t = {earlier[0]:.15g}"))
    # 4. the residual amplitude
    free = motions[-1]
    x1, v1 = (float(a[0]) for a in free(ops.array([parts[-1].start])))
    damped = math.sqrt(1 - zeta * zeta)
    amplitude = math.hypot(x1, (v1 + zeta * x1) / damped)
    checks.append(PointCheck("residual amplitude",
                             abs(amplitude - residual) <= VALUE_TOLERANCE * max(1.0, P)
                             + FLOAT_ERROR * size,
                             f"independent {amplitude:.15g}, reported {residual:.15g}"))
    return checks


def _search(parts, motions, ops, zeta, P, peak_time, size):
    """Branch and bound over steps of the grid (see the module docstring): every step is
    halved until its bound is at most |peak|·(1 + 1e-9) — and, before the reported peak,
    until it is below |peak|·(1 − 1e-9) or one of its ends reaches that (an earlier hump).

    Returns (a time and value where |x| is larger than allowed, or None; an earlier hump's
    time and value within the tolerance, or None; whether some step stayed unresolved).
    An earlier hump is a sample before the reported time with |x| ≥ |peak|·(1 − 1e-9)
    separated from the reported time by a sample below that level."""
    slack = 4 * FLOAT_ERROR * size
    high, low = P * (1 + PEAK_TOLERANCE) + slack, P * (1 - PEAK_TOLERANCE) - slack
    times, magnitudes = [], []
    unresolved = False
    for part, motion in zip(parts, motions):
        count = max(1, math.ceil((part.end - part.start) / STEP))
        left = part.start + (part.end - part.start) * numpy.arange(count) / count
        right = numpy.append(left[1:], part.end)
        F, slope = motion.force_bound()
        xl, vl = motion(ops.array(left))
        al = motion.force(ops.array(left)) - 2 * zeta * vl - xl
        xr, _ = motion(ops.array(right))
        times += [left, right]
        magnitudes += [numpy.abs(xl), numpy.abs(xr)]
        for level in range(MAX_LEVELS + 1):
            ends = numpy.maximum(numpy.abs(xl), numpy.abs(xr))
            if (ends > high).any():
                k = int(numpy.argmax(ends > high))
                at = left[k] if abs(xl[k]) > high else right[k]
                return (float(at), float(ends[k])), None, False
            h = right - left
            # |x″| ≤ M on the step: x‴ = f′ − 2ζx″ − x′, so
            # M ≤ (|x″(a)| + h(|f′| + R(a) + hF)) / (1 − 2ζh)
            M = (numpy.abs(al) + h * (slope + ops.sqrt(xl * xl + vl * vl) + h * F)) \
                / (1 - 2 * zeta * h)
            bound = ends + M * h * h / 8
            envelope = motion.envelope(ops.array(left), ops.array(right))
            if envelope is not None:
                bound = numpy.minimum(bound, envelope)
            open_ = (bound > high) | ((right < peak_time) & (bound >= low) & (ends < low))
            if not open_.any():
                break
            if level == MAX_LEVELS:
                unresolved = True
                break
            left, right, xl, vl, xr = left[open_], right[open_], xl[open_], vl[open_], xr[open_]
            al = al[open_]
            middle = (left + right) / 2
            xm, vm = motion(ops.array(middle))
            am = motion.force(ops.array(middle)) - 2 * zeta * vm - xm
            times.append(middle)
            magnitudes.append(numpy.abs(xm))
            left, right = numpy.concatenate([left, middle]), numpy.concatenate([middle, right])
            xl, vl = numpy.concatenate([xl, xm]), numpy.concatenate([vl, vm])
            al, xr = numpy.concatenate([al, am]), numpy.concatenate([xm, xr])
    times = numpy.concatenate(times)
    magnitudes = numpy.concatenate(magnitudes).astype(float)
    order = numpy.argsort(times, kind="stable")
    times, magnitudes = times[order], magnitudes[order]
    earlier_side = times < peak_time * (1 - 1e-13)
    dips = numpy.flatnonzero(earlier_side & (magnitudes < low))
    earlier = None
    if dips.size:
        high_before = numpy.flatnonzero(magnitudes[:dips[-1]] >= low)
        if high_before.size:
            k = int(high_before[0])
            earlier = (float(times[k]), float(magnitudes[k]))
    return None, earlier, unresolved
