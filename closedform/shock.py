"""Shock (response) spectra of single pulses from the closed form: peak response against
t_d/T_n.

The oscillator is normalised — m = 1, k = 1 (ω_n = 1, T_n = 2π), c = 2ζ — and the pulse has
peak 1 and duration t_d = 2π·r, r = t_d/T_n. The engine derives the response ONCE with r kept
as a symbol: every coefficient of every piece is then an exact function of r, compiled to
mpmath, and each point of the spectrum is that closed form evaluated at its ratio. Nothing is
integrated numerically.

Per point:

* ``dlf`` = max |x(t)| over t ≥ 0 divided by the static response F/k (here 1), the maximum
  taken from the roots of x′ as everywhere in closedform. After the pulse the motion is free,
  x = e^(−ζu)(A cos ω_d u + B sin ω_d u), whose extremes come every π/ω_d with magnitudes
  shrinking by e^(−ζπ/√(1−ζ²)) (constant when undamped), so the first half damped period
  after the pulse holds the largest of them.
* ``peak_time_ratio`` = t_m/t_d, the time of that maximum (the earliest, where equal) over the
  pulse duration — the ordinate of the time-of-peak charts of Biggs (1964), ch. 2.
* ``residual`` = amplitude of the free vibration after the pulse over F/k,
  √(x² + ((x′ + ζω x)/ω_d)²) at t = t_d (undamped: √(x² + (x′/ω)²)).

Ratios at which a coefficient's denominator vanishes (the undamped half-sine at t_d/T_n = ½,
where the load's frequency equals the natural one) are resonant: there the engine is run with
that exact ratio, its transform has the double pole, and the limit form t·sin t comes out of
the table — giving exactly π/2 for the half-sine, never a division by zero.

Ratios are exact rationals (decimal text is read exactly), so resonance is found exactly.

Every point is then checked independently (spectrum_check.py: another solution of the
motion, a rigorous bound on |x| over the pulse and the free vibration, the earliest-time rule
and the residual); a point that fails makes the spectrum's status "failed". Ratios are
accepted in spectrum_check.RATIO_RANGE (10⁻⁶ … 10⁴).
"""

from __future__ import annotations

import csv
import io
import json
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from functools import lru_cache
from types import MappingProxyType

import mpmath
import sympy

from . import shapes
from .basis import NumericExponentialPolynomial
from .budget import Budget
from .checks.spectrum_check import RATIO_RANGE, PointCheck, check_point
from .loads import rewrite_loads
from .response import solve
from .results import (
    DIGITS,
    Extreme,
    Interval,
    PreciseEvaluator,
    extreme_magnitude,
    numeric_intervals,
)
from .shapes import SpectrumEntry
from .specs import LoadSpec, SystemSpec
from .spectrum import SHAPES
from .systems import build_model

RATIO = sympy.Symbol("r", positive=True)        # t_d / T_n
NEAR_SINGULAR = sympy.Rational(1, 10**12)       # closer to a resonant ratio: exact route
ZERO_LEVEL = mpmath.mpf("1e-25")                # residuals below this (of F/k) are 0 to the
                                                # precision of the 30-digit evaluation


@dataclass(frozen=True)
class Pulse:
    """A pulse shape with its shape parameters (fractions of the duration, exact)."""

    shape: str
    peak_at: sympy.Rational | None = None        # triangle
    rise: sympy.Rational | None = None           # trapezoid: rise + hold + fall = 1
    hold: sympy.Rational | None = None
    fall: sympy.Rational | None = None

    def __post_init__(self) -> None:
        if self.shape not in SHAPES:
            raise ValueError(f"unknown pulse shape {self.shape!r}")
        if self.shape == "triangle" and self.peak_at is None:
            object.__setattr__(self, "peak_at", sympy.Rational(1, 2))
        if self.shape == "trapezoid":
            parts = (self.rise, self.hold, self.fall)
            if any(p is None or p < 0 for p in parts) or sum(parts) != 1:
                raise ValueError("a trapezoid needs rise, hold and fall ≥ 0 summing to 1")

    def load(self, duration: sympy.Expr) -> LoadSpec:
        """This pulse, peak 1, starting at 0 and lasting ``duration``, as a case load."""
        values = self._entry().values(self, duration)
        return LoadSpec(1, self.shape, sympy.S.Zero, MappingProxyType(values))

    def describe(self) -> str:
        return self._entry().describe(self)

    def parameters(self) -> dict:
        return self._entry().parameters(self)

    def _entry(self) -> SpectrumEntry:
        """The shape's spectrum entry in the shape registry (``closedform.shapes``)."""
        entry = shapes.get(self.shape).spectrum
        if entry is None:
            raise ValueError(f"pulse shape {self.shape!r} has no spectrum entry")
        return entry


@dataclass(frozen=True)
class SpectrumPoint:
    """One ratio t_d/T_n and the dimensionless results at it (see the module docstring)."""

    ratio: sympy.Rational
    dlf: float
    peak_time_ratio: float
    residual: float
    resonant: bool = False              # at (or within 1e-12 of) a resonant ratio: evaluated
                                        # by the engine at that exact ratio (limit form)
    peak: Extreme | None = None         # at 30 digits, in the normalised time (T_n = 2π)
    residual_mp: object = None
    checks: tuple[PointCheck, ...] = ()  # the independent checks (spectrum_check.py)

    @property
    def status(self) -> str:
        return "verified" if self.checks and all(c.passed for c in self.checks) else "failed"


@dataclass(frozen=True)
class Spectrum:
    pulse: Pulse
    damping_ratio: sympy.Rational
    points: tuple[SpectrumPoint, ...]

    @property
    def status(self) -> str:
        return "verified" if all(p.status == "verified" for p in self.points) else "failed"

    def failures(self) -> list[str]:
        """One line per failed check: the ratio, the check and its figure."""
        return [f"t_d/T_n = {_digits(float(p.ratio))}: {c.name}: {c.detail}"
                for p in self.points for c in p.checks if not c.passed] + \
            [f"t_d/T_n = {_digits(float(p.ratio))}: not checked" for p in self.points
             if not p.checks]

    def to_dict(self) -> dict:
        return {
            "schema": 1,
            "status": self.status,
            "shape": self.pulse.shape,
            **self.pulse.parameters(),
            "damping_ratio": float(self.damping_ratio),
            "points": [{"ratio": float(p.ratio), "dlf": _finite(p.dlf),
                        "peak_time_ratio": _finite(p.peak_time_ratio),
                        "residual": _finite(p.residual),
                        "status": p.status,
                        "checks": [{"name": c.name, "passed": c.passed, "detail": c.detail}
                                   for c in p.checks]}
                       for p in self.points],
        }

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2, allow_nan=False)

    def to_csv(self) -> str:
        """Comment lines saying what was computed, then one row per ratio; every column is a
        ratio of like quantities, marked [1] (dimensionless) in the header."""
        buffer = io.StringIO()
        buffer.write(f"# shock spectrum: {self.pulse.describe()}, damping ratio "
                     f"{_text(self.damping_ratio)}\n")
        buffer.write(f"# status: {self.status.upper()} (every point checked by an independent "
                     f"solution: value, stationary point, no larger |x|, residual)\n")
        for line in self.failures():
            buffer.write(f"# failed: {line}\n")
        buffer.write("# every column is dimensionless [1]: t_d/T_n = pulse duration / natural "
                     "period; DLF = max|x| / (F/k); t_m/t_d = time of that maximum / pulse "
                     "duration; A_r/(F/k) = residual vibration amplitude / (F/k)\n")
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(["t_d/T_n [1]", "DLF [1]", "t_m/t_d [1]", "A_r/(F/k) [1]", "status"])
        for p in self.points:
            writer.writerow([_digits(float(p.ratio)), _digits(p.dlf), _digits(p.peak_time_ratio),
                             _digits(p.residual), p.status])
        return buffer.getvalue()


def _finite(value: float) -> float | None:
    """The value, or None where it is not finite (the JSON stays strict; the point fails)."""
    return value if math.isfinite(value) else None


def _digits(value: float) -> str:
    return f"{value:.12g}"


def _text(value) -> str:
    return f"{float(value):g}"


# ----------------------------------------------------------------------------- the closed form


def _model(damping_ratio: sympy.Rational):
    from . import quantities

    system = SystemSpec("spring-mass-damper",
                        MappingProxyType({"mass": sympy.S.One, "stiffness": sympy.S.One,
                                          "damping": 2 * damping_ratio}),
                        None, quantities.dimension("force"), quantities.dimension("length"))
    return build_model(system)


def _solve(pulse: Pulse, damping_ratio: sympy.Rational, duration: sympy.Expr, exact_times: dict):
    model = _model(damping_ratio)
    history = rewrite_loads((pulse.load(duration),))
    return solve(model, history, None, duration + 1, exact=True, ordering=exact_times).pieces


@dataclass(frozen=True)
class _Template:
    """The pieces of the response with the ratio r as a symbol: their modes, and one compiled
    function giving every start, rate, frequency and coefficient at a ratio (common
    subexpressions such as cos(2πr·ω_d) computed once)."""

    shapes: tuple[tuple[tuple[int, str], ...], ...]   # per piece: (power, kind) of each row
    numbers: Callable                                  # r -> [starts…, (rate, freq, c)…]
    singular: tuple[sympy.Poly, ...]      # denominators' factors vanishing at some r > 0

    def near_singular(self, ratio: sympy.Rational) -> bool:
        for polynomial in self.singular:
            value = polynomial.eval(ratio)
            size = sum(abs(c) * ratio**k for k, c in enumerate(reversed(polynomial.all_coeffs())))
            if value == 0 or abs(value) <= NEAR_SINGULAR * size:
                return True
        return False

    def intervals(self, ratio: sympy.Rational) -> list[Interval]:
        """The pieces at this ratio (the last one open-ended: end None)."""
        with mpmath.workdps(DIGITS + 10):
            numbers = iter(self.numbers(mpmath.mpf(ratio.p) / ratio.q))
            starts = [next(numbers) for _ in self.shapes]
            functions = [NumericExponentialPolynomial(tuple(
                (power, next(numbers), next(numbers), kind, next(numbers))
                for power, kind in rows), DIGITS) for rows in self.shapes]
        return [Interval(a, b, f) for a, b, f in zip(starts, starts[1:] + [None], functions)]


@lru_cache(maxsize=16)
def _template(pulse: Pulse, damping_ratio: sympy.Rational) -> _Template:
    pieces = _solve(pulse, damping_ratio, 2 * sympy.pi * RATIO, {RATIO: sympy.S.One})
    singular: list[sympy.Poly] = []
    expressions = [piece.start for piece in pieces]
    shapes = []
    for piece in pieces:
        rows = []
        for mode, coefficient in piece.local.terms.items():
            rows.append((mode.power, mode.kind))
            expressions += [mode.rate, mode.frequency, coefficient]
            singular += [p for p in _singular_factors(coefficient) if p not in singular]
        shapes.append(tuple(rows))
    compiled = sympy.lambdify(RATIO, expressions, modules="mpmath", cse=True)
    return _Template(tuple(shapes), compiled, tuple(singular))


def _singular_factors(coefficient: sympy.Expr) -> list[sympy.Poly]:
    """Factors of the coefficient's denominator that are polynomials in r with a positive
    real root (exponential factors never vanish)."""
    denominator = sympy.denom(sympy.together(coefficient))
    found = []
    for factor in sympy.Mul.make_args(sympy.factor(denominator)):
        base = factor.base if factor.is_Pow else factor
        if RATIO not in base.free_symbols or isinstance(base, sympy.exp):
            continue
        if not base.is_polynomial(RATIO):
            raise ValueError(f"cannot locate the resonant ratios of the denominator {base}")
        polynomial = sympy.Poly(base, RATIO)
        if any(root > 0 for root in polynomial.real_roots()):
            found.append(polynomial)
    return found


def _exact_intervals(pulse: Pulse, damping_ratio: sympy.Rational,
                     ratio: sympy.Rational) -> list[Interval]:
    """The engine run at this exact ratio (resonant ratios: the limit form)."""
    pieces = _solve(pulse, damping_ratio, 2 * sympy.pi * ratio, {})
    intervals = numeric_intervals([p.local for p in pieces], [p.start for p in pieces],
                                  2 * sympy.pi * ratio + 1)
    return [Interval(i.start, None if k == len(intervals) - 1 else i.end, i.function)
            for k, i in enumerate(intervals)]


def spectrum_point(pulse: Pulse, damping_ratio: sympy.Rational, ratio: sympy.Rational,
                   template: _Template | None = None) -> SpectrumPoint:
    """DLF, t_m/t_d and residual at one ratio t_d/T_n (see the module docstring)."""
    template = template or _template(pulse, damping_ratio)
    resonant = template.near_singular(ratio)
    intervals = _exact_intervals(pulse, damping_ratio, ratio) if resonant \
        else template.intervals(ratio)
    with mpmath.workdps(DIGITS + 10):
        zeta = mpmath.mpf(damping_ratio.p) / damping_ratio.q
        damped = mpmath.sqrt(1 - zeta**2)
        free = intervals[-1]
        # the free vibration after the pulse: its largest extreme is within half a damped period
        intervals[-1] = Interval(free.start, free.start + mpmath.pi / damped, free.function)
        peak = extreme_magnitude(intervals)
        x, velocity = PreciseEvaluator(free.function, orders=2)(mpmath.mpf(0))
        residual = mpmath.sqrt(x**2 + ((velocity + zeta * x) / damped) ** 2)
        duration = 2 * mpmath.pi * ratio.p / ratio.q
        shown = float(residual) if residual > ZERO_LEVEL else 0.0
    checks = tuple(check_point(pulse.shape, float(damping_ratio), float(ratio),
                               float(peak.value_mp), float(peak.time_mp), shown,
                               **pulse.parameters()))
    return SpectrumPoint(ratio, float(abs(peak.value_mp)), float(peak.time_mp / duration),
                         shown, resonant, peak, residual, checks)


def response_spectrum(pulse: Pulse, damping_ratio: sympy.Rational,
                      ratios: Sequence[sympy.Rational], budget: Budget | None = None) -> Spectrum:
    """The spectrum at each ratio t_d/T_n, all from one derivation in terms of the ratio, each
    point checked independently (spectrum_check.py). ``budget`` names the running stage for
    a time budget around the call."""
    budget = budget or Budget(None, "spectrum")
    if not 0 <= damping_ratio < 1:
        raise ValueError("the damping ratio must be at least 0 and below 1")
    low, high = RATIO_RANGE
    with budget.stage("shock spectrum: the ratios"):
        if any(not low <= float(r) <= high for r in ratios):
            raise ValueError(f"t_d/T_n must be from {low:g} to {high:g}")
    with budget.stage("shock spectrum: the closed form in t_d/T_n"):
        template = _template(pulse, damping_ratio)
    points = []
    for r in ratios:
        with budget.stage(f"shock spectrum: t_d/T_n = {_text(r)}"):
            points.append(spectrum_point(pulse, damping_ratio, sympy.Rational(r), template))
    return Spectrum(pulse, damping_ratio, tuple(points))


# ----------------------------------------------------------------------------- plot


def spectrum_figure(spectrum: Spectrum, fmt: str) -> bytes:
    """DLF and residual amplitude against t_d/T_n (SVG or PNG, reproducible byte for byte on
    a given matplotlib version: fixed ids, text as paths, no dates)."""
    import matplotlib
    from matplotlib.figure import Figure

    from .plots import CREATOR, STYLE

    ratios = [float(p.ratio) for p in spectrum.points]
    style = dict(STYLE, **{"svg.hashsalt": "closedform-spectrum"})
    with matplotlib.rc_context(style):
        figure = Figure(figsize=(6.4, 3.6), layout="constrained")
        axes = figure.subplots()
        axes.plot(ratios, [p.dlf for p in spectrum.points], color="#1d4e89",
                  label="peak response (DLF)")
        axes.plot(ratios, [p.residual for p in spectrum.points], color="#8c510a",
                  linestyle="--", label="residual vibration amplitude")
        if ratios and max(ratios) / min(ratios) >= 20:
            from matplotlib.ticker import FixedLocator, NullFormatter, StrMethodFormatter

            axes.set_xscale("log")
            ticks = [m * 10.0**e for e in range(-4, 5) for m in (1, 2, 5)
                     if min(ratios) <= m * 10.0**e <= max(ratios)]
            axes.xaxis.set_major_locator(FixedLocator(ticks))
            axes.xaxis.set_major_formatter(StrMethodFormatter("{x:g}"))
            axes.xaxis.set_minor_formatter(NullFormatter())
        axes.set_xlabel("t_d / T_n  (pulse duration / natural period)")
        axes.set_ylabel("response / (F/k)")
        axes.set_ylim(bottom=0)
        axes.set_title(f"{spectrum.pulse.describe()}, damping ratio "
                       f"{_text(spectrum.damping_ratio)}")
        axes.legend(loc="best")
        buffer = io.BytesIO()
        metadata = {"Date": None, "Creator": CREATOR} if fmt == "svg" else {"Software": CREATOR}
        figure.savefig(buffer, format=fmt, metadata=metadata, dpi=150)
        return buffer.getvalue()
