"""Inputs whose derivatives act: how b_m f⁽ᵐ⁾ + … + b_0 f enters the transform.

The load is zero before t = 0⁻, so the transform of derivatives,
L{f⁽ʲ⁾} = sʲF(s) − s^(j−1) f(0⁻) − … − f^(j−1)(0⁻), leaves sʲF(s): the right-hand side
transforms to B(s)F(s) with B(s) = b_m s^m + … + b_0, and X(s) = [B(s)F(s) + Q(s)]/P(s).
This holds in the sense of distributions: where the load steps or kinks, its derivatives
carry Dirac impulses and their derivatives, and sʲF(s) contains them. For one load term
c·g(t − a)·H(t − a),

    d^j/dt^j [g(t − a) H(t − a)] = g⁽ʲ⁾(t − a) H(t − a) + Σ_{i<j} g⁽ⁱ⁾(0) δ^(j−1−i)(t − a)

(the product rule with H′ = δ), and an impulse J·δ(t − a) of the load gives J·δ⁽ʲ⁾(t − a).
This module lists those singular parts of the right-hand side per breakpoint, for the sheet;
the response's derivatives jump there (the checks derive the jumps on their own).
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy

from .loads import LoadHistory
from .systems import LinearModel

SOURCE = "transform of derivatives, L{f′} = s F(s) − f(0⁻), with the load zero before t = 0⁻"


@dataclass(frozen=True)
class SingularPart:
    """Σ_r coefficient_r · δ⁽ʳ⁾(t − at) in the right-hand side at one breakpoint."""

    at: sympy.Expr
    coefficients: tuple[sympy.Expr, ...]     # of δ, δ′, δ″, …

    def expression(self, time: sympy.Symbol) -> sympy.Expr:
        return sympy.Add(*[c * (sympy.DiracDelta(time - self.at) if r == 0 else
                                sympy.DiracDelta(time - self.at, r))
                           for r, c in enumerate(self.coefficients) if c != 0])


def singular_parts(model: LinearModel, history: LoadHistory) -> tuple[SingularPart, ...]:
    """The Dirac parts of b_m f⁽ᵐ⁾ + … + b_0 f at each breakpoint of the load (time order of
    first appearance), none where no derivative of the input acts."""
    if not model.input_coefficients:
        return ()
    b = list(reversed(model.input_coefficients))        # b[j]: coefficient of f⁽ʲ⁾
    m = len(b) - 1
    u = sympy.Dummy("u", real=True)
    totals: dict[sympy.Expr, list[sympy.Expr]] = {}
    for term in history.terms:
        g = term.mode.expression(u)
        values = [sympy.diff(g, u, i).subs(u, 0) for i in range(m)]
        parts = totals.setdefault(term.at, [sympy.S.Zero] * (m + 1))
        for j in range(1, m + 1):
            for i in range(j):
                parts[j - 1 - i] += b[j] * term.coefficient * values[i]
    for impulse in history.impulses:
        parts = totals.setdefault(impulse.at, [sympy.S.Zero] * (m + 1))
        for j in range(m + 1):
            parts[j] += b[j] * impulse.impulse
    result = []
    for at, parts in totals.items():
        parts = [p if p.has(sympy.Float) else sympy.simplify(p) for p in parts]
        while parts and parts[-1] == 0:
            parts.pop()
        if parts:
            result.append(SingularPart(at, tuple(parts)))
    if all(not part.at.free_symbols for part in result):
        result.sort(key=lambda part: sympy.N(part.at, 30))
    return tuple(result)
