"""Plots for the derivation sheet: the load history and the response with its peak marked.

Nothing is derived here: the Derivation's load terms and response pieces are only evaluated
on a grid for drawing, and the peak is the one the results stage found. Every figure is
reproducible byte for byte on a given matplotlib version: fixed size and fonts, fixed SVG
ids (``svg.hashsalt``), text drawn as paths, and no dates in the metadata.

matplotlib is imported only when a figure is drawn, and only its object interface is used
(no pyplot, no global backend switch), so drawing a sheet changes no global state.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy

from .basis import COS
from .errors import ClosedformError
from .results import real_number

FIGURE_SIZE = (6.4, 2.9)          # inches; the same for every sheet
SAMPLES = 1600                    # grid points over the analysis window, at least
POINTS_PER_SCALE = 32             # grid points per shortest period or decay time
SAMPLE_LIMIT = 20000              # per piece
RESPONSE_COLOUR = "#1d4e89"
LOAD_COLOUR = "#8c510a"
PEAK_COLOUR = "#c0392b"
IMPULSE_COLOUR = "#5b2a86"

STYLE = {
    "font.family": "DejaVu Sans",   # ships with matplotlib: the same glyphs on every machine
    "font.size": 8.5,
    "axes.grid": True,
    "grid.color": "#d9d9d9",
    "grid.linewidth": 0.6,
    "axes.linewidth": 0.8,
    "lines.linewidth": 1.3,
    "svg.fonttype": "path",
    "svg.hashsalt": "closedform-sheet",
    "pdf.fonttype": 3,
    "path.simplify": True,
}
CREATOR = "closedform"
MARGINS = {"left": 0.11, "right": 0.98, "bottom": 0.16, "top": 0.96}


@dataclass(frozen=True)
class Axis:
    """How one axis is labelled and scaled: ``label`` is plain text such as "x [mm]",
    ``scale`` multiplies the SI value (1000 for mm)."""

    label: str
    scale: float


def plottable(derivation) -> bool:
    """Whether the response has numbers to draw (every symbol valued, at least one piece)."""
    return derivation.case.is_fully_valued and bool(derivation.pieces)


def _float(value, substitutions) -> float:
    return float(real_number(value, substitutions))


def response_samples(derivation, count: int = SAMPLES) -> tuple[numpy.ndarray, numpy.ndarray]:
    """Times and values (SI) of the response on a grid over [0, until], piece by piece.

    Each piece is evaluated on its own interval in its local time, so both sides of a
    breakpoint appear (a jump, if any, shows as a vertical line).
    """
    values = derivation.case.symbol_values()
    until = _float(derivation.window.until, values)
    starts = [_float(piece.start, values) for piece in derivation.pieces]
    ends = starts[1:] + [until]
    times: list[numpy.ndarray] = []
    responses: list[numpy.ndarray] = []
    for piece, start, end in zip(derivation.pieces, starts, ends):
        if end <= start:
            continue
        function = piece.numeric if getattr(piece, "numeric", None) is not None \
            else piece.local.numeric(values)
        points = max(8, math.ceil(count * (end - start) / until))
        scale = function.fastest_scale()
        if math.isfinite(scale) and scale > 0:
            points = max(points, math.ceil((end - start) / scale * POINTS_PER_SCALE))
        grid = numpy.linspace(start, end, min(points, SAMPLE_LIMIT) + 1)
        with numpy.errstate(over="ignore", invalid="ignore"):
            responses.append(function.evaluate_float(grid - start))
        times.append(grid)
    if not times:
        return numpy.zeros(0), numpy.zeros(0)
    return numpy.concatenate(times), numpy.concatenate(responses)


def _term_numbers(term, substitutions) -> tuple[float, float, int, float, float, str]:
    """(at, coefficient, power, rate, frequency, kind) of one singularity term, as floats."""
    mode = term.mode
    return (_float(term.at, substitutions), _float(term.coefficient, substitutions), mode.power,
            _float(mode.rate, substitutions), _float(mode.frequency, substitutions), mode.kind)


def _term_value(numbers, grid: numpy.ndarray, inclusive: bool) -> numpy.ndarray:
    """One singularity term c·g(t − a)·H(t − a) on the grid; H(0) is 1 when inclusive."""
    at, coefficient, power, rate, frequency, kind = numbers
    local = grid - at
    active = local >= 0 if inclusive else local > 0
    local = numpy.where(active, local, 0.0)
    value = coefficient * local**power * numpy.exp(rate * local)
    if frequency != 0:
        value = value * (numpy.cos(frequency * local) if kind == COS
                         else numpy.sin(frequency * local))
    return numpy.where(active, value, 0.0)


def load_samples(derivation, count: int = SAMPLES) -> tuple[numpy.ndarray, numpy.ndarray]:
    """Times and values (SI) of the load from its singularity terms, with both one-sided
    values at every breakpoint so that steps are drawn as steps."""
    history = derivation.history
    values = derivation.case.symbol_values()
    until = _float(derivation.window.until, values)
    terms = [_term_numbers(term, values) for term in history.terms]
    breakpoints = numpy.array(sorted({numbers[0] for numbers in terms if numbers[0] <= until}))
    grid = numpy.union1d(numpy.linspace(0.0, until, count + 1), breakpoints)
    with numpy.errstate(over="ignore", invalid="ignore"):
        right = sum((_term_value(numbers, grid, True) for numbers in terms),
                    numpy.zeros_like(grid))
        left = sum((_term_value(numbers, breakpoints, False) for numbers in terms),
                   numpy.zeros_like(breakpoints))
    left_at = dict(zip(breakpoints.tolist(), left.tolist()))
    times, loads = [], []
    for time, value in zip(grid.tolist(), right.tolist()):
        if time in left_at:
            times.append(time)
            loads.append(left_at[time])
        times.append(time)
        loads.append(value)
    return numpy.array(times), numpy.array(loads)


def _plain(text: str) -> str:
    """User text shown in a figure: no mathtext."""
    return text.replace("$", r"\$")


def _new_figure():
    try:
        from matplotlib.figure import Figure
    except ImportError:  # pragma: no cover - matplotlib is a dependency
        raise ClosedformError("plots need matplotlib (pip install matplotlib)")
    figure = Figure(figsize=FIGURE_SIZE)
    figure.subplots_adjust(**MARGINS)   # fixed margins: the same layout on every machine
    return figure


def _save(figure, fmt: str) -> bytes:
    buffer = io.BytesIO()
    if fmt == "svg":
        metadata = {"Date": None, "Creator": CREATOR}
    elif fmt == "pdf":
        metadata = {"CreationDate": None, "ModDate": None, "Creator": CREATOR, "Producer": CREATOR}
    else:
        raise ValueError(f"unknown figure format {fmt!r}")
    figure.savefig(buffer, format=fmt, metadata=metadata)
    return buffer.getvalue()


def response_figure(derivation, fmt: str, time_axis: Axis, value_axis: Axis,
                    peak_label: str | None) -> bytes:
    """The response over the analysis window, the peak marked and labelled."""
    import matplotlib

    with matplotlib.rc_context(STYLE):
        figure = _new_figure()
        axes = figure.subplots()
        times, values = response_samples(derivation)
        axes.plot(times * time_axis.scale, values * value_axis.scale, color=RESPONSE_COLOUR)
        axes.axhline(0.0, color="#808080", linewidth=0.6)
        peak = derivation.numbers.peak
        if peak is not None:
            x, y = peak.time * time_axis.scale, peak.value * value_axis.scale
            axes.plot([x], [y], marker="o", markersize=5, color=PEAK_COLOUR, linestyle="none")
            if peak_label:
                axes.annotate(_plain(peak_label), (x, y), textcoords="offset points",
                              xytext=(8, -10 if y >= 0 else 6), color=PEAK_COLOUR)
        axes.set_xlabel(_plain(time_axis.label))
        axes.set_ylabel(_plain(value_axis.label))
        axes.set_xlim(0.0, times[-1] * time_axis.scale if len(times) else 1.0)
        axes.margins(y=0.12)
        return _save(figure, fmt)


def load_figure(derivation, fmt: str, time_axis: Axis, value_axis: Axis,
                impulse_labels: Sequence[tuple[float, str]] = ()) -> bytes:
    """The load history from its singularity terms; impulses drawn as arrows, labelled
    with their areas (arrow heights not to scale)."""
    import matplotlib

    with matplotlib.rc_context(STYLE):
        figure = _new_figure()
        axes = figure.subplots()
        times, loads = load_samples(derivation)
        axes.plot(times * time_axis.scale, loads * value_axis.scale, color=LOAD_COLOUR)
        axes.axhline(0.0, color="#808080", linewidth=0.6)
        axes.set_xlim(0.0, times[-1] * time_axis.scale)
        if impulse_labels:
            low, high = axes.get_ylim()
            top = high if high > 0 else 1.0
            if not numpy.any(loads):
                axes.set_ylim(-0.1, 1.25)
                top = 1.0
            for time, label in impulse_labels:
                x = time * time_axis.scale
                axes.annotate("", xy=(x, 0.85 * top), xytext=(x, 0.0),
                              arrowprops={"arrowstyle": "-|>", "color": IMPULSE_COLOUR,
                                          "linewidth": 1.3})
                axes.annotate(_plain(label), (x, 0.85 * top), textcoords="offset points",
                              xytext=(3, 3), color=IMPULSE_COLOUR)
            if not numpy.any(loads):
                axes.set_yticks([])
        axes.set_xlabel(_plain(time_axis.label))
        axes.set_ylabel(_plain(value_axis.label))
        axes.margins(y=0.12)
        return _save(figure, fmt)


def draw(derivation, ax=None):
    """The response over the analysis window on ``ax`` (its peak marked) and the load on
    twin axes, in SI units, for interactive use; returns ``ax``.

    Without ``ax`` the current axes of pyplot are used (this is the one place that uses
    pyplot: a notebook shows its figures). The samples are those of the sheet's figures.
    """
    if not plottable(derivation):
        raise ClosedformError("the response is symbolic; give every symbol a value to plot it")
    if ax is None:
        from matplotlib import pyplot

        ax = pyplot.gca()
    from . import quantities

    system = derivation.case.system
    variable = derivation.model.variable
    times, values = response_samples(derivation)
    ax.plot(times, values, color=RESPONSE_COLOUR, label=f"response {variable}")
    ax.axhline(0.0, color="#808080", linewidth=0.6)
    peak = derivation.numbers.peak
    if peak is not None:
        ax.plot([peak.time], [peak.value], marker="o", markersize=5, color=PEAK_COLOUR,
                linestyle="none", label="peak")
    ax.set_xlabel("t [s]")
    ax.set_ylabel(_plain(f"{variable} [{quantities.si_unit_text(system.response_dimension)}]"),
                  color=RESPONSE_COLOUR)
    load_times, loads = load_samples(derivation)
    twin = ax.twinx()
    twin.plot(load_times, loads, color=LOAD_COLOUR, linewidth=1.0, label=derivation.model.load_name)
    twin.set_ylabel(_plain(f"{derivation.model.load_name} "
                           f"[{quantities.si_unit_text(system.load_dimension)}]"),
                    color=LOAD_COLOUR)
    ax.set_xlim(0.0, times[-1] if len(times) else 1.0)
    title = derivation.case.title
    if title:
        ax.set_title(_plain(title))
    ax.figure.sca(ax)          # the twin became the current axes; give them back
    return ax


def record_spectrum_plot(spectrum, fmt: str) -> bytes:
    """Response spectrum of a record (records.RecordSpectrum) on log axes: pseudo- and
    absolute acceleration, and spectral displacement, against the period (SI). Reproducible
    byte for byte like the sheet figures."""
    import matplotlib
    from matplotlib.figure import Figure

    points = spectrum.points()
    periods = [p["period"] for p in points]
    style = dict(STYLE, **{"svg.hashsalt": "closedform-record-spectrum"})
    with matplotlib.rc_context(style):
        figure = Figure(figsize=(6.4, 3.4), layout="constrained")
        left, right = figure.subplots(1, 2)
        left.plot(periods, [p["pseudo_acceleration"] for p in points], color=RESPONSE_COLOUR,
                  label="pseudo-acceleration ω²D")
        left.plot(periods, [p["absolute_acceleration"] for p in points], color=LOAD_COLOUR,
                  linestyle="--", label="peak absolute acceleration")
        left.set_ylabel("acceleration [m/s²]")
        right.plot(periods, [p["displacement"] for p in points], color=RESPONSE_COLOUR,
                   label="spectral displacement D")
        right.set_ylabel("displacement [m]")
        for axes in (left, right):
            if len(periods) > 1 and max(periods) > min(periods):
                axes.set_xscale("log")
            positive = [y for line in axes.get_lines() for y in line.get_ydata() if y > 0]
            if positive:
                axes.set_yscale("log")
            axes.set_xlabel("period T [s]")
            axes.legend(loc="best")
        figure.suptitle(f"response spectrum of the record, damping ratio "
                        f"{spectrum.damping_ratio:g} ({spectrum.status})")
        buffer = io.BytesIO()
        metadata = {"Date": None, "Creator": CREATOR} if fmt == "svg" else {"Software": CREATOR}
        figure.savefig(buffer, format=fmt, metadata=metadata, dpi=150)
        return buffer.getvalue()
