"""Independent checks of a yielding-spring response (issue 15).

Nothing here uses the phase solver (``plastic``), the Laplace engine or the load rewrite:
the load is evaluated from each load's own definition (the shape table of the design
brief), the resistance function from the case's ``[system.resistance]``, and the pieces are
read term by term from what the derivation reports. The checks:

* **independent integration of the yielding equation**: m x'' + c x' + R(x) = b·load(t)
  with the hysteretic R (elastic with k between the yield lines, on a line while the
  velocity keeps its sign, elastic again when it changes sign) integrated by mpmath's Taylor
  series method (``mpmath.odefun``) at 20 digits, restarted at every load breakpoint and at
  every event. Events are located on the integrated solution (sign changes on a grid of
  1/32 of the shortest period, then the Illinois method on the integrated solution) — a
  method of its own, not the closed form.
  The pieces, the events (kind and time) and the ductility must agree with it (relative
  1e-9 of the largest displacement; times to 1e-9 of the shortest period).
* **continuity at every event**: x and x′ of the pieces on both sides agree at every piece
  boundary (x′ jumping by exactly b·J/m where an impulse J acts), to 1e-20 relative.
* **spring force on its branch**: R(t) = b·load(t) − m x'' − c x' from each piece (own load
  evaluation) equals ±R_y (elastic-plastic) or k₂·x ± R_y(1 − k₂/k) (bilinear) along every
  plastic piece, and stays between the two yield lines along every elastic piece, with
  R − k·x constant over each elastic phase.
* **energy balance with plastic work**: the work of the load ∫ b·F·x′ dt (impulses
  J·b·(x′⁻ + x′⁺)/2) equals the change of kinetic energy, the damping work ∫ c x′² dt, the
  change of elastic energy R²/(2k) and the reported plastic work, to 1e-12 of the work put
  in (12-point Gauss–Legendre on spans of a quarter of the shortest period, 24 digits).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import lru_cache

import mpmath
import sympy
from mpmath.calculus.quadrature import GaussLegendre

from ..specs import TAU, Case
from .base import Check

DPS = 24
INTEGRATION_DPS = 20             # the integration: 5 orders beyond its 1e-9 tolerance and more
AGREEMENT = mpmath.mpf("1e-9")
CONTINUITY = mpmath.mpf("1e-20")
FORCE = mpmath.mpf("1e-15")
ENERGY = mpmath.mpf("1e-12")
GRID = 32                      # samples per shortest period for locating events


def _root(g, a, b):
    """A sign change of g in [a, b] narrowed by the Illinois method (bisection fallback)."""
    ga, gb = g(a), g(b)
    if ga == 0:
        return a
    if gb == 0:
        return b
    side = 0
    for _ in range(300):
        c = (a * gb - b * ga) / (gb - ga) if gb != ga else (a + b) / 2
        if not a < c < b:
            c = (a + b) / 2
        gc = g(c)
        if gc == 0:
            return c
        if (gc > 0) == (gb > 0):
            b, gb = c, gc
            if side == 1:
                ga /= 2
            side = 1
        else:
            a, ga = c, gc
            if side == -1:
                gb /= 2
            side = -1
        if b - a <= mpmath.eps * 16 * max(1, abs(b)):
            break
    return (a + b) / 2


def _mp(value) -> mpmath.mpf:
    return mpmath.mpf(sympy.Float(sympy.N(value, DPS + 10), DPS + 10)._mpf_)


@dataclass(frozen=True)
class _Branch:
    start: mpmath.mpf
    end: mpmath.mpf | None
    value: Callable


def _shifted(function: Callable, start) -> Callable:
    return lambda t: function(t - start)


def load_model(case: Case) -> tuple[list[_Branch], list[tuple[mpmath.mpf, mpmath.mpf]]]:
    """The load from each load's definition: branches (start, end, value(t)) and impulses."""
    branches: list[_Branch] = []
    impulses = []
    for load in case.loads:
        v = {name: _mp(value) for name, value in load.values.items()}
        for start in (_mp(s) for s in load.starts()):
            def add(lo, hi, function, start=start):
                branches.append(_Branch(start + lo, None if hi is None else start + hi,
                                        _shifted(function, start)))
            shape = load.shape
            a = v.get("amplitude")
            if shape == "step":
                add(0, None, lambda u, a=a: a)
            elif shape == "ramp":
                r, d = v["rate"], v.get("duration")
                add(0, d, lambda u, r=r: r * u)
                if d is not None:
                    add(d, None, lambda u, r=r, d=d: r * d)
            elif shape == "impulse":
                impulses.append((start, v["impulse"]))
            elif shape == "rectangle":
                add(0, v["duration"], lambda u, a=a: a)
            elif shape == "decay":
                add(0, v["duration"], lambda u, a=a, d=v["duration"]: a * (1 - u / d))
            elif shape == "half-sine":
                add(0, v["duration"], lambda u, a=a, d=v["duration"]: a * mpmath.sin(mpmath.pi * u / d))
            elif shape == "triangle":
                d = v["duration"]
                p = v.get("peak_at", mpmath.mpf(1) / 2) * d
                if p > 0:
                    add(0, p, lambda u, a=a, p=p: a * u / p)
                if d > p:
                    add(p, d, lambda u, a=a, p=p, d=d: a * (d - u) / (d - p))
            elif shape == "trapezoid":
                r, h, f = v["rise"], v["hold"], v["fall"]
                if r > 0:
                    add(0, r, lambda u, a=a, r=r: a * u / r)
                if h > 0:
                    add(r, r + h, lambda u, a=a: a)
                if f > 0:
                    add(r + h, r + h + f, lambda u, a=a, e=r + h + f, f=f: a * (e - u) / f)
            elif shape == "table":
                points = [(_mp(t), _mp(y)) for t, y in load.points]
                for (t0, y0), (t1, y1) in zip(points, points[1:]):
                    if t1 > t0:
                        add(t0, t1, lambda u, t0=t0, y0=y0, t1=t1, y1=y1:
                            y0 + (y1 - y0) * (u - t0) / (t1 - t0))
            elif shape == "formula":
                function = sympy.lambdify(TAU, load.expression, "mpmath")
                add(0, v["duration"], lambda u, f=function: mpmath.mpf(f(u)))
            else:
                raise ValueError(f"unknown load shape {shape!r}")
    return branches, impulses


def _load_at(branches, t, side: int = 1):
    """The load just after (side +1) or just before (−1) t."""
    total = mpmath.mpf(0)
    for b in branches:
        inside = (b.start <= t and (b.end is None or t < b.end)) if side > 0 else \
            (b.start < t and (b.end is None or t <= b.end))
        if inside:
            total += b.value(t)
    return total


class _Law:
    """The case's equation and resistance function, from the parameters."""

    def __init__(self, case: Case) -> None:
        p = case.system.parameters
        r = case.system.resistance
        self.m, self.c, self.k = _mp(p["mass"]), _mp(p["damping"]), _mp(p["stiffness"])
        self.b = mpmath.mpf(1) if case.system.model == "spring-mass-damper" else -self.m
        self.ry, self.k2 = _mp(r.yield_force), _mp(r.post_yield_stiffness)
        self.kind = r.kind

    def line(self, direction: int, x):
        """The yield line's force at x: ±R_y, or k₂x ± R_y(1 − k₂/k)."""
        return self.k2 * x + direction * self.ry * (1 - self.k2 / self.k)

    def threshold(self, offset, direction: int):
        """Where k(x − x_p) meets the yield line ``direction``."""
        return (self.k * offset + direction * self.ry * (1 - self.k2 / self.k)) / (self.k - self.k2)


def _piece_function(piece):
    """x, x′, x″ of a reported piece at a global time, read from its terms."""
    start = _mp(piece.start)
    rows = [(mode.power, _mp(mode.rate), _mp(mode.frequency), mode.kind, _mp(c))
            for mode, c in piece.local.terms.items()]

    def evaluate(t):
        u = t - start
        x = v = a = mpmath.mpf(0)
        for power, rate, freq, kind, c in rows:
            # d/du of c·u^p·e^(σu)·trig(ωu) by the product rule, twice
            g = [u**power, power * u ** (power - 1) if power else 0,
                 power * (power - 1) * u ** (power - 2) if power > 1 else 0]
            e = mpmath.exp(rate * u)
            if freq:
                cs, sn = mpmath.cos(freq * u), mpmath.sin(freq * u)
                h = [cs, -freq * sn, -freq**2 * cs] if kind == "cos" else [sn, freq * cs, -freq**2 * sn]
            else:
                h = [1, 0, 0]
            w = [e, rate * e, rate**2 * e]
            gh = [g[0] * h[0], g[1] * h[0] + g[0] * h[1],
                  g[2] * h[0] + 2 * g[1] * h[1] + g[0] * h[2]]
            x += c * gh[0] * w[0]
            v += c * (gh[1] * w[0] + gh[0] * w[1])
            a += c * (gh[2] * w[0] + 2 * gh[1] * w[1] + gh[0] * w[2])
        return x, v, a
    return evaluate


def _ends(derivation):
    until = _mp(derivation.window.until)
    pieces = derivation.pieces
    return [(_mp(p.start), _mp(p.end) if p.end is not None else until) for p in pieces]


# ----------------------------------------------------------------------------- integration


def integrate(case: Case, until) -> tuple[list, list, Callable]:
    """The yielding equation integrated on [0, until]: (events [(time, kind)], turning
    points [(time, x)], x(t) for any t) — own method throughout (see the module text)."""
    law = _Law(case)
    branches, impulses = load_model(case)
    marks = {mpmath.mpf(0), until}
    for b in branches:
        marks |= {b.start} | ({b.end} if b.end is not None else set())
    marks |= {t for t, _ in impulses}
    times = sorted(t for t in marks if 0 <= t <= until)
    stiffest = max(law.k, law.k2)
    period = 2 * mpmath.pi / mpmath.sqrt(stiffest / law.m)
    if law.c:
        period = min(period, law.m / law.c)
    step = period / GRID
    initial = case.initial or (0, 0)
    x, v = _mp(initial[0]), _mp(initial[1])
    branch, direction, offset, last = "elastic", 0, mpmath.mpf(0), 0
    events, turning, stretches = [], [], []
    noise = mpmath.mpf(10) ** (-INTEGRATION_DPS + 6) * law.ry / law.k
    for t0, t1 in zip(times, times[1:]):
        v += sum((law.b * j / law.m for t, j in impulses if t == t0), mpmath.mpf(0))
        if branch == "plastic" and direction * v < 0:
            events.append((t0, "unload"))
            offset = x - law.line(direction, x) / law.k
            branch, direction = "elastic", 0
        start = t0
        middle = (t0 + t1) / 2
        active = [b for b in branches if b.start <= middle and (b.end is None or middle < b.end)]
        while start < t1:
            def force(t, y, branch=branch, direction=direction, offset=offset, active=active):
                load = sum((b.value(t) for b in active), mpmath.mpf(0))
                spring = law.k * (y[0] - offset) if branch == "elastic" else law.line(direction, y[0])
                return [y[1], (law.b * load - law.c * y[1] - spring) / law.m]
            solution = mpmath.odefun(force, start, [x, v])

            def g_of(t, d, branch=branch, offset=offset, solution=solution):
                if branch == "elastic":
                    return d * (solution(t)[0] - law.threshold(offset, d))
                return solution(t)[1]
            count = max(2, int(mpmath.ceil((t1 - start) / step)))
            grid = [start + (t1 - start) * i / count for i in range(count + 1)]
            hit = None
            previous = solution(grid[0])
            for a, b in zip(grid, grid[1:]):
                current = solution(b)        # one evaluation of the series per grid point
                if previous[1] * current[1] < 0:
                    root = _root(lambda t, s=solution: s(t)[1], a, b)
                    turning.append((root, solution(root)[0]))
                if branch == "elastic":
                    for d in (1, -1):
                        level = law.threshold(offset, d)
                        ga, gb = d * (previous[0] - level), d * (current[0] - level)
                        if ga <= noise < gb:
                            root = a if ga >= 0 else _root(
                                lambda t, d=d: g_of(t, d), a, b)
                            if hit is None or root < hit[0]:
                                hit = (root, d)
                elif direction * current[1] < 0:
                    hit = (_root(lambda t, s=solution: s(t)[1], a, b), 0)
                previous = current
                if hit is not None:
                    break
            end = t1 if hit is None else hit[0]
            stretches.append((start, end, solution))
            x, v = solution(end)
            if hit is None:
                break
            if branch == "elastic":
                d = hit[1]
                events.append((end, "reverse-yield" if last and d != last else "yield"))
                branch, direction, last = "plastic", d, d
            else:
                events.append((end, "unload"))
                offset = x - law.line(direction, x) / law.k
                branch, direction = "elastic", 0
            start = end

    def displacement(t):
        for a, b, solution in stretches:
            if a <= t <= b:
                return solution(t)[0]
        raise ValueError("time outside the integrated window")
    turning.append((until, x))
    return events, turning, displacement


def integration_check(derivation) -> Check:
    name = "independent integration of the yielding equation"
    response = derivation.plastic
    with mpmath.workdps(INTEGRATION_DPS):
        until = _mp(derivation.window.until)
        try:
            events, turning, displacement = integrate(derivation.case, until)
        except (ValueError, ZeroDivisionError) as failure:
            return Check(name, False, f"the integration could not be completed: {failure}")
        law = _Law(derivation.case)
        period = 2 * mpmath.pi / mpmath.sqrt(max(law.k, law.k2) / law.m)
        scale = max([abs(x) for _, x in turning] + [law.ry / law.k])
        worst = mpmath.mpf(0)
        where = None
        for piece, (a, b) in zip(derivation.pieces, _ends(derivation)):
            evaluate = _piece_function(piece)
            for i in range(1, 5):
                t = a + (b - a) * i / 5
                error = abs(evaluate(t)[0] - displacement(t)) / scale
                if error > worst:
                    worst, where = error, t
        reported = [(mpmath.mpf(e.time), e.kind) for e in response.events]
        if [k for _, k in events] != [k for _, k in reported]:
            return Check(name, False, f"events differ: integration {[k for _, k in events]} at "
                                      f"{[float(t) for t, _ in events]} s, derivation "
                                      f"{[k for _, k in reported]}")
        shift = max([abs(a - b) for (a, _), (b, _) in zip(events, reported)], default=0)
        largest = max(abs(x) for _, x in turning)
        mu = largest / (law.ry / law.k)
        mu_error = abs(mu - response.ductility.value_mp) / mu if response.ductility else 1
        passed = worst <= AGREEMENT and shift <= AGREEMENT * period and mu_error <= AGREEMENT
        return Check(name, passed,
                     f"Taylor-series integration at {INTEGRATION_DPS} digits: largest difference of x "
                     f"{float(worst):.2e} of max|x| (at t = {float(where or 0):.6g} s), "
                     f"{len(events)} events of the same kinds, times within "
                     f"{float(shift):.2e} s; ductility {float(mu):.10g} "
                     f"(relative difference {float(mu_error):.1e}); tolerance {float(AGREEMENT):g}")


# ----------------------------------------------------------------------------- pieces


def continuity_check(derivation) -> Check:
    name = "continuity of x and x′ at every event and breakpoint"
    law = _Law(derivation.case)
    _branches, impulses = load_model(derivation.case)
    with mpmath.workdps(DPS + 10):
        scale_x = law.ry / law.k
        scale_v = scale_x * mpmath.sqrt(max(law.k, law.k2) / law.m)
        worst = mpmath.mpf(0)
        ends = _ends(derivation)
        for (left, right), (_a, b) in zip(zip(derivation.pieces, derivation.pieces[1:]), ends):
            xl, vl, _ = _piece_function(left)(b)
            xr, vr, _ = _piece_function(right)(b)
            jump = sum((law.b * j / law.m for t, j in impulses if abs(t - b) <= CONTINUITY * (1 + b)),
                       mpmath.mpf(0))
            worst = max(worst, abs(xr - xl) / scale_x, abs(vr - vl - jump) / (scale_v + abs(jump)))
        passed = worst <= CONTINUITY
        return Check(name, passed, f"{len(ends) - 1} boundaries ({len(derivation.plastic.events)} "
                                   f"events): largest relative mismatch {float(worst):.1e} "
                                   f"(tolerance {float(CONTINUITY):g})")


def force_check(derivation) -> Check:
    name = "spring force on its branch along every piece"
    law = _Law(derivation.case)
    branches, _ = load_model(derivation.case)
    response = derivation.plastic
    with mpmath.workdps(DPS + 10):
        worst = mpmath.mpf(0)
        where = ""
        offsets: dict[int, list] = {}
        for n, (piece, (a, b)) in enumerate(zip(derivation.pieces, _ends(derivation))):
            phase = response.phases[response.piece_phases[n]]
            evaluate = _piece_function(piece)
            for i in range(0, 7):
                t = a + (b - a) * (i + mpmath.mpf(1) / 2) / 7
                x, v, acc = evaluate(t)
                r = law.b * _load_at(branches, t) - law.m * acc - law.c * v
                if phase.kind == "plastic":
                    error = abs(r - law.line(phase.direction, x)) / law.ry
                else:
                    low, high = law.line(-1, x), law.line(1, x)
                    error = max(0, (low - r) / law.ry, (r - high) / law.ry)
                    offsets.setdefault(phase.number, []).append(r - law.k * x)
                if error > worst:
                    worst, where = error, f"piece {n + 1} ({phase.kind})"
        for values in offsets.values():
            spread = (max(values) - min(values)) / law.ry
            if spread > worst:
                worst, where = spread, "R − k·x not constant in an elastic phase"
        passed = worst <= FORCE
        return Check(name, passed, f"R = b·F − m·x″ − c·x′ at 7 points per piece: plastic "
                                   f"pieces on the yield line, elastic ones between the lines; "
                                   f"largest deviation {float(worst):.1e} of R_y"
                                   f"{' (' + where + ')' if where and not passed else ''}; "
                                   f"tolerance {float(FORCE):g}")


@lru_cache(maxsize=1)
def _gauss_nodes() -> tuple:
    """12-point Gauss–Legendre nodes and weights on [−1, 1] (mpmath's own table)."""
    with mpmath.workdps(DPS + 10):
        rule = GaussLegendre(mpmath.mp)
        return tuple(rule.calc_nodes(3, mpmath.mp.prec))


def _shortest_time(law: _Law):
    period = 2 * mpmath.pi / mpmath.sqrt(max(law.k, law.k2) / law.m)
    return min(period, law.m / law.c) if law.c else period


def energy_check(derivation) -> Check:
    name = "energy balance with plastic work"
    law = _Law(derivation.case)
    branches, impulses = load_model(derivation.case)
    response = derivation.plastic
    with mpmath.workdps(DPS):
        work_in = damping = mpmath.mpf(0)
        ends = _ends(derivation)
        nodes = _gauss_nodes()
        # quarter of the shortest period (or decay time) per 12-point Gauss–Legendre span:
        # its error for e^(iωt) is below (π/2)^24/24! ≈ 1e-19 of the integrand
        span = _shortest_time(law) / 4
        for piece, (a, b) in zip(derivation.pieces, ends):
            if b <= a:
                continue
            evaluate = _piece_function(piece)
            inner = sorted({a, b} | {br.start for br in branches if a < br.start < b}
                           | {br.end for br in branches if br.end is not None and a < br.end < b})
            for lo, hi in zip(inner, inner[1:]):
                steps = max(1, int(mpmath.ceil((hi - lo) / span)))
                for n in range(steps):
                    left, width = lo + (hi - lo) * n / steps, (hi - lo) / steps
                    for node, weight in nodes:
                        t = left + width * (node + 1) / 2
                        velocity = evaluate(t)[1]
                        work_in += weight * width / 2 * law.b * _load_at(branches, t) * velocity
                        damping += weight * width / 2 * law.c * velocity**2
        for t, j in impulses:
            if t >= ends[-1][1]:
                continue
            # the piece that starts at the impulse (times compared to a relative 1e-20: the
            # same instant read at different precisions)
            after = max(i for i, (a, _b) in enumerate(ends) if a <= t + CONTINUITY * (1 + t))
            v_after = _piece_function(derivation.pieces[after])(t)[1]
            v_before = v_after - law.b * j / law.m
            work_in += law.b * j * (v_before + v_after) / 2
        x0, v0 = (_mp(value) for value in (derivation.case.initial or (0, 0)))
        x1, v1, a1 = _piece_function(derivation.pieces[-1])(ends[-1][1])
        r0 = law.k * x0
        r1 = law.b * _load_at(branches, ends[-1][1], -1) - law.m * a1 - law.c * v1
        kinetic = law.m * (v1**2 - v0**2) / 2
        elastic = (r1**2 - r0**2) / (2 * law.k)
        plastic = response.plastic_work
        scale = max(abs(work_in), abs(kinetic) + abs(elastic) + abs(damping) + abs(plastic),
                    law.ry**2 / law.k)
        residual = work_in - kinetic - damping - elastic - plastic
        passed = abs(residual) <= ENERGY * scale and plastic >= -ENERGY * scale
        return Check(name, passed,
                     f"work of the load {float(work_in):.10g} J = kinetic {float(kinetic):.10g} "
                     f"+ damping {float(damping):.10g} + elastic {float(elastic):.10g} + plastic "
                     f"{float(plastic):.10g} J; residual {float(residual / scale):.1e} of the "
                     f"energies (tolerance {float(ENERGY):g})")


def plastic_checks(derivation) -> list[Check]:
    """Every independent check of a yielding-spring derivation (see the module text)."""
    checks = []
    for check in (integration_check, continuity_check, force_check, energy_check):
        try:
            with mpmath.workdps(DPS + 10):      # parameters and loads read at full precision
                checks.append(check(derivation))
        except (ArithmeticError, ValueError) as error:       # a check that breaks fails
            checks.append(Check(check.__name__.replace("_", " "), False,
                                f"could not be evaluated: {error}"))
    if not all(math.isfinite(float(response)) for response in
               (derivation.plastic.plastic_work, derivation.plastic.permanent_set)):
        checks.append(Check("finite yield results", False, "plastic work or permanent set "
                                                             "is not finite"))
    return checks
