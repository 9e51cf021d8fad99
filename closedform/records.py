"""Response spectra of measured support-acceleration records.

The oscillator is u″ + 2ζω u′ + ω² u = −a_g(t), u the displacement relative to the support,
with a_g linear between the samples of the record (and zero before the first and after the
last sample). On one segment of length h, with a_g = α + β·τ (τ local time), the exact
solution is

    u(τ) = c₀ + c₁τ + e^(−σ τ)(C cos ω_d τ + D sin ω_d τ),   σ = ζω, ω_d = ω√(1 − ζ²),
    c₁ = −β/ω²,  c₀ = (−α − 2σc₁)/ω²,  C = u₀ − c₀,  D = (v₀ − c₁ + σC)/ω_d,

so the state at the end of the segment is a fixed linear map of (u₀, v₀, a_i, a_{i+1}) — the
per-segment closed form of Nigam & Jennings (Bull. Seismol. Soc. Am. 59, 1969). Its four
columns are computed once per period and per distinct segment length, and the recurrence
runs over the samples vectorised over the periods in float64.

Peaks are those of the continuous response, not of the samples: within a segment u″ is
e^(−στ)(C₂ cos ω_d τ + D₂ sin ω_d τ), whose zeros are π/ω_d apart and found in closed form;
between two of them u′ is monotone, so it has a root there exactly when it changes sign,
and that root is found by Newton's method kept inside the bracket. The same holds for the absolute acceleration
u″ + a_g = −2σu′ − ω²u, a function of the same form. After the record the motion is free;
its extremes come every π/ω_d and shrink by e^(−σπ/ω_d), so the final state and the first
extreme of the free vibration (closed form) hold its largest values.

Independent check (status): the map's columns are computed a second time from the matrix
exponential e^(Ah) by eigen-decomposition (numpy.linalg.eig) with the integrals
Γ₀ = A⁻¹(e^(Ah) − I)b and Γ₁ = A⁻¹(Γ₀ − hb) of the linear input, and must agree.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy

from .errors import CaseError

MAX_RECORD_BYTES = 20_000_000
MAX_SAMPLES = 1_000_000
MAX_PERIODS = 10_000
NEWTON_STEPS = 8             # Newton steps for a root of u′ inside its bracket
MAP_TOLERANCE = 1e-10        # closed-form map against the matrix exponential (relative)
MAP_CONDITION = 1e-14        # plus this over (ωh)², the cancellation in Γ₁ for short steps
GROUP_TOLERANCE = 1e-12      # segment lengths equal to this (relative) share one map
SHORTEST_PERIOD = 1 / 500    # of the longest segment: at most ~1000 half-waves a segment


@dataclass(frozen=True)
class Record:
    times: numpy.ndarray          # s, strictly increasing
    accelerations: numpy.ndarray  # m/s²
    source: str

    @property
    def peak_ground_acceleration(self) -> float:
        return float(numpy.max(numpy.abs(self.accelerations)))


@dataclass(frozen=True)
class RecordCheck:
    name: str
    passed: bool
    detail: str


@dataclass(frozen=True)
class RecordSpectrum:
    record: Record
    damping_ratio: float
    periods: numpy.ndarray
    displacement: numpy.ndarray
    displacement_time: numpy.ndarray
    absolute_acceleration: numpy.ndarray
    checks: tuple[RecordCheck, ...]

    @property
    def status(self) -> str:
        return "verified" if self.checks and all(c.passed for c in self.checks) else "failed"

    @property
    def omega(self) -> numpy.ndarray:
        return 2 * math.pi / self.periods

    def points(self) -> list[dict]:
        """One dict per period (SI); a value that is not finite is None (strict JSON)."""
        def finite(value) -> float | None:
            value = float(value)
            return value if math.isfinite(value) else None

        w = self.omega
        return [{"period": float(T), "displacement": finite(d), "pseudo_velocity": finite(wi * d),
                 "pseudo_acceleration": finite(wi * wi * d), "absolute_acceleration": finite(a)}
                for T, d, wi, a in zip(self.periods, self.displacement, w,
                                       self.absolute_acceleration)]

    def to_dict(self) -> dict:
        return {"schema": 1, "status": self.status, "damping_ratio": self.damping_ratio,
                "samples": int(self.record.times.size),
                "peak_ground_acceleration": self.record.peak_ground_acceleration,
                "points": self.points(),
                "checks": [{"name": c.name, "passed": c.passed, "detail": c.detail}
                           for c in self.checks]}

    def to_json(self) -> str:
        return json.dumps(self.to_dict(), indent=2, allow_nan=False)

    def to_csv(self) -> str:
        buffer = io.StringIO()
        buffer.write(f"# response spectrum of a support-acceleration record, {self.record.times.size}"
                     f" samples, damping ratio {self.damping_ratio:g}; peaks of the continuous "
                     f"response including the free vibration after the record\n")
        buffer.write(f"# status: {self.status.upper()}\n")
        for check in self.checks:
            if not check.passed:
                buffer.write(f"# failed: {check.name}: {check.detail}\n")
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow(["period [s]", "displacement [m]", "pseudo_velocity [m/s]",
                         "pseudo_acceleration [m/s^2]", "absolute_acceleration [m/s^2]"])
        for p in self.points():
            writer.writerow(["" if p[k] is None else f"{p[k]:.12g}"
                             for k in ("period", "displacement", "pseudo_velocity",
                                       "pseudo_acceleration", "absolute_acceleration")])
        return buffer.getvalue()


# ----------------------------------------------------------------------------- reading


_NUMBER = re.compile(r"[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?")


def read_record(path: Path) -> Record:
    """A two-column CSV (time, support acceleration); a header row may name the units as in
    ``time [s], acceleration [g0]``; plain numbers are SI; ``#`` starts a comment line."""
    from .files import read_limited

    shown = str(path)
    raw = read_limited(path, MAX_RECORD_BYTES, shown, f"'{shown}'", file="--record")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = raw[:error.start].count(b"\n") + 1
        raise CaseError(f"not UTF-8 text (byte 0x{raw[error.start]:02X})", file=shown, line=line)
    if "\x00" in text:
        raise CaseError("the file contains a NUL byte (expected text)", file=shown,
                        line=text[:text.index("\x00")].count("\n") + 1)
    factors = [1.0, 1.0]
    times, values, lines = [], [], []
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        for row in reader:
            number = reader.line_num
            if not row or all(not c.strip() for c in row) or row[0].lstrip().startswith("#"):
                continue
            if len(row) != 2:
                raise CaseError(f"expected two columns (time, acceleration), got {len(row)}",
                                file=shown, line=number)
            cells = [c.strip() for c in row]
            if not times and not lines and not _NUMBER.fullmatch(cells[0]):
                factors = _header_units(cells, shown, number)
                lines.append(number)
                continue
            for column, cell in enumerate(cells, start=1):
                if not _NUMBER.fullmatch(cell):
                    raise CaseError(f"column {column}: not a plain number (expected a number "
                                    f"such as 0.25 or -1.5e3, units in the header), got "
                                    f"'{cell[:40]}'", file=shown, line=number)
            t, a = float(cells[0]) * factors[0], float(cells[1]) * factors[1]
            if not (math.isfinite(t) and math.isfinite(a)):
                raise CaseError("number out of range", file=shown, line=number)
            if times and not t > times[-1]:
                raise CaseError(f"times must increase from row to row (got {cells[0]} after "
                                f"{times[-1] / factors[0]:g})", file=shown, line=number)
            if not times and t < 0:
                raise CaseError(f"times start at 0 or later, got {cells[0]}", file=shown,
                                line=number)
            times.append(t)
            values.append(a)
            if len(times) > MAX_SAMPLES:
                raise CaseError(f"too many samples (at most {MAX_SAMPLES})", file=shown,
                                line=number)
    except csv.Error as error:
        raise CaseError(f"not a readable CSV row ({error})", file=shown, line=reader.line_num)
    if len(times) < 2:
        raise CaseError("fewer than two samples (expected rows of time, acceleration)",
                        file=shown)
    return Record(numpy.array(times), numpy.array(values), shown)


def _header_units(cells: list[str], shown: str, number: int) -> list[float]:
    from . import units  # pint alone: the record route imports no sympy

    factors = [1.0, 1.0]
    expected = [units.TIME, units.ACCELERATION]
    for i, cell in enumerate(cells):
        match = re.search(r"\[([^\]]+)\]|\(([^)]+)\)", cell)
        if not match:
            continue
        try:
            factor, dimension = units.unit_fraction(
                units.normal_unit_text(match.group(1) or match.group(2)))
        except units.UnitProblem as problem:
            raise CaseError(f"column {i + 1}: {problem}", file=shown, line=number)
        if dimension != expected[i]:
            raise CaseError(f"column {i + 1}: wrong unit in the header (expected a unit of "
                            f"{units.describe(expected[i])}, got "
                            f"{units.describe(dimension)})", file=shown, line=number)
        factors[i] = float(factor)
    return factors


# ----------------------------------------------------------------------------- the map


def _segment(h, w, zeta, u0, v0, a0, a1):
    """The closed form on one segment (module docstring): coefficients of
    u(τ) = c₀ + c₁τ + e^(−στ)(C cos ω_d τ + D sin ω_d τ). Broadcasts over arrays."""
    sigma, wd = zeta * w, w * math.sqrt(1 - zeta * zeta)
    beta = (a1 - a0) / h
    c1 = -beta / (w * w)
    c0 = (-a0 - 2 * sigma * c1) / (w * w)
    C = u0 - c0
    D = (v0 - c1 + sigma * C) / wd
    return c0, c1, C, D


def _end_state(h, w, zeta, c0, c1, C, D):
    sigma, wd = zeta * w, w * math.sqrt(1 - zeta * zeta)
    e, c, s = numpy.exp(-sigma * h), numpy.cos(wd * h), numpy.sin(wd * h)
    u = c0 + c1 * h + e * (C * c + D * s)
    v = c1 + e * ((-sigma * C + wd * D) * c + (-sigma * D - wd * C) * s)
    return u, v


def step_map(h: float, w: numpy.ndarray, zeta: float) -> numpy.ndarray:
    """The (2, 4, P) map: [u, v] at the end = M · [u₀, v₀, a_i, a_{i+1}] for each ω."""
    columns = []
    for unit in numpy.eye(4):
        coefficients = _segment(h, w, zeta, *unit)
        columns.append(numpy.array(_end_state(h, w, zeta, *coefficients)))
    return numpy.stack(columns, axis=1)


def matrix_exponential_map(h: float, w: numpy.ndarray, zeta: float) -> numpy.ndarray:
    """The same map from e^(Ah) by eigen-decomposition (independent of the closed form):
    z′ = Az + b·a_g with A = [[0, 1], [−ω², −2ζω]], b = [0, −1]."""
    P = w.size
    A = numpy.zeros((P, 2, 2))
    A[:, 0, 1] = 1
    A[:, 1, 0] = -w * w
    A[:, 1, 1] = -2 * zeta * w
    values, vectors = numpy.linalg.eig(A.astype(complex))
    phi = (vectors * numpy.exp(values * h)[:, None, :]) @ numpy.linalg.inv(vectors)
    phi = phi.real
    b = numpy.array([0.0, -1.0])
    inverse = numpy.linalg.inv(A)
    gamma0 = inverse @ ((phi - numpy.eye(2)) @ b)[..., None]
    gamma1 = inverse @ (gamma0 - h * b[None, :, None])
    gamma0, gamma1 = gamma0[..., 0], gamma1[..., 0]
    # a_g = a_i + (a_{i+1} − a_i)τ/h: coefficient of a_i is Γ₀ − Γ₁/h, of a_{i+1} Γ₁/h
    M = numpy.empty((2, 4, P))
    M[:, 0, :] = phi[:, :, 0].T
    M[:, 1, :] = phi[:, :, 1].T
    M[:, 2, :] = (gamma0 - gamma1 / h).T
    M[:, 3, :] = (gamma1 / h).T
    return M


# ----------------------------------------------------------------------------- extremes


def _largest_on_segments(h, w, zeta, q0, q1, E, F, floor=0.0):
    """max over τ ∈ [0, h] of |f(τ)| = |q₀ + q₁τ + e^(−στ)(E cos ω_d τ + F sin ω_d τ)| (arrays
    over segments, one ω), and the τ where it is reached: the ends, and the roots of f′
    between consecutive zeros of f″ (f′ is monotone there: one root at most, found by
    Newton's method kept inside the bracket). Segments whose bound max(|f(0)|, |f(h)|) +
    max|f″|·h²/8 (max|f″| ≤ √(E₂² + F₂²)) is at most ``floor`` cannot exceed it and are
    not searched inside."""
    sigma, wd = zeta * w, w * math.sqrt(1 - zeta * zeta)
    E1, F1 = -sigma * E + wd * F, -sigma * F - wd * E
    E2, F2 = -sigma * E1 + wd * F1, -sigma * F1 - wd * E1
    e, c, s = math.exp(-sigma * h), math.cos(wd * h), math.sin(wd * h)
    start = numpy.abs(q0 + E)
    end = numpy.abs(q0 + q1 * h + e * (E * c + F * s))
    best_value = numpy.maximum(start, end)
    best_time = numpy.where(end > start, h, 0.0)
    bound = best_value + numpy.sqrt(E2 * E2 + F2 * F2) * h * h / 8
    index = numpy.flatnonzero(bound > floor)
    if index.size == 0:
        return best_value, best_time
    q0, q1, E, F, E1, F1, E2, F2 = (x[index] for x in (q0, q1, E, F, E1, F1, E2, F2))

    def derivatives(t, rows):
        decay, cos, sin = numpy.exp(-sigma * t), numpy.cos(wd * t), numpy.sin(wd * t)
        return (q1[rows] + decay * (E1[rows] * cos + F1[rows] * sin),
                decay * (E2[rows] * cos + F2[rows] * sin))

    # zeros of f″: ω_d τ = φ + π/2 + kπ, φ = atan2(F₂, E₂)
    first = numpy.mod(numpy.arctan2(F2, E2) + math.pi / 2, math.pi) / wd
    count = int(math.floor(wd * h / math.pi)) + 1
    knots = [numpy.zeros_like(first)] + [numpy.minimum(first + k * math.pi / wd, h)
                                        for k in range(count)] + [numpy.full_like(first, h)]
    everything = numpy.arange(index.size)
    slopes = [derivatives(k, everything)[0] for k in knots]
    for low, high, s_low, s_high in zip(knots, knots[1:], slopes, slopes[1:]):
        rows = numpy.flatnonzero((high > low) & (numpy.sign(s_low) * numpy.sign(s_high) < 0))
        if rows.size == 0:
            continue
        a, b, sa, sb = low[rows], high[rows], s_low[rows], s_high[rows]
        t = a - sa * (b - a) / (sb - sa)
        for _ in range(NEWTON_STEPS):
            st, curvature = derivatives(t, rows)
            same = numpy.sign(st) == numpy.sign(sa)
            a, sa = numpy.where(same, t, a), numpy.where(same, st, sa)
            b = numpy.where(same, b, t)
            with numpy.errstate(divide="ignore", invalid="ignore"):
                step = t - st / curvature
            inside = (step >= a) & (step <= b) & numpy.isfinite(step)
            t = numpy.where(inside, step, (a + b) / 2)
        found = numpy.abs(q0[rows] + q1[rows] * t + numpy.exp(-sigma * t)
                          * (E[rows] * numpy.cos(wd * t) + F[rows] * numpy.sin(wd * t)))
        where = index[rows]
        better = found > best_value[where]
        best_value[where[better]] = found[better]
        best_time[where[better]] = t[better]
    return best_value, best_time


def _free_largest(w, zeta, u, v, which: str):
    """Largest |u| (or |absolute acceleration|) of the free vibration from (u, v), τ ≥ 0:
    the larger of the start and the first extreme (later extremes shrink)."""
    sigma, wd = zeta * w, w * math.sqrt(1 - zeta * zeta)
    C, D = u, (v + sigma * u) / wd
    if which == "acceleration":      # −2σu′ − ω²u, the same form
        C1, D1 = -sigma * C + wd * D, -sigma * D - wd * C
        C, D = -2 * sigma * C1 - w * w * C, -2 * sigma * D1 - w * w * D
    C1, D1 = -sigma * C + wd * D, -sigma * D - wd * C
    theta = numpy.mod(numpy.arctan2(D1, C1) + math.pi / 2, math.pi)
    t = theta / wd
    first = numpy.abs(numpy.exp(-sigma * t) * (C * numpy.cos(theta) + D * numpy.sin(theta)))
    return numpy.maximum(numpy.abs(C), first), t


# ----------------------------------------------------------------------------- the spectrum


def parse_periods(text: str) -> numpy.ndarray:
    """``start:stop:count`` (log-spaced) or a comma-separated list of periods in s."""
    def number(item: str, what: str) -> float:
        item = item.strip()
        if not _NUMBER.fullmatch(item):
            raise CaseError(f"'{item}' is not a number (expected {what})", file="--periods")
        return float(item)

    if ":" in text:
        parts = text.split(":")
        if len(parts) != 3:
            raise CaseError(f"expected START:STOP:COUNT or a list A,B,…, got '{text}'",
                            file="--periods")
        start, stop = number(parts[0], "a period in s"), number(parts[1], "a period in s")
        if not re.fullmatch(r"\d+", parts[2].strip()):
            raise CaseError(f"COUNT must be a whole number, got '{parts[2].strip()}'",
                            file="--periods")
        count = int(parts[2])
        if not 0 < start <= stop:
            raise CaseError(f"expected 0 < START ≤ STOP, got '{text}'", file="--periods")
        if not 1 <= count <= MAX_PERIODS:
            raise CaseError(f"COUNT must be from 1 to {MAX_PERIODS}, got {count}",
                            file="--periods")
        if count == 1 and start != stop:
            raise CaseError("COUNT = 1 needs START = STOP", file="--periods")
        return numpy.geomspace(start, stop, count)
    items = text.split(",")
    if not text.strip() or any(not i.strip() for i in items):
        raise CaseError(f"expected START:STOP:COUNT or a list A,B,…, got '{text}'",
                        file="--periods")
    if len(items) > MAX_PERIODS:
        raise CaseError(f"at most {MAX_PERIODS} periods", file="--periods")
    periods = numpy.array([number(i, "a period in s") for i in items])
    if (periods <= 0).any():
        raise CaseError(f"periods must be positive, got '{text}'", file="--periods")
    return periods


def record_spectrum(record: Record, damping_ratio: float, periods: numpy.ndarray,
                    budget=None) -> RecordSpectrum:
    """The spectrum at each period (s); an overflow gives non-finite peaks and the status
    "failed" (the check "finite results"), never a warning or an exception."""
    with numpy.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return _record_spectrum(record, damping_ratio, periods, budget)


def _record_spectrum(record: Record, damping_ratio: float, periods: numpy.ndarray,
                     budget=None) -> RecordSpectrum:
    from .budget import Budget

    budget = budget or Budget(None, "record spectrum")
    if not 0 <= damping_ratio < 1:
        raise ValueError("the damping ratio must be at least 0 and below 1")
    zeta = float(damping_ratio)
    periods = numpy.asarray(periods, dtype=float)
    longest = float(numpy.max(numpy.diff(record.times)))
    if periods.min() < SHORTEST_PERIOD * longest:
        raise CaseError(f"the shortest period, {periods.min():g} s, is below 1/500 of the longest "
                        f"sampling interval of the record ({longest:g} s); at such periods the "
                        f"pseudo-acceleration is the peak ground acceleration", file="--periods")
    w = 2 * math.pi / periods
    t, a = record.times, record.accelerations
    steps = numpy.diff(t)
    # segment lengths: one map per distinct length (equal to GROUP_TOLERANCE)
    order = numpy.argsort(steps, kind="stable")
    sorted_steps = steps[order]
    new_group = numpy.concatenate([[True], numpy.diff(sorted_steps)
                                   > GROUP_TOLERANCE * sorted_steps[1:]])
    group_of_sorted = numpy.cumsum(new_group) - 1
    group = numpy.empty_like(group_of_sorted)
    group[order] = group_of_sorted
    lengths = sorted_steps[new_group]
    checks = []
    with budget.stage("record spectrum: the per-segment maps"):
        maps = numpy.stack([step_map(h, w, zeta) for h in lengths])      # (G, 2, 4, P)
        worst, worst_at = 0.0, None
        for g, h in enumerate(lengths):
            independent = matrix_exponential_map(h, w, zeta)
            scale = numpy.max(numpy.abs(independent), axis=1, keepdims=True)
            allowed = MAP_TOLERANCE + MAP_CONDITION / (w * h) ** 2
            excess = numpy.max(numpy.abs(maps[g] - independent) / scale, axis=1) / allowed
            k = numpy.unravel_index(numpy.argmax(excess), excess.shape)
            if excess[k] > worst or worst_at is None:
                worst, worst_at = float(excess[k]), (h, periods[k[1]])
        checks.append(RecordCheck(
            "segment map: closed form against the matrix exponential",
            worst <= 1.0, f"largest difference {worst:.2g} of the allowed "
            f"{MAP_TOLERANCE:g} + {MAP_CONDITION:g}/(ωh)² (at h = {worst_at[0]:.6g} s, "
            f"T = {worst_at[1]:.6g} s)"))
    with budget.stage("record spectrum: the recurrence over the samples"):
        N, P = t.size, periods.size
        u = numpy.zeros((N, P))
        v = numpy.zeros((N, P))
        ui, vi = numpy.zeros(P), numpy.zeros(P)
        for i in range(N - 1):
            m = maps[group[i]]
            ui, vi = (m[0, 0] * ui + m[0, 1] * vi + m[0, 2] * a[i] + m[0, 3] * a[i + 1],
                      m[1, 0] * ui + m[1, 1] * vi + m[1, 2] * a[i] + m[1, 3] * a[i + 1])
            u[i + 1], v[i + 1] = ui, vi
    displacement = numpy.empty(P)
    displacement_time = numpy.empty(P)
    absolute = numpy.empty(P)
    with budget.stage("record spectrum: peaks between the samples"):
        for p in range(P):
            wp = w[p]
            sigma, wd = zeta * wp, wp * math.sqrt(1 - zeta * zeta)
            best_u = numpy.zeros(1)
            best_a = numpy.zeros(1)
            times_u = numpy.zeros(1)
            floor_u = float(numpy.max(numpy.abs(u[:, p])))
            floor_a = float(numpy.max(numpy.abs(2 * sigma * v[:, p] + wp * wp * u[:, p])))
            for g, h in enumerate(lengths):
                index = numpy.flatnonzero(group == g)
                c0, c1, C, D = _segment(h, wp, zeta, u[index, p], v[index, p], a[index],
                                        a[index + 1])
                value, at = _largest_on_segments(h, wp, zeta, c0, c1, C, D, floor_u)
                k = int(numpy.argmax(value))
                if value[k] > best_u[0] or (value[k] == best_u[0] and t[index[k]] < times_u[0]):
                    best_u, times_u = value[k:k + 1], t[index[k]] + at[k:k + 1]
                # absolute acceleration −2σu′ − ω²u
                C1, D1 = -sigma * C + wd * D, -sigma * D - wd * C
                q0, q1 = -2 * sigma * c1 - wp * wp * c0, -wp * wp * c1
                E, F = -2 * sigma * C1 - wp * wp * C, -2 * sigma * D1 - wp * wp * D
                value, _ = _largest_on_segments(h, wp, zeta, q0, q1, E, F, floor_a)
                best_a = numpy.maximum(best_a, value.max(initial=0.0))
            free_u, free_t = _free_largest(wp, zeta, u[-1, p], v[-1, p], "displacement")
            if free_u > best_u[0] * (1 + 1e-15):
                best_u, times_u = numpy.array([free_u]), numpy.array([t[-1] + free_t])
            free_a, _ = _free_largest(wp, zeta, u[-1, p], v[-1, p], "acceleration")
            displacement[p] = best_u[0]
            displacement_time[p] = times_u[0]
            absolute[p] = max(best_a[0], free_a)
    finite = bool(numpy.isfinite(displacement).all() and numpy.isfinite(absolute).all())
    checks.append(RecordCheck("finite results", finite,
                              "every peak finite" if finite else "a peak is not finite"))
    return RecordSpectrum(record, zeta, periods, displacement, displacement_time, absolute,
                          tuple(checks))


# ----------------------------------------------------------------------------- plot


def record_spectrum_figure(spectrum: RecordSpectrum, fmt: str) -> bytes:
    from .plots import record_spectrum_plot
    return record_spectrum_plot(spectrum, fmt)
