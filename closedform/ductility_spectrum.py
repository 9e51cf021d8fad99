"""Ductility spectra: the ductility ratio of an elastic-plastic oscillator under a single
pulse, against t_d/T_n, one curve per strength ratio R_m/F₁ (``spectrum --strength-ratios``).

The oscillator is normalised as for the shock spectra (shock.py): m = 1, k = 1 (T_n = 2π),
c = 2ζ, a pulse of peak F₁ = 1 and duration t_d = 2π·r exactly (r = t_d/T_n). Each point is a
full yielding-spring derivation (plastic.py: the chain of linear phases, events from the
closed forms) with its independent checks (checks/plastic.py: the Taylor-series integration
of the hysteretic equation, continuity, spring force on its branch, energy balance); a point
whose checks do not all pass makes the spectrum "failed".

The window is t_d + 2·T_n, extended while the spring is still yielding at its end: once the
spring is elastic and the load is off, the free vibration about the permanent set keeps (or,
damped, loses) its amplitude, and a full natural period after the pulse inside the window
has shown whether it reaches a yield line — so |x| cannot exceed the maximum found.
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass
from types import MappingProxyType

import sympy

from . import quantities
from .resistance import Resistance
from .specs import Case, ReportSpec, SystemSpec

MAX_EXTENSIONS = 6


@dataclass(frozen=True)
class DuctilityPoint:
    strength_ratio: sympy.Rational
    ratio: sympy.Rational
    ductility: float | None
    peak_time_ratio: float | None        # t_m / t_d
    permanent_set: float | None          # over x_y
    events: int
    status: str
    failures: tuple[str, ...] = ()


@dataclass(frozen=True)
class DuctilitySpectrum:
    pulse: object
    damping_ratio: sympy.Rational
    points: tuple[DuctilityPoint, ...]

    @property
    def status(self) -> str:
        return "verified" if all(p.status == "verified" for p in self.points) else "failed"

    def failures(self) -> list[str]:
        return [f"R_m/F_1 = {float(p.strength_ratio):g}, t_d/T_n = {float(p.ratio):g}: {line}"
                for p in self.points for line in p.failures]

    def to_dict(self) -> dict:
        return {
            "schema": 1,
            "kind": "ductility",
            "status": self.status,
            "shape": self.pulse.shape,
            **self.pulse.parameters(),
            "damping_ratio": float(self.damping_ratio),
            "strength_ratios": sorted({float(p.strength_ratio) for p in self.points}),
            "points": [{"strength_ratio": float(p.strength_ratio), "ratio": float(p.ratio),
                        "ductility": p.ductility, "peak_time_ratio": p.peak_time_ratio,
                        "permanent_set_ratio": p.permanent_set, "events": p.events,
                        "status": p.status} for p in self.points],
        }

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2, allow_nan=False)

    def to_csv(self) -> str:
        buffer = io.StringIO()
        buffer.write(f"# ductility spectrum: elastic-plastic oscillator, {self.pulse.describe()}, "
                     f"damping ratio {self.damping_ratio}\n")
        buffer.write(f"# status: {self.status.upper()} (every point checked by an independent "
                     "integration of the yielding equation and an energy balance)\n")
        for line in self.failures():
            buffer.write(f"# failed: {line}\n")
        buffer.write("# every column is dimensionless [1]: R_m/F_1 = yield resistance / peak "
                     "load; t_d/T_n = pulse duration / natural period; mu = max|x| / x_y; "
                     "t_m/t_d = time of that maximum / pulse duration; x_p/x_y = permanent set "
                     "/ yield displacement\n")
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(["R_m/F_1 [1]", "t_d/T_n [1]", "mu [1]", "t_m/t_d [1]", "x_p/x_y [1]",
                         "status"])
        for p in self.points:
            writer.writerow([f"{float(p.strength_ratio):.10g}", f"{float(p.ratio):.10g}",
                             _text(p.ductility), _text(p.peak_time_ratio),
                             _text(p.permanent_set), p.status])
        return buffer.getvalue()


def _text(value: float | None) -> str:
    return "" if value is None else f"{value:.10g}"


def parse_strength_ratios(text: str) -> list:
    from fractions import Fraction

    from .errors import CaseError

    items = text.split(",")
    if not text.strip() or any(not item.strip() for item in items):
        raise CaseError(f"expected comma-separated positive numbers, got '{text}'",
                        file="--strength-ratios")
    values = []
    for item in items:
        try:
            value = Fraction(item.strip())
        except (ValueError, ZeroDivisionError):
            raise CaseError(f"'{item.strip()}' is not a number (expected a positive R_m/F_1)",
                            file="--strength-ratios")
        values.append(sympy.Rational(value.numerator, value.denominator))
    for item, value in zip(items, values):
        if value <= 0:
            raise CaseError(f"strength ratios must be positive, got {item.strip()}",
                            file="--strength-ratios")
    return values


def _case(pulse, damping_ratio, strength, ratio, until) -> Case:
    one = sympy.S.One
    resistance = Resistance("elastic-plastic", sympy.nsimplify(strength), one, sympy.S.Zero)
    system = SystemSpec("spring-mass-damper",
                        MappingProxyType({"mass": one, "stiffness": one,
                                          "damping": 2 * damping_ratio}),
                        None, quantities.dimension("force"), quantities.dimension("length"),
                        resistance=resistance)
    load = pulse.load(2 * sympy.pi * ratio)
    return Case(title="ductility spectrum point", reference="", system=system, loads=(load,),
                initial=None, symbols=(), report=ReportSpec(until=until),
                claims=MappingProxyType({}), source="spectrum")


def ductility_point(pulse, damping_ratio, strength, ratio) -> DuctilityPoint:
    """One point: μ, t_m/t_d and x_p/x_y of the normalised oscillator, with its checks."""
    from .plastic import derive_plastic

    duration = 2 * sympy.pi * ratio
    until = duration + 4 * sympy.pi
    for _ in range(MAX_EXTENSIONS):
        derivation = derive_plastic(_case(pulse, damping_ratio, strength, ratio, until),
                                    sheet_check=False)
        events = derivation.plastic.events
        settled = not events or events[-1].kind == "unload"   # elastic at the window end
        if settled:
            break
        until = until + 8 * sympy.pi
    response = derivation.plastic
    mu = response.ductility
    failures = tuple(f"{c.name}: {c.detail}" for c in derivation.checks if not c.passed)
    if not settled:
        failures += (f"the spring was still yielding at t = {float(until):g} (normalised); "
                     "the ductility is unbounded or beyond the window",)
    return DuctilityPoint(
        strength, ratio, mu.value if mu else None,
        mu.time / float(duration) if mu else None,
        float(response.permanent_set) / float(strength)
        if math.isfinite(float(response.permanent_set)) else None,
        len(events), "verified" if derivation.passed and settled else "failed", failures)


def ductility_spectrum(pulse, damping_ratio, strengths, ratios, budget=None) -> DuctilitySpectrum:
    points = []
    for strength in strengths:
        for ratio in ratios:
            if budget is None:
                points.append(ductility_point(pulse, damping_ratio, strength, ratio))
                continue
            with budget.stage(f"ductility at R_m/F_1 = {float(strength):g}, "
                              f"t_d/T_n = {float(ratio):g}"):
                points.append(ductility_point(pulse, damping_ratio, strength, ratio))
    return DuctilitySpectrum(pulse, damping_ratio, tuple(points))


def ductility_figure(spectrum: DuctilitySpectrum, fmt: str) -> bytes:
    """μ against t_d/T_n, one curve per strength ratio (log axes)."""
    import matplotlib
    from matplotlib.figure import Figure

    from .plots import CREATOR, STYLE

    style = dict(STYLE, **{"svg.hashsalt": "closedform-ductility"})
    with matplotlib.rc_context(style):
        figure = Figure(figsize=(6.4, 3.6), layout="constrained")
        axes = figure.subplots()
        for strength in sorted({p.strength_ratio for p in spectrum.points}):
            row = [p for p in spectrum.points if p.strength_ratio == strength
                   and p.ductility is not None]
            axes.plot([float(p.ratio) for p in row], [p.ductility for p in row],
                      marker="o", markersize=2.5, label=f"R_m/F_1 = {float(strength):g}")
        from matplotlib.ticker import StrMethodFormatter

        ratios = [float(p.ratio) for p in spectrum.points]
        if ratios and max(ratios) / min(ratios) >= 20:
            axes.set_xscale("log")
            axes.xaxis.set_major_formatter(StrMethodFormatter("{x:g}"))
        values = [p.ductility for p in spectrum.points if p.ductility]
        if values and max(values) / min(values) >= 20:
            axes.set_yscale("log")
            axes.yaxis.set_major_formatter(StrMethodFormatter("{x:g}"))
        axes.set_xlabel("t_d / T_n  (pulse duration / natural period)")
        axes.set_ylabel("ductility ratio  x_m / x_y")
        axes.set_title(f"elastic-plastic, {spectrum.pulse.describe()}, damping ratio "
                       f"{spectrum.damping_ratio}")
        axes.legend(loc="best")
        buffer = io.BytesIO()
        metadata = {"Date": None, "Creator": CREATOR} if fmt == "svg" else {"Software": CREATOR}
        figure.savefig(buffer, format=fmt, metadata=metadata, dpi=150)
        return buffer.getvalue()


def run_ductility_spectrum(arguments, pulse, damping_ratio, ratios) -> int:
    """``spectrum --shape … --strength-ratios …``: CSV on stdout, or --json -, or -o DIR."""

    from .budget import time_budget
    from .spectrum import emit_spectrum

    strengths = parse_strength_ratios(arguments.strength_ratios)
    with time_budget(arguments.time_budget, "ductility spectrum") as budget:
        spectrum = ductility_spectrum(pulse, damping_ratio, strengths, ratios, budget)
    return emit_spectrum(arguments, spectrum, f"ductility-{pulse.shape}", ductility_figure)
