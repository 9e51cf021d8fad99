"""Models: from a named system to its differential equation, poles and static response.

What each model is (parameters, coefficients, printed names) is its definition in the
model registry, ``closedform.models``; this module turns any definition's equation into
poles and a damping regime.

Each model is written as a_n x^(n) + … + a_0 x = b · (load), with the load in the unit the
case file uses for it (force, support acceleration, source voltage, input …). The poles of
the characteristic polynomial P(s) = a_n s^n + … + a_0 are found exactly where that is
possible and cheap, with the damping regime named for second-order models.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import sympy

from . import models
from .errors import CaseError, DerivationError
from .laplace import Pole, s
from .specs import SystemSpec


@dataclass(frozen=True)
class LinearModel:
    """The equation of one case with its poles.

    ``coefficients`` run a_n … a_0; the right-hand side is ``input_scale`` × load(t).
    """

    name: str
    variable: str
    load_name: str
    coefficients: tuple[sympy.Expr, ...]
    input_scale: sympy.Expr
    lead: sympy.Expr
    poles: tuple[Pole, ...]
    regime: str
    exact_poles: bool
    regime_note: str = ""
    input_coefficients: tuple[sympy.Expr, ...] = ()   # b_m … b_0 where the input's derivatives act

    def input_polynomial(self) -> sympy.Expr:
        """B(s) = b_m s^m + … + b_0 (the right-hand side b_m f⁽ᵐ⁾ + … + b_0 f transformed from
        rest, L{f⁽ʲ⁾} = sʲF(s) for a load that is zero before t = 0); the input scale b where
        no derivative of the input acts."""
        if not self.input_coefficients:
            return self.input_scale
        m = len(self.input_coefficients) - 1
        return sympy.Add(*[b * s ** (m - i) for i, b in enumerate(self.input_coefficients)])

    @property
    def order(self) -> int:
        return len(self.coefficients) - 1

    def characteristic_polynomial(self) -> sympy.Expr:
        return sympy.Add(*[a * s ** (self.order - i) for i, a in enumerate(self.coefficients)])

    @property
    def equation(self) -> str:
        definition = models.get(self.name)
        if self.input_coefficients:
            return definition.input_equation
        return definition.equation

    def static_gain(self) -> sympy.Expr | None:
        """x per unit load when held steady: b / a_0 (None when there is no restoring term)."""
        a0 = self.coefficients[-1]
        if a0 == 0:
            return None
        return sympy.simplify(self.input_scale / a0)

    def natural_frequency(self) -> sympy.Expr | None:
        if self.order != 2 or self.coefficients[-1] == 0:
            return None
        return sympy.sqrt(self.coefficients[2] / self.coefficients[0])

    def damping_ratio(self) -> sympy.Expr | None:
        omega = self.natural_frequency()
        if omega is None:
            return None
        return sympy.simplify(self.coefficients[1] / (2 * self.coefficients[0] * omega))

    def slowest_time_scale(self) -> sympy.Expr | None:
        """The longest natural period or time constant (for the default analysis window)."""
        scales = []
        for pole in self.poles:
            if pole.is_pair:
                scales.append(2 * sympy.pi / pole.frequency)
            elif pole.rate != 0:
                scales.append(-1 / pole.rate)
        if self.order == 2 and self.natural_frequency() is not None:
            scales = [2 * sympy.pi / self.natural_frequency()]
        if not scales:
            return None
        if len(scales) == 1:
            return scales[0]
        numeric = [sc for sc in scales if not sc.free_symbols]
        if len(numeric) == len(scales):
            return max(scales, key=lambda sc: sympy.N(sc, 30))
        return sympy.Max(*scales)


@dataclass(frozen=True)
class ScalarEquation:
    """One scalar equation aₙx⁽ⁿ⁾ + … + a₀x = b·f(t) with its poles: all the engine
    (``response.solve``) needs to solve for a load history and initial values.

    A ``LinearModel`` is one (with the case's names and regime); a model of several masses
    gives one per mode (the modal mass, damping and stiffness, b the participation of the
    load) and solves each with the same engine.
    """

    coefficients: tuple[sympy.Expr, ...]
    input_scale: sympy.Expr
    poles: tuple[Pole, ...]
    regime: str
    exact_poles: bool

    @property
    def order(self) -> int:
        return len(self.coefficients) - 1

    @property
    def lead(self) -> sympy.Expr:
        return self.coefficients[0]

    def input_polynomial(self) -> sympy.Expr:
        """B(s): the input scale b (no derivative of the input acts on one mode)."""
        return self.input_scale

    def characteristic_polynomial(self) -> sympy.Expr:
        return sympy.Add(*[a * s ** (self.order - i) for i, a in enumerate(self.coefficients)])


def scalar_equation(coefficients: tuple[sympy.Expr, ...], input_scale: sympy.Expr = sympy.S.One,
                    *, regime: str | None = None,
                    values: Mapping[sympy.Symbol, sympy.Expr] | None = None) -> ScalarEquation:
    """The equation with coefficients aₙ…a₀ and input scale b, its poles found as for a
    case's model (``regime`` settles a second-order regime the symbols cannot)."""
    coefficients = tuple(sympy.sympify(a) for a in coefficients)
    system = SystemSpec("ode", {}, regime, None, None)
    poles, found, exact, _note = _poles(coefficients, system, dict(values or {}), "system")
    return ScalarEquation(coefficients, sympy.sympify(input_scale), poles, found, exact)


def build_model(system: SystemSpec, values: Mapping[sympy.Symbol, sympy.Expr] | None = None,
                *, key_prefix: str = "system") -> LinearModel:
    """The equation and poles of the case's system.

    ``values`` are the declared symbol values; they settle the damping regime when the
    symbols alone cannot (the sheet then says the formulas hold for that regime only).
    """
    definition = models.get(system.model)
    coefficients, scale = definition.equation_of(system.parameters)
    inputs = definition.input_coefficients(system)
    if inputs:
        scale = inputs[-1]            # b_0: the static gain is B(0)/a_0
    coefficients = tuple(sympy.sympify(a) for a in coefficients)
    poles, regime, exact, note = _poles(coefficients, system, dict(values or {}), key_prefix)
    load_name = (definition.input_load_name or definition.load_name) if inputs \
        else definition.load_name
    return LinearModel(system.model, definition.variable, load_name,
                       coefficients, sympy.sympify(scale), coefficients[0], poles, regime,
                       exact, note, inputs)


def _poles(coefficients: tuple[sympy.Expr, ...], system: SystemSpec, values: dict,
           key_prefix: str) -> tuple[tuple[Pole, ...], str, bool, str]:
    order = len(coefficients) - 1
    symbolic = any(a.free_symbols for a in coefficients)
    if order == 1:
        a1, a0 = coefficients
        rate = sympy.simplify(-a0 / a1)
        return (Pole(rate, sympy.S.Zero),), ("first-order" if rate != 0 else "integrator"), True, ""
    if order == 2:
        return _second_order_poles(coefficients, system, values, key_prefix)
    if symbolic:
        raise CaseError("symbolic coefficients are supported up to order 2; give numbers for "
                        "higher orders", key=f"{key_prefix}.coefficients")
    return (*_numeric_poles(coefficients), "")


def _second_order_poles(coefficients, system: SystemSpec, values: dict,
                        key_prefix: str) -> tuple[tuple[Pole, ...], str, bool, str]:
    a2, a1, a0 = coefficients
    if a1 == 0:
        if a0 == 0:
            return (Pole(sympy.S.Zero, sympy.S.Zero, 2),), "rigid-body", True, ""
        return (Pole(sympy.S.Zero, sympy.simplify(sympy.sqrt(a0 / a2))),), "undamped", True, ""
    ratio = system.parameters.get("damping_ratio")
    if ratio is not None and models.get(system.model).damping_ratio_poles:
        return _poles_from_damping_ratio(ratio, sympy.sqrt(a0 / a2), system, values, key_prefix)
    centre = sympy.simplify(-a1 / (2 * a2))
    discriminant = sympy.factor(sympy.simplify(a1**2 - 4 * a2 * a0))
    regime, note = _decide_regime(discriminant, system, values, key_prefix)
    if regime == "undamped":
        raise CaseError("regime 'undamped' needs zero damping", key=f"{key_prefix}.regime")
    if regime == "critically-damped":
        return (Pole(centre, sympy.S.Zero, 2),), regime, True, note
    root = _tidy_root(discriminant) / (2 * a2)
    if regime == "under-damped":
        frequency = sympy.simplify(_tidy_root(-discriminant) / (2 * a2))
        return (Pole(centre, frequency),), regime, True, note
    root = sympy.simplify(root)
    return (Pole(sympy.simplify(centre - root), sympy.S.Zero),
            Pole(sympy.simplify(centre + root), sympy.S.Zero)), regime, True, note


def _poles_from_damping_ratio(ratio: sympy.Expr, natural: sympy.Expr, system: SystemSpec,
                              values: dict, key_prefix: str
                              ) -> tuple[tuple[Pole, ...], str, bool, str]:
    """Poles −ζω_n ± ω_n√(ζ² − 1), the classical form when the damping ratio is given."""
    regime, note = _decide_regime(ratio - 1, system, values, key_prefix)
    if regime == "critically-damped":
        return (Pole(-natural, sympy.S.Zero, 2),), regime, True, note
    if regime == "under-damped":
        return (Pole(-ratio * natural, natural * sympy.sqrt(1 - ratio**2)),), regime, True, note
    spread = natural * sympy.sqrt(ratio**2 - 1)
    return (Pole(-ratio * natural - spread, sympy.S.Zero),
            Pole(-ratio * natural + spread, sympy.S.Zero)), regime, True, note


def _decide_regime(sign_of: sympy.Expr, system: SystemSpec, values: dict,
                   key_prefix: str) -> tuple[str, str]:
    """The regime from the sign of ζ − 1 (or of the discriminant): from the symbols if
    possible, else from their declared values, else as stated in the case."""
    note = ""
    regime = _regime_from_sign(sign_of)
    if regime is None and values:
        regime = _regime_from_sign(sign_of.subs(values))
        if regime is not None:
            note = (f"{regime}: decided from the declared symbol values; the formulas hold "
                    "only while the symbols keep that regime")
    if regime is None:
        regime = system.regime
        if regime is None:
            raise CaseError("the damping regime cannot be decided from the declared symbols "
                            "(expected regime = \"under-damped\", \"critically-damped\" or "
                            "\"over-damped\" under [system])", key=f"{key_prefix}.regime")
        note = f"{regime}: as stated in the case; the formulas hold only in that regime"
    elif system.regime is not None and system.regime != regime:
        raise CaseError(f"the stated regime '{system.regime}' contradicts the parameters, "
                        f"which give '{regime}'", key=f"{key_prefix}.regime")
    return regime, note


def _tidy_root(value: sympy.Expr) -> sympy.Expr:
    """sqrt of a factored expression, pulling out positive factors."""
    return sympy.powdenest(sympy.sqrt(sympy.factor(value)), force=False)


def _regime_from_sign(discriminant: sympy.Expr) -> str | None:
    if discriminant.is_zero:
        return "critically-damped"
    if discriminant.is_negative:
        return "under-damped"
    if discriminant.is_positive:
        return "over-damped"
    if not discriminant.free_symbols:
        value = sympy.N(discriminant, 50)
        if value == 0:
            return "critically-damped"
        return "under-damped" if value < 0 else "over-damped"
    return None


def _numeric_poles(coefficients) -> tuple[tuple[Pole, ...], str, bool]:
    """Poles of a numeric polynomial of order 3 or 4: exact where it factors over the
    rationals into pieces of degree ≤ 2, 30-digit floats otherwise."""
    polynomial = sympy.Poly(sympy.Add(*[a * s ** (len(coefficients) - 1 - i)
                                        for i, a in enumerate(coefficients)]), s)
    poles: list[Pole] = []
    exact = True
    _lead, factors = polynomial.factor_list()
    for factor, multiplicity in factors:
        degree = factor.degree()
        c = factor.all_coeffs()
        if degree == 1:
            poles.append(Pole(-c[1] / c[0], sympy.S.Zero, multiplicity))
        elif degree == 2:
            a, b, cc = c
            disc = b**2 - 4 * a * cc
            centre = -b / (2 * a)
            if disc < 0:
                poles.append(Pole(centre, sympy.sqrt(-disc) / (2 * a), multiplicity))
            else:
                root = sympy.sqrt(disc) / (2 * a)
                poles += [Pole(centre - root, sympy.S.Zero, multiplicity),
                          Pole(centre + root, sympy.S.Zero, multiplicity)]
        else:
            exact = False
            roots = factor.nroots(n=30, maxsteps=200)
            for root in roots:
                re, im = sympy.re(root), sympy.im(root)
                if abs(im) < sympy.Float("1e-25") * max(1, abs(root)):
                    poles.append(Pole(sympy.Float(re, 30), sympy.S.Zero, multiplicity))
                elif im > 0:
                    poles.append(Pole(sympy.Float(re, 30), sympy.Float(im, 30), multiplicity))
    if not poles:
        raise DerivationError("no poles found for the characteristic polynomial")
    kinds = {("pair" if p.is_pair else "real") for p in poles}
    regime = "oscillatory" if "pair" in kinds else "non-oscillatory"
    return tuple(poles), regime, exact
