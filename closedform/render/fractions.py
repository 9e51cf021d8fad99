"""Section: the kernels and the free response by partial fractions (roots, orders,
coefficients, the time function), and the superposition of the load terms on the kernels."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import sympy

from .escaping import Math
from .layout import EXCERPT_HEAD, EXCERPT_LIMIT, EXCERPT_TAIL, excerpt
from .recorder import EquationRecorder
from .typesetting import (
    Display,
    available_width,
    current_style,
    display,
    grouped_terms,
    inline,
    is_short,
    join_lines,
    ordered_terms,
    polynomial_rows,
    typeset,
)

if TYPE_CHECKING:
    from .context import Sheet


def simple_fraction(coefficient: str, root: str, order: int) -> str:
    if order == 1:
        return rf"\frac{{{coefficient}}}{{s - {root}}}"
    return rf"\frac{{{coefficient}}}{{(s - {root})^{{{order}}}}}"


def inversion_context(inversion, name: str, variable: sympy.Symbol,
                      check: EquationRecorder, what: str) -> dict[str, Any]:
    """One inverse transform as the sheet shows it: the rational function, its partial
    fractions (roots, orders, coefficients) and the time function."""
    transform_name = rf"\mathcal{{L}}\{{{name}\}}"
    symbolic, roots = [], []
    for index, fraction in enumerate(inversion.fractions, start=1):
        symbolic.append(simple_fraction(f"c_{{{index}}}", f"r_{{{index}}}", fraction.order))
        if fraction.is_pair:
            symbolic.append(simple_fraction(rf"\bar{{c}}_{{{index}}}", rf"\bar{{r}}_{{{index}}}",
                                            fraction.order))
        real, imaginary = sympy.sympify(fraction.coefficient).as_real_imag()
        style = current_style()

        def parts(value, style=style):   # a constant printed as decimals is one decimal, never a sum of them
            whole = style.rounds and not value.free_symbols and (
                style.numbers == "decimal" or not is_short(value))
            return [value] if whole else ordered_terms(value)
        terms = [typeset(term) for term in parts(real)] if real != 0 else []
        terms += [typeset(sympy.I * term) for term in parts(imaginary)] if imaginary != 0 else []
        lhs = f"c_{{{index}}}"
        roots.append({
            "root": inline(rf"r_{{{index}}} = {typeset(fraction.root)}"),
            "order": fraction.order,
            "pair": fraction.is_pair,
            "coefficient": check.constant(f"{what}: partial-fraction coefficient {index}",
                                          fraction.coefficient, display(lhs, terms or ["0"])),
        })
    time_lhs = rf"{name}({sympy.latex(variable)})"
    return {
        "name": inline(name),
        "transform": check.of_s(f"{what}: transform", inversion.transform.expression(), Display(
            Math(rf"{transform_name}(s)"), tuple(join_lines(
                [typeset(inversion.transform.expression())],
                available_width(f"{transform_name}(s)"))))),
        "fractions": check.form(display(rf"{transform_name}(s)", symbolic)),
        "roots": roots,
        "time": check.time_function(f"{what}: time function", inversion.time_function,
                                    sympy.latex(variable), display(
            time_lhs, grouped_terms(polynomial_rows(inversion.time_function), variable,
                                    available_width(time_lhs)))),
    }


def fractions_context(sheet: Sheet) -> dict[str, Any]:
    derivation, solution, check = sheet.derivation, sheet.derivation.solution, sheet.check
    u = sympy.Symbol("u")
    kernels = []
    kernel_names: dict[Any, str] = {}
    for i, kernel in enumerate(solution.kernels, start=1):
        name = "h" if kernel.mode is None else f"k_{{{i}}}"
        kernel_names[kernel.mode] = name
        kernels.append(inversion_context(kernel.inversion, name, u, check,
                                         f"kernel {name}") | {
            "title": kernel.name,
            "pair": (inline(typeset(kernel.pair.time_function) + r" \;\leftrightarrow\; "
                            + typeset(kernel.pair.transform)) if kernel.pair else None),
            "source": kernel.pair.source if kernel.pair else None,
        })
    free = None
    if solution.free is not None:
        free = inversion_context(solution.free, sheet.variable + r"_{0}", sympy.Symbol("t"),
                                 check, "free response")

    active = [(term.load_number, term.coefficient, term.at, kernel_names.get(term.mode, "?"))
              for term in derivation.history.terms]
    active += [(impulse.load_number, impulse.impulse, impulse.at, "h")
               for impulse in derivation.history.impulses]
    superposition = [{"load": load, "coefficient": inline(typeset(coefficient)),
                      "at": inline(typeset(at)), "kernel": inline(kernel)}
                     for load, coefficient, at, kernel in excerpt(active, lambda _: None)]
    if len(active) > EXCERPT_LIMIT:
        superposition.insert(EXCERPT_HEAD, {
            "load": "…", "at": Math(r"\ldots"), "kernel": Math(r"\ldots"),
            "coefficient": Math(sheet.escape(
                f"{len(active) - EXCERPT_HEAD - EXCERPT_TAIL} more terms in "
                f"{sheet.coefficient_file}"))})
    return {"kernels": kernels, "free": free, "superposition": superposition}
