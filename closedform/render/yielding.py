"""Section: the yielding spring (issue 15): the resistance function with the path followed,
each phase's equation and pieces, the events, the yield results and the cautions.

Nothing is derived here: the phases, events and results are those of ``plastic``; the
pieces are drawn only to plot spring force against displacement. ``yielding_context`` is
the section builder (``plastic`` in the templates, None for a linear spring); the problem
section takes this module's equation and assumptions for a yielding spring.
"""

from __future__ import annotations

import io
from typing import TYPE_CHECKING, Any

import mpmath
import numpy
import sympy

from .. import plots, quantities
from .escaping import Math, with_subscripts
from .layout import figure_name
from .typesetting import inline, typeset

if TYPE_CHECKING:
    from .context import Sheet

CAUTION = ("The ductility ratio, permanent set and rebound are demands on the member, not "
           "their permissible values: the limits (by member type, material, support and "
           "protection category) come from the applicable codes and the owner's criteria, and "
           "the equivalent resistance function must itself be justified for the member.")
ASSUMPTIONS = {
    "elastic-plastic": "elastic-perfectly-plastic spring: elastic with k up to the yield "
                       "force R_y, then R = ±R_y while the velocity keeps its sign; unloading "
                       "and reloading elastic with k; yielding in the other direction at −R_y",
    "bilinear": "bilinear spring with kinematic hardening: elastic with k between the yield "
                "lines R = k₂·x ± R_y·(1 − k₂/k), on a line while the velocity keeps its sign; "
                "unloading elastic with k",
}
COMMON = ["lumped mass, small displacements, viscous damping with the constant coefficient c "
          "in every phase", "no strength or stiffness degradation, no strain-rate effects, no "
          "rupture: the resistance function holds for every displacement reached"]
PHASE_NOTE = ("Sections 3 and 4 derive the first phase (elastic, from the initial state). Every "
              "later phase is the linear equation of its own line of the resistance function, "
              "solved in the same way by Laplace transform — the response to the load history, "
              "to the phase's constant force and the free response from the state (x, x′) at "
              "the event that opens it — and carried at 30 significant digits. Events are the "
              "roots of the closed form of each piece (x at the yield displacement of the "
              "current branch; x′ changing sign on a yield line), each bracketed alone between "
              "stationary points and refined to 30 digits.")


def _number(value, digits: int = 6) -> str:
    text = mpmath.nstr(mpmath.mpf(value), digits, min_fixed=-4, max_fixed=6)
    text = text[:-2] if text.endswith(".0") else text
    if "e" in text:
        mantissa, exponent = text.split("e")
        return rf"{mantissa} \cdot 10^{{{int(exponent)}}}"
    return text


def _signed(value, digits: int = 6) -> str:
    value = mpmath.mpf(value)
    return (" - " if value < 0 else " + ") + _number(abs(value), digits)


def phase_equation(derivation, phase) -> str:
    """m x'' + c x' + R(x) = b·load of the phase, with its numbers (LaTeX)."""
    p = derivation.case.system.parameters
    m, c = (mpmath.mpf(sympy.N(p[name], 30)) for name in ("mass", "damping"))
    variable = derivation.model.variable
    slope = mpmath.mpf(sympy.N(phase.slope, 30))
    text = rf"{_number(m)}\,\ddot{{{variable}}}"
    if c:
        text += rf" + {_number(c)}\,\dot{{{variable}}}"
    if slope:
        text += rf" + {_number(slope)}\,{variable}"
    if phase.constant:
        text += _signed(phase.constant)
    load = "F(t)" if derivation.case.system.model == "spring-mass-damper" else \
        rf"-{_number(m)}\,a_g(t)"
    return text + f" = {load}"


def force_line(derivation, phase) -> str:
    variable = derivation.model.variable
    slope = mpmath.mpf(sympy.N(phase.slope, 30))
    if not slope:
        return f"R = {_number(phase.constant)}"
    text = rf"R = {_number(slope)}\,{variable}"
    return text + (_signed(phase.constant) if phase.constant else "")


def section(derivation, units, escape, inline, figure: str | None) -> dict[str, Any]:
    """The template values of the yield section (see templates/plastic.*.j2); plain strings
    are escaped by the template's finalize, ``Math`` passes as it is."""
    response = derivation.plastic
    r = response.resistance
    length = quantities.dimension("length")
    force = quantities.dimension("force")
    time = quantities.dimension("time")
    velocity = length / time
    energy = force * length

    def shown(value, dimension, prefer=()):
        if value is None:
            return None
        si, other = units.show(float(value), dimension, prefer)
        return other or si

    phases = []
    for phase in response.phases:
        first, count = phase.first_piece + 1, phase.piece_count
        kind = phase.kind if phase.kind == "elastic" else \
            f"plastic, {'upper' if phase.direction > 0 else 'lower'} yield line"
        phases.append({
            "number": phase.number, "kind": kind,
            "start": shown(phase.start, time, ("time",)), "end": shown(phase.end, time, ("time",)),
            "equation": inline(phase_equation(derivation, phase)),
            "force": inline(force_line(derivation, phase)),
            "pieces": f"{first}" if count == 1 else f"{first} to {first + count - 1}",
        })
    events = [{"number": i, "kind": e.kind, "time": shown(e.time, time, ("time",)),
               "displacement": shown(e.displacement, length, ("displacement",)),
               "velocity": shown(e.velocity, velocity, ("velocity",)),
               "force": shown(e.force, force, ("force",))}
              for i, e in enumerate(response.events, start=1)]
    rows = []

    def row(name, value, dimension, prefer=(), at=None):
        if value is None:
            rows.append({"name": name, "value": "none"})
            return
        text = shown(value, dimension, prefer)
        if at is not None:
            text = Math(text + escape(" at t = ") + shown(at, time, ("time",)))
        rows.append({"name": with_subscripts(name, escape), "value": text})   # x_y as x, y below

    mu = response.ductility
    row("ductility ratio μ = max|x| / x_y", mu.value if mu else None,
        quantities.DIMENSIONLESS, (), mu.time if mu else None)
    row("yield displacement x_y = R_y / k", response.yield_displacement, length,
        ("displacement",))
    row("permanent set (zero-force displacement at the end of the window)",
        response.permanent_set, length, ("displacement",))
    rb = response.rebound
    row("largest rebound (deepest swing back after the peak)", rb.value if rb else None,
        length, ("displacement",), rb.time if rb else None)
    rf = response.rebound_force
    row("largest spring force against the peak's direction", rf.value if rf else None, force,
        ("force",), rf.time if rf else None)
    row("plastic work (1 − k₂/k)·∫R dx over the plastic phases", response.plastic_work,
        energy)
    function = (r"R = k\,(x - x_p)\ \text{between the lines},\quad R = \pm R_y\ \text{on yielding}"
                if r.kind == "elastic-plastic" else
                r"R = k\,(x - x_p)\ \text{between the lines},\quad R = k_2\,x \pm R_y\,(1 - k_2/k)"
                r"\ \text{on yielding}")
    return {
        "kind": r.kind,
        "yield_force": shown(r.yield_force, force, ("force",)),
        "yield_displacement": shown(response.yield_displacement, length, ("displacement",)),
        "post_yield_stiffness": shown(r.post_yield_stiffness, force / length, ("stiffness",))
        if r.kind == "bilinear" else None,
        "function": inline(function),
        "figure": figure,
        "phases": phases,
        "events": events,
        "results": rows,
        "note": PHASE_NOTE,
        "caution": CAUTION,
    }


def assumptions(derivation, base: list[str]) -> list[str]:
    """The sheet's assumptions with the linear spring replaced by the resistance function."""
    kept = [a for a in base if not a.startswith("linear elastic spring")
            and not a.startswith("viscous")]
    return [ASSUMPTIONS[derivation.plastic.resistance.kind], *COMMON, *kept]


# ----------------------------------------------------------------------------- figure


def path_samples(derivation) -> tuple[numpy.ndarray, numpy.ndarray]:
    """Displacement and spring force (SI) along the response, piece by piece."""
    response = derivation.plastic
    xs, rs = [], []
    for n, interval in enumerate(response.intervals):
        length = float(interval.end - interval.start)
        if length <= 0:
            continue
        grid = numpy.linspace(0.0, length, 200)
        x = interval.function.evaluate_float(grid)
        slope, constant = response.force_line(n)
        xs.append(x)
        rs.append(float(slope) * x + float(constant))
    return numpy.concatenate(xs), numpy.concatenate(rs)


def resistance_figure(derivation, fmt: str, displacement_axis, force_axis) -> bytes:
    """Spring force against displacement: the resistance function's yield lines and the
    path the response followed, events marked."""
    import matplotlib
    from matplotlib.figure import Figure

    response = derivation.plastic
    r = response.resistance
    k = float(sympy.N(r.stiffness, 20))
    k2 = float(sympy.N(r.post_yield_stiffness, 20))
    ry = float(sympy.N(r.yield_force, 20))
    x, force = path_samples(derivation)
    with matplotlib.rc_context(plots.STYLE):
        figure = Figure(figsize=plots.FIGURE_SIZE)
        figure.subplots_adjust(**plots.MARGINS)
        axes = figure.subplots()
        span = max(float(numpy.max(numpy.abs(x))), ry / k) * 1.15
        line_x = numpy.array([-span, span])
        for direction in (1, -1):
            intercept = direction * ry * (1 - k2 / k)
            axes.plot(line_x * displacement_axis.scale, (k2 * line_x + intercept) * force_axis.scale,
                      color="#999999", linewidth=0.8, linestyle="--")
        axes.plot(x * displacement_axis.scale, force * force_axis.scale,
                  color=plots.RESPONSE_COLOUR, linewidth=1.2)
        for event in response.events:
            axes.plot([float(event.displacement) * displacement_axis.scale],
                      [float(event.force) * force_axis.scale], marker="o", markersize=3.5,
                      color=plots.PEAK_COLOUR, linestyle="none")
        axes.axhline(0.0, color="#808080", linewidth=0.6)
        axes.axvline(0.0, color="#808080", linewidth=0.6)
        axes.set_xlim(-span * displacement_axis.scale, span * displacement_axis.scale)
        reach = max(1.6 * ry, 1.15 * float(numpy.max(numpy.abs(force))))
        axes.set_ylim(-reach * force_axis.scale, reach * force_axis.scale)
        axes.set_xlabel(displacement_axis.label.replace("$", r"\$"))
        axes.set_ylabel(force_axis.label.replace("$", r"\$"))
        buffer = io.BytesIO()
        metadata = ({"Date": None, "Creator": plots.CREATOR} if fmt == "svg" else
                    {"CreationDate": None, "ModDate": None, "Creator": plots.CREATOR,
                     "Producer": plots.CREATOR})
        figure.savefig(buffer, format=fmt, metadata=metadata)
        return buffer.getvalue()


EQUATIONS = {"spring-mass-damper": r"m\,\ddot{x} + c\,\dot{x} + R(x) = F(t)",
             "base-excitation": r"m\,\ddot{u} + c\,\dot{u} + R(u) = -m\,a_g(t)"}


def equation_with_values(derivation):
    """m x'' + c x' + R(x) = b·load with the case's m, c and b (R is the resistance
    function, its lines are in the phase table)."""
    model = derivation.model
    m, c, _k = model.coefficients
    v = model.variable
    left = [rf"{typeset(m)}\,\ddot{{{v}}}"]
    if c != 0:
        left.append(rf"{typeset(c)}\,\dot{{{v}}}")
    left.append(f"R({v})")
    load = rf"{model.load_name}(t)"
    scale = model.input_scale
    right = load if scale == 1 else rf"-{typeset(-scale)}\,{load}"
    return Math(" + ".join(left) + " = " + right)


def is_yielding(derivation) -> bool:
    """Whether the derivation is that of a yielding spring (it carries ``plastic``)."""
    return getattr(derivation, "plastic", None) is not None


def yielding_context(sheet: Sheet) -> dict[str, Any]:
    """The yield section of the sheet (templates/plastic.*.j2), None for a linear spring."""
    derivation = sheet.derivation
    if not is_yielding(derivation):
        return {"plastic": None}
    figure = (Math(figure_name(sheet.stem, "resistance", sheet.flavour.figure_suffix))
              if plots.plottable(derivation) else None)
    return {"plastic": section(derivation, sheet.units, sheet.escape, inline, figure)}
