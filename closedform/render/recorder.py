"""The record of every displayed equation of a sheet, for the "printed equations re-read"
check: each equation is registered with the derivation's value of it (a function of the
time, of s, or a constant) and the error scale that printing its numbers can make."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import mpmath
import sympy

from ..checks import reread
from .typesetting import current_style, long_integer


def _mp(value: Any) -> Any:
    """A sympy number as mpmath (real or complex), at the re-reading precision."""
    value = sympy.N(sympy.sympify(value), reread.WORKING_DIGITS)
    if value.free_symbols:
        raise reread.Unreadable(f"symbols left without values: {value.free_symbols}")
    real, imaginary = value.as_real_imag()
    with mpmath.workdps(reread.WORKING_DIGITS):
        if imaginary == 0:
            return mpmath.mpf(sympy.Float(real, reread.WORKING_DIGITS)._mpf_)
        return mpmath.mpc(sympy.Float(real, reread.WORKING_DIGITS)._mpf_,
                          sympy.Float(imaginary, reread.WORKING_DIGITS)._mpf_)


def _magnitude(numeric) -> Callable[[Any], Any]:
    """Σ |c u^p e^{σu}| (1 + |σu| + |ωu|) over the rows of a numeric exponential polynomial:
    the size of the error that rounding each printed coefficient, rate and frequency to a
    relative step can make at ``u``."""
    def size(u):
        total = mpmath.mpf(0)
        for power, rate, frequency, _kind, coefficient in numeric.rows:
            term = abs(coefficient) * abs(mpmath.power(u, power)) * abs(mpmath.exp(rate * u))
            total += term * (1 + abs(rate * u) + abs(frequency * u) + power)
        return total
    return size


def _propagated(expr: sympy.Expr, symbol: sympy.Symbol, point: Any) -> tuple[Any, Any]:
    """(value, error scale) of ``expr`` at ``symbol = point``: the first-order error that
    printing every number of ``expr`` to one relative unit would make (small integers and
    constants are exact). The re-reading tolerance is a fraction of this scale."""
    if expr == symbol:
        return point, mpmath.mpf(0)
    if expr.is_Number or expr.is_NumberSymbol:
        value = _mp(expr)
        exact = expr.is_NumberSymbol or (expr.is_Integer and not long_integer(expr))
        return value, mpmath.mpf(0) if exact else abs(value)
    if expr.is_Atom:
        return _mp(expr), mpmath.mpf(0)
    if expr is sympy.I or expr == sympy.I:
        return mpmath.mpc(0, 1), mpmath.mpf(0)
    parts = [_propagated(a, symbol, point) for a in expr.args]
    if isinstance(expr, sympy.Add):
        return sum(v for v, _ in parts), sum(e for _, e in parts)
    if isinstance(expr, sympy.Mul):
        value = mpmath.fprod([v for v, _ in parts])
        error = mpmath.mpf(0)
        for i, (_v, e) in enumerate(parts):
            others = mpmath.fprod([abs(w) for j, (w, _) in enumerate(parts) if j != i])
            error += e * others
        return value, error
    if isinstance(expr, sympy.Pow):
        (base, base_error), (exponent, exponent_error) = parts
        value = mpmath.power(base, exponent)
        error = abs(exponent) * abs(mpmath.power(base, exponent - 1)) * base_error
        if exponent_error:
            error += abs(value) * abs(mpmath.log(base)) * exponent_error
        return value, error
    if isinstance(expr, sympy.exp):
        value = mpmath.exp(parts[0][0])
        return value, abs(value) * parts[0][1]
    if isinstance(expr, (sympy.sin, sympy.cos)):
        function = mpmath.sin if isinstance(expr, sympy.sin) else mpmath.cos
        return function(parts[0][0]), parts[0][1] * mpmath.cosh(abs(mpmath.im(parts[0][0])))
    value = _mp(expr.subs(symbol, sympy.sympify(complex(point))))
    return value, abs(value)


class EquationRecorder:
    """Registers every displayed equation of a sheet with the derivation's value of it, so
    that :func:`printed_equation_check` can read the printed line back and compare."""

    POINTS = 23

    def __init__(self, derivation) -> None:
        case = derivation.case
        self.values = dict(case.symbol_values())
        for k, declaration in enumerate(case.symbols):
            if declaration.value is None:       # symbols without values: sample values
                self.values[declaration.symbol] = sympy.Rational(7 + 3 * k, 5 + k)
        self.symbols = {sympy.latex(symbol): _mp(value) for symbol, value in self.values.items()}
        self.records: list[reread.Printed] = []
        with mpmath.workdps(reread.WORKING_DIGITS):
            self.until = _mp(sympy.sympify(derivation.window.until).subs(self.values))
            scale = derivation.model.slowest_time_scale()
            scale = _mp(sympy.sympify(scale).subs(self.values)) if scale is not None else None
            if not scale or scale <= 0:
                scale = self.until / 5 if self.until > 0 else mpmath.mpf(1)
            offset = mpmath.sqrt(2) - 1       # irrational: never a breakpoint
            self.fractions = [(k + offset) / self.POINTS for k in range(self.POINTS)]
            self.s_points = [mpmath.mpc(a, b) / scale for a in (0.31, 1.7, 4.3)
                             for b in (-0.83, 0.29, 2.3)]

    def _add(self, display, **fields) -> Any:
        style = current_style()
        if style.rounds:
            fields["tolerance"] = max(fields.get("tolerance", 1e-9), 10.0 ** (1 - style.digits))
        self.records.append(reread.Printed(display=display, symbols=self.symbols, **fields))
        return display

    def form(self, display):
        return self._add(display, what="form", form=True)

    def _function(self, expr: sympy.Expr, symbol: sympy.Symbol):
        expr = sympy.sympify(expr).subs(self.values)
        return sympy.lambdify(symbol, expr, modules="mpmath")

    def of_s(self, what: str, expr: sympy.Expr, display):
        from ..laplace import s
        tree = sympy.sympify(expr).subs(self.values)
        return self._add(display, what=what, variable="s", points=self.s_points,
                         reference=self._function(expr, s),
                         magnitude=lambda x: _propagated(tree, s, x)[1] + abs(
                             _propagated(tree, s, x)[0]) * mpmath.mpf(10) ** -30,
                         tolerance=1e-9 if tree.has(sympy.Float) else 1e-15)

    def constant(self, what: str, value: sympy.Expr, display):
        number_ = _mp(sympy.sympify(value).subs(self.values))
        return self._add(display, what=what, reference=lambda _x: number_)

    def time_function(self, what: str, polynomial, variable: str, display):
        function = polynomial.numeric(self.values, digits=reread.WORKING_DIGITS)
        points = [self.until * f for f in self.fractions]
        return self._add(display, what=what, variable=variable, points=points,
                         reference=function, magnitude=_magnitude(function), tolerance=1e-9)

    def load_line(self, rewrite, display):
        x = sympy.Symbol("x")
        parts = []
        impulses = []
        for term in rewrite.terms:
            at = _mp(sympy.sympify(term.at).subs(self.values))
            if hasattr(term, "mode"):
                tree = sympy.sympify(term.coefficient * term.mode.expression(x)).subs(self.values)
                parts.append((at, self._function(tree, x), tree))
            else:
                impulses.append((at, _mp(sympy.sympify(term.impulse).subs(self.values))))

        def reference(t):
            return sum((g(t - at) for at, g, _tree in parts if t > at), mpmath.mpf(0))

        def magnitude(t):   # each term's size plus the error its printed numbers can make
            # (a rounded frequency shifts the phase by ω·u·δ: large where the terms cancel)
            return sum((abs(g(t - at)) + _propagated(tree, x, t - at)[1]
                        for at, g, tree in parts if t > at), mpmath.mpf(0))
        points = [self.until * f for f in self.fractions]
        return self._add(display, what=f"load line {rewrite.load_number}", variable="t",
                         points=points, reference=reference, impulses=impulses,
                         magnitude=magnitude)

    def piece(self, number: int, piece, end, display, *, response_factor=1, time_factor=1,
              tolerance: float = 1e-9, what: str = ""):
        values = self.values
        function = piece.numeric if getattr(piece, "numeric", None) is not None \
            else piece.local.numeric(values, digits=reread.WORKING_DIGITS)
        start = _mp(sympy.sympify(piece.start).subs(values))
        length = _mp(sympy.sympify(end).subs(values)) - start
        rf, tf = _mp(sympy.sympify(response_factor).subs(values)), \
            _mp(sympy.sympify(time_factor).subs(values))
        points = [length * f / tf for f in self.fractions]
        size = _magnitude(function)
        return self._add(display, what=f"interval {number}" + (f" {what}" if what else ""),
                         variable=r"\hat{t}", points=points,
                         reference=lambda local: function(local * tf) * rf,
                         magnitude=lambda local: size(local * tf) * abs(rf), tolerance=tolerance)

