"""Plots: the load and response figures of a sheet, and the sheet's references to them."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import sympy

from .. import plots, quantities
from . import yielding
from .escaping import Math
from .layout import figure_name
from .typesetting import unit_text
from .units import Units, load_prefer

if TYPE_CHECKING:
    from .context import Sheet


def figure_files(derivation, stem: str, fmt: str) -> dict[str, bytes]:
    """The load and response plots of one sheet as ``fmt`` ("svg" or "pdf") files (and the
    resistance function with the path followed, for a yielding spring)."""
    if getattr(derivation, "chain", None) is not None:     # several masses: their own plot
        from ..chain_sheet import figure_files as chain_figures
        return chain_figures(derivation, stem, fmt)
    if not plots.plottable(derivation):
        return {}
    case = derivation.case
    units = Units(case)
    time_unit = units.unit_for(quantities.dimension("time"), ("time",))
    time_axis = plots.Axis(f"t [{unit_text(time_unit.text) if time_unit else 's'}]",
                           1 / float(sympy.N(time_unit.factor, 30)) if time_unit else 1.0)
    response_dimension = case.system.response_dimension
    response_unit = units.unit_for(response_dimension, ("response", "displacement", "voltage",
                                                       "current"))
    variable = derivation.model.variable
    value_axis = plots.Axis(
        f"{variable} [{unit_text(response_unit.text) if response_unit else quantities.si_unit_text(response_dimension)}]",
        1 / float(sympy.N(response_unit.factor, 30)) if response_unit else 1.0)
    load_dimension = case.system.load_dimension
    load_unit = units.unit_for(load_dimension, load_prefer(case.system))
    load_axis = plots.Axis(
        f"{derivation.model.load_name} [{unit_text(load_unit.text) if load_unit else quantities.si_unit_text(load_dimension)}]",
        1 / float(sympy.N(load_unit.factor, 30)) if load_unit else 1.0)
    peak_label = None
    peak = derivation.numbers.peak
    if peak is not None:
        peak_label = (f"peak {peak.value * value_axis.scale:.4g} "
                      f"{value_axis.label.split('[')[-1].rstrip(']')} at "
                      f"{peak.time * time_axis.scale:.4g} {time_axis.label.split('[')[-1].rstrip(']')}")
    impulse_unit = quantities.si_unit_text(load_dimension * quantities.dimension("time"))
    impulses = [(units.float(i.at), f"J = {units.float(i.impulse):.4g} {impulse_unit}")
                for i in derivation.history.impulses]
    figures = {
        figure_name(stem, "load", fmt): plots.load_figure(derivation, fmt, time_axis, load_axis,
                                                          impulses),
        figure_name(stem, "response", fmt): plots.response_figure(derivation, fmt, time_axis, value_axis,
                                                        peak_label),
    }
    if yielding.is_yielding(derivation):        # spring force against displacement
        force_unit = units.unit_for(quantities.dimension("force"), ("force",))
        force_axis = plots.Axis(f"R [{unit_text(force_unit.text) if force_unit else 'N'}]",
                                1 / float(sympy.N(force_unit.factor, 30)) if force_unit else 1.0)
        figures[figure_name(stem, "resistance", fmt)] = yielding.resistance_figure(
            derivation, fmt, value_axis, force_axis)
    return figures


def figures_context(sheet: Sheet) -> dict[str, Any]:
    """The figure files the sheet shows (in its flavour's format), None when not plottable."""
    suffix = sheet.flavour.figure_suffix
    return {"figures": {"load": Math(figure_name(sheet.stem, "load", suffix)),
                        "response": Math(figure_name(sheet.stem, "response", suffix))}
            if plots.plottable(sheet.derivation) else None}
