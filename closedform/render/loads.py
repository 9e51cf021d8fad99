"""Section: the loads as given, and each load rewritten as singularity terms
c·g(t − a)·H(t − a) and J·δ(t − a) by its rule (with the rule's source)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import sympy

from .. import quantities
from .escaping import Math
from .layout import EXCERPT_HEAD, EXCERPT_LIMIT, EXCERPT_TAIL, TERMS_INLINE, excerpt
from .typesetting import as_factor, display, inline, latex, rounded, typeset
from .units import Units

if TYPE_CHECKING:
    from .context import Sheet

LOAD_VALUE_NAMES = ("amplitude", "impulse", "rate", "duration", "peak_at", "rise", "hold", "fall")


def sort_time(units: Units):
    """A sort key for times: numeric ones in order, symbolic ones after them."""
    def key(value):
        numeric = units.float(value)
        return (0, numeric) if numeric is not None else (1, sympy.default_sort_key(value))
    return key


def singularity_term(coefficient: sympy.Expr, mode, shift: str) -> str:
    """c·g(t − a)·H(t − a) with g written in the shifted time (t − a) as one factor, so a
    constant part of c·g can never stand outside its step."""
    shifted = sympy.Symbol("__shifted")
    basis = mode.expression(shifted)
    step = rf"H\!\left({shift}\right)"
    shown = shift if shift == "t" else rf"\left({shift}\right)"
    basis_text = Math(latex(rounded(basis), symbol_names={shifted: shown})) \
        if basis != 1 else ""
    factor = as_factor(coefficient)
    parts = ([] if factor in ("1", "-1") or (factor == "1" and basis_text) else [factor]) \
        + ([basis_text] if basis_text else [])
    body = r"\,".join(parts)
    if factor == "-1":
        body = "-" + (body or "")
    if body in ("", "-"):
        return body + step
    return rf"{body}\,{step}"


def impulse_term(impulse: sympy.Expr, shift: str) -> str:
    body = typeset(impulse)
    delta = rf"\delta\!\left({shift}\right)"
    return delta if body == "1" else rf"{body}\,{delta}"


def given_loads(sheet: Sheet) -> list[dict[str, Any]]:
    """Each load of the case file with its values, in SI and in the report units."""
    units, escape = sheet.units, sheet.escape
    time_dimension, load_dimension = sheet.time_dimension, sheet.load_dimension
    loads = []
    for load in sheet.case.loads:
        values = []
        for name in LOAD_VALUE_NAMES:
            if name not in load.values:
                continue
            dimension = {"amplitude": load_dimension, "impulse": load_dimension * time_dimension,
                         "rate": load_dimension / time_dimension,
                         "peak_at": quantities.dimension("dimensionless")}.get(name, time_dimension)
            si, shown = units.show(load.values[name], dimension,
                                   prefer=sheet.load_prefer if name == "amplitude" else ("time",))
            text = f"{escape(name.replace('_', ' '))} = {si}"
            if shown is not None:
                text += f" ({shown})"
            values.append(Math(text))
        if load.shape == "table":
            values.append(Math(escape(f"{len(load.points)} points, linear between them")))
        if load.shape == "formula" and load.expression is not None:
            values.append(Math(escape("f(τ) = ") + inline(typeset(load.expression))
                               + escape(", τ = t − start")))
        at_si, at_shown = units.show(load.at, time_dimension, prefer=("time",), exact=True)
        repeat = None
        if load.repeat is not None:
            every_si, every_shown = units.show(load.repeat.every, time_dimension,
                                               prefer=("time",), exact=True)
            repeat = Math(f"{load.repeat.count} {escape('times, every')} "
                          f"{every_shown or every_si}")
        loads.append({"number": load.number, "label": load.label or None, "shape": load.shape,
                      "at": at_shown or at_si, "given": values, "repeat": repeat})
    return loads


def rewritten_loads(sheet: Sheet) -> list[dict[str, Any]]:
    """Each load as its singularity terms (written out as a sum when there are few)."""
    u = sympy.Symbol("u")
    load_name = sheet.model.load_name
    rewrites = []
    for rewrite in sheet.derivation.history.rewrites:
        written_out = len(rewrite.terms) <= TERMS_INLINE
        terms = []
        for number, term in excerpt(list(enumerate(rewrite.terms, start=1)), lambda _: None):
            shift = Math("t" if term.at == 0 else rf"t - {as_factor(term.at)}")
            if hasattr(term, "mode"):
                terms.append({"number": number, "at": inline(typeset(term.at)),
                              "coefficient": inline(typeset(term.coefficient)),
                              "basis": inline(typeset(term.mode.expression(u))),
                              "latex": singularity_term(term.coefficient, term.mode, shift)
                              if written_out else None})
            else:
                terms.append({"number": number, "at": inline(typeset(term.at)),
                              "coefficient": inline(typeset(term.impulse)),
                              "basis": inline(r"\delta(u)"),
                              "latex": impulse_term(term.impulse, shift) if written_out else None})
        if len(rewrite.terms) > EXCERPT_LIMIT:
            omitted = len(rewrite.terms) - EXCERPT_HEAD - EXCERPT_TAIL
            terms.insert(EXCERPT_HEAD, {
                "number": "…", "at": Math(r"\ldots"), "basis": Math(r"\ldots"),
                "coefficient": Math(sheet.escape(
                    f"{omitted} more terms in {sheet.coefficient_file}"))})
        rewrites.append({
            "load": rewrite.load_number, "shape": rewrite.shape, "rule": rewrite.rule,
            "source": rewrite.source,
            "start": typeset(min((t.at for t in rewrite.terms), key=sort_time(sheet.units))
                             if rewrite.terms else 0),
            "terms": terms,
            "sum": sheet.check.load_line(rewrite, display(
                rf"{{{load_name}}}_{{{rewrite.load_number}}}(t)", [t["latex"] for t in terms]))
            if len(terms) <= TERMS_INLINE else None,
        })
    return rewrites


def loads_context(sheet: Sheet) -> dict[str, Any]:
    return {"loads": given_loads(sheet), "rewrites": rewritten_loads(sheet)}
