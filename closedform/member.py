"""A beam as an equivalent one-degree-of-freedom system, its factors derived, not looked up.

A prismatic beam (span L, flexural rigidity EI, mass m per length) under a load F(t)·p̂(x)
(p̂ uniform over the span, or a point load at midspan, or at the tip of a cantilever) is
replaced by the oscillator of its deflection y at a reference point, the beam being assumed
to keep a shape φ(x) with φ(x_r) = 1:

    K_M·M·ÿ + K_L·R(y) = K_L·F(t),   K_L = ∫p̂·φ dx,   K_M = ∫m·φ² dx / M,   M = m·L

(the work of the load and the kinetic energy of the beam equal those of the equivalent
system), i.e. K_LM·M·ÿ + R(y) = F(t) with K_LM = K_M/K_L and R the total load the beam
carries statically at the deflection y. The shapes are, range by range:

- elastic: the static deflected shape, from EI·w'''' = p with the support conditions;
- elastic-plastic (fixed-fixed and fixed-pinned, where the fixed ends yield first): the
  static shape of the beam with hinges at the yielded ends, i.e. the shape of the increment;
- plastic: the collapse mechanism, rigid segments between plastic hinges, the hinge in the
  span placed where the virtual work gives the smallest collapse load (upper-bound theorem).

Everything is exact, in the dimensionless coordinate ξ = x/L; the dimensional values follow by
the factors L, EI/L³, M_p/L. The dynamic support reactions come from the equilibrium of the
beam under the load, the inertia forces −m·φ·ÿ of the assumed shape and the bending moments
of the resistance at the supports and at the critical section (where the span hinge forms):
V = a·R + b·F + c·M_p/L per support and range (c from the moment M_p at a yielded section;
zero in the elastic range and wherever the yielded moments balance, as in a symmetric beam).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import sympy

SUPPORTS = ("simply-supported", "fixed-fixed", "fixed-pinned", "cantilever")
LOAD_DISTRIBUTIONS = ("uniform", "point")
MEMBER_KEYS = ("model", "support", "span", "flexural_rigidity", "mass_per_length",
               "load_distribution", "plastic_moment", "damping_ratio")
RANGES = ("elastic", "elastic-plastic", "plastic")

XI = sympy.Symbol("xi", real=True)        # x / L
# Conditions at each end: which of w, w', w'' (= −M/EI), w''' vanish.
_END_CONDITIONS = {"fixed": (0, 1), "pinned": (0, 2), "free": (2, 3)}
_ENDS = {"simply-supported": ("pinned", "pinned"), "fixed-fixed": ("fixed", "fixed"),
         "fixed-pinned": ("fixed", "pinned"), "cantilever": ("fixed", "free")}
SUPPORT_TEXT = {
    "simply-supported": "simply supported at both ends",
    "fixed-fixed": "fixed (built in) at both ends",
    "fixed-pinned": "fixed at the left end (x = 0), pinned at the right end (x = L)",
    "cantilever": "fixed at x = 0, free at the tip x = L",
}


@dataclass(frozen=True)
class Shape:
    """A deflected shape on [0, 1]: polynomial ``pieces`` ((start, end, polynomial in ξ))."""

    pieces: tuple[tuple[sympy.Expr, sympy.Expr, sympy.Expr], ...]

    def at(self, xi: sympy.Expr, derivative: int = 0) -> sympy.Expr:
        for start, end, poly in self.pieces:
            if start <= xi <= end:
                return sympy.nsimplify(sympy.diff(poly, XI, derivative).subs(XI, xi))
        raise ValueError(f"ξ = {xi} outside the span")

    def scaled(self, factor: sympy.Expr) -> Shape:
        return Shape(tuple((a, b, _tidy(p * factor)) for a, b, p in self.pieces))

    def integral(self, weight: sympy.Expr = sympy.S.One, power: int = 1,
                 start: sympy.Expr = sympy.S.Zero, end: sympy.Expr = sympy.S.One) -> sympy.Expr:
        """∫ weight(ξ)·φ(ξ)^power dξ over [start, end]."""
        total = sympy.S.Zero
        for a, b, poly in self.pieces:
            lo, hi = sympy.Max(a, start), sympy.Min(b, end)
            if (hi - lo).is_positive:
                total += sympy.integrate(sympy.expand(weight * poly**power), (XI, lo, hi))
        return sympy.radsimp(sympy.nsimplify(sympy.expand(total)))

    def polynomial(self) -> sympy.Expr:
        """The shape as one sympy Piecewise (for the sheet)."""
        return sympy.Piecewise(*[(p, XI <= b) for a, b, p in self.pieces[:-1]],
                               (self.pieces[-1][2], True))


def _tidy(poly: sympy.Expr) -> sympy.Expr:
    """A polynomial in ξ with each coefficient's radicals out of the denominator."""
    terms = sympy.Poly(sympy.expand(poly), XI).all_coeffs()[::-1]
    return sympy.Add(*[sympy.radsimp(sympy.expand(c)) * XI**i for i, c in enumerate(terms)])


@dataclass(frozen=True)
class RangeFactors:
    """One range of the resistance: its shape, factors and (dimensionless) stiffness.

    ``stiffness`` is k·L³/EI (total load per deflection at x_r); ``load_integral`` is
    ∫p̂·φ dξ (= K_L), ``mass_integral`` ∫φ² dξ (= K_M); ``reaction`` maps each support
    ("left", "right") to (a, b, c) in V = a·R + b·F + c·M_p/L (c ≠ 0 only where the moment
    M_p at a yielded section is not carried by R alone, e.g. the fixed end of a propped beam).
    """

    name: str
    shape: Shape
    load_factor: sympy.Expr
    mass_factor: sympy.Expr
    stiffness: sympy.Expr | None          # None in the plastic range
    reaction: tuple[tuple[str, sympy.Expr, sympy.Expr, sympy.Expr], ...]
    shape_note: str

    @property
    def load_mass_factor(self) -> sympy.Expr:
        return sympy.radsimp(self.mass_factor / self.load_factor)


@dataclass(frozen=True)
class MemberFactors:
    """The derived equivalent system of a member, exact and dimensionless.

    ``reference`` is ξ_r; ``first_yield`` R_e·L/M_p and ``collapse`` R_m·L/M_p (None for
    an elastic member); ``hinge`` the ξ of the span hinge of the mechanism.
    """

    support: str
    distribution: str
    reference: sympy.Expr
    ranges: tuple[RangeFactors, ...]
    first_yield: sympy.Expr | None
    collapse: sympy.Expr | None
    collapse_by_statics: sympy.Expr | None
    hinge: sympy.Expr | None
    yielding_ends: tuple[str, ...]

    def range(self, name: str) -> RangeFactors | None:
        return next((r for r in self.ranges if r.name == name), None)


def load_density(distribution: str, support: str) -> tuple[sympy.Expr, sympy.Expr | None]:
    """(uniform intensity per unit total load, point position ξ_P or None)."""
    if distribution == "uniform":
        return sympy.S.One, None
    return sympy.S.Zero, (sympy.S.One if support == "cantilever" else sympy.Rational(1, 2))


def static_shape(left: str, right: str, distribution: str, point: sympy.Expr | None) -> Shape:
    """w(ξ)·EI/(F·L³) from EI·w'''' = p̂ with the end conditions, exact."""
    c = sympy.symbols("c0:4")
    base = c[0] + c[1] * XI + c[2] * XI**2 / 2 + c[3] * XI**3 / 6
    if point is None:
        polys = [(sympy.S.Zero, sympy.S.One, base + XI**4 / 24)]
    else:
        jump = (XI - point)**3 / 6          # EI·w''' jumps by F at the point
        polys = [(sympy.S.Zero, point, base)]
        if point < 1:
            polys.append((point, sympy.S.One, base + jump))
    first, last = polys[0][2], polys[-1][2]
    equations = [sympy.diff(first, XI, order).subs(XI, 0) for order in _END_CONDITIONS[left]]
    equations += [sympy.diff(last, XI, order).subs(XI, 1) for order in _END_CONDITIONS[right]]
    if point == 1:                          # a tip load: the shear at the free end is F
        equations[-1] = sympy.diff(last, XI, 3).subs(XI, 1) + 1
    solution = sympy.solve(equations, c, dict=True)[0]
    return Shape(tuple((a, b, sympy.expand(p.subs(solution))) for a, b, p in polys))


def largest_deflection(shape: Shape) -> sympy.Expr:
    """ξ where |w| is largest (ties: the first), exact."""
    candidates: list[sympy.Expr] = []
    for a, b, poly in shape.pieces:
        candidates += [a, b]
        for root in sympy.solve(sympy.diff(poly, XI), XI):
            if root.is_real and a < root < b:
                candidates.append(sympy.radsimp(root))
    values = [(abs(float(shape.at(xi))), xi) for xi in candidates]
    best = max(v for v, _ in values)
    return min((xi for v, xi in values if v >= best * (1 - 1e-12)), key=float)


def moment(shape: Shape, xi: sympy.Expr) -> sympy.Expr:
    """Sagging bending moment M/(F·L) = −w''·EI/(F·L) at ξ."""
    return -shape.at(xi, 2)


def mechanism(support: str, distribution: str, point: sympy.Expr | None
              ) -> tuple[Shape, sympy.Expr, sympy.Expr]:
    """(collapse shape with 1 at the span hinge, hinge ξ_h, R_m·L/M_p) by virtual work,
    the span hinge where the collapse load is least."""
    if support == "cantilever":
        return Shape(((sympy.S.Zero, sympy.S.One, XI),)), sympy.S.Zero, \
            _mechanism_load(support, sympy.S.Zero, Shape(((sympy.S.Zero, sympy.S.One, XI),)),
                            distribution, point)
    h = sympy.Symbol("h", positive=True)
    if point is not None:
        hinge = point
        shape = _hinged(hinge)
        return shape, hinge, _mechanism_load(support, hinge, shape, distribution, point)
    load = _mechanism_load(support, h, _hinged(h), distribution, point)
    roots = [r for r in sympy.solve(sympy.diff(load, h), h) if r.is_real and 0 < r < 1]
    hinge = min(roots, key=lambda r: float(load.subs(h, r)))
    hinge = sympy.radsimp(hinge)
    return _hinged(hinge), hinge, sympy.radsimp(sympy.simplify(load.subs(h, hinge)))


def _hinged(h: sympy.Expr) -> Shape:
    return Shape(((sympy.S.Zero, h, XI / h), (h, sympy.S.One, (1 - XI) / (1 - h))))


def _mechanism_load(support: str, h, shape: Shape, distribution: str, point) -> sympy.Expr:
    """R·L/M_p from R·∫p̂φ = M_p·Σθ (unit deflection at the span hinge or tip)."""
    left, right = _ENDS[support]
    if support == "cantilever":
        rotations = sympy.S.One
    else:
        rotations = 1 / h + 1 / (1 - h)
        rotations += (1 / h if left == "fixed" else 0) + (1 / (1 - h) if right == "fixed" else 0)
    if distribution == "uniform":
        work = sum(sympy.integrate(p, (XI, a, b)) for a, b, p in shape.pieces)
    else:
        work = sympy.S.One
    return sympy.simplify(rotations / work)


def derive_factors(support: str, distribution: str) -> MemberFactors:
    """The shapes, factors, stiffnesses, resistances and reactions of one member."""
    if support not in SUPPORTS:
        raise ValueError(f"unknown support {support!r}")
    left, right = _ENDS[support]
    uniform, point = load_density(distribution, support)
    elastic = static_shape(left, right, distribution, point)
    # the reference point: under a point load; else where the elastic deflection is largest
    reference = largest_deflection(elastic) if point is None else point
    ranges = [_range("elastic", elastic, reference, uniform, point,
                     "static deflected shape under the load (EI·w′′′′ = p)")]
    yielding: tuple[str, ...] = ()
    collapse_shape, hinge, collapse = mechanism(support, distribution, point)
    critical = hinge if support != "cantilever" else sympy.S.Zero
    ends = [("left", sympy.S.Zero), ("right", sympy.S.One)]
    sections = [xi for name, xi in ends if _ENDS[support][0 if name == "left" else 1]
                == "fixed"] + ([] if support == "cantilever" else [hinge])
    moments = {xi: moment(elastic, xi) for xi in sections}
    top = max(abs(float(v)) for v in moments.values())
    first_yield = 1 / abs(max(moments.values(), key=lambda v: abs(float(v))))
    first = [xi for xi, v in moments.items() if abs(float(v)) >= top * (1 - 1e-12)]
    statics = collapse
    if all(xi in (0, 1) for xi in first) and support in ("fixed-fixed", "fixed-pinned"):
        yielding = tuple("left" if xi == 0 else "right" for xi in first)
        released = static_shape("pinned" if 0 in first else left,
                                "pinned" if 1 in first else right, distribution, point)
        ranges.append(_range("elastic-plastic", released, reference, uniform, point,
                             "static shape of the beam with hinges at the yielded fixed "
                             "ends (the shape of the increment)"))
        statics = _static_collapse(elastic, released, first_yield)
    else:
        first_yield = collapse
    ranges.append(_range("plastic", collapse_shape.scaled(1 / collapse_shape.at(reference)),
                         reference, uniform, point,
                         "collapse mechanism: rigid segments between plastic hinges"))
    with_reactions = []
    for item in ranges:
        diagram = _moment_diagram(item.name, ranges, elastic, first_yield, collapse)
        with_reactions.append(_with_reactions(item, support, uniform, point, critical, diagram))
    return MemberFactors(support, distribution, reference, tuple(with_reactions), first_yield,
                         collapse, statics, hinge, yielding)


def _range(name: str, shape: Shape, reference, uniform, point, note: str) -> RangeFactors:
    deflection = shape.at(reference)
    phi = shape.scaled(1 / deflection)
    load_factor = phi.integral() if point is None else phi.at(point)
    mass_factor = phi.integral(power=2)
    stiffness = None if name == "plastic" else sympy.radsimp(1 / deflection)
    return RangeFactors(name, phi, sympy.radsimp(load_factor * (1 if point is not None
                                                                else uniform)),
                        mass_factor, stiffness, (), note)


def _static_collapse(elastic: Shape, released: Shape, first_yield) -> sympy.Expr:
    """R_m·L/M_p by statics: the least load at which the span moment of the partly yielded
    beam, F_e·m₁(ξ) + (F − F_e)·m₂(ξ), reaches M_p (a lower bound; it equals the mechanism
    load by the uniqueness theorem when the moment is nowhere above M_p)."""
    f = sympy.Symbol("f", positive=True)
    best = None
    for (a, b, p1), (_a, _b, p2) in zip(elastic.pieces, released.pieces):
        total = -(first_yield * sympy.diff(p1, XI, 2) + (f - first_yield) * sympy.diff(p2, XI, 2))
        found = sympy.solve([sympy.diff(total, XI), total - 1], [XI, f], dict=True)
        for end in (a, b):
            found += [{XI: end, f: value} for value in sympy.solve(total.subs(XI, end) - 1, f)]
        for row in found:
            xi, value = sympy.radsimp(row[XI]), sympy.radsimp(row[f])
            if xi.is_real and value.is_real and a <= xi <= b and value > first_yield \
                    and (best is None or value < best):
                best = value
    return best


def _moment_diagram(name, ranges, elastic: Shape, first_yield, collapse):
    """M(ξ)/L as a function (R ↦ …) of the resistance R in the range."""
    R = sympy.Symbol("R")
    if name == "elastic":
        return lambda xi: R * moment(elastic, xi), R
    released = next((r for r in ranges if r.name == "elastic-plastic"), None)
    if released is None:      # no intermediate range: the collapse diagram is R/R_m × elastic's
        return lambda xi: R * moment(elastic, xi), R      # every hinge reaches M_p at once
    shape = released.shape.scaled(1 / released.stiffness)      # back to w per unit load
    return (lambda xi: first_yield * moment(elastic, xi) + (R - first_yield) * moment(shape, xi)), R


def _with_reactions(item: RangeFactors, support: str, uniform, point, critical, diagram
                    ) -> RangeFactors:
    """V = a·R + b·F + c·M_p/L at each support from the equilibrium of the beam's segments."""
    section_moment, R = diagram
    F, acc, va, vb = sympy.symbols("F acc V_A V_B")
    phi = item.shape

    def load_on(lo, hi):          # ∫ q_net over [lo, hi] and its moment about ξ = about
        force = uniform * F * (hi - lo) - acc * phi.integral(start=lo, end=hi)
        if point is not None and lo <= point <= hi and not (point == lo and lo != 0):
            force += F
        return force

    def moment_about(lo, hi, about):
        m = uniform * F * sympy.integrate(about - XI, (XI, lo, hi)) \
            - acc * phi.integral(weight=about - XI, start=lo, end=hi)
        if point is not None and lo <= point <= hi and not (point == lo and lo != 0):
            m += F * (about - point)
        return m

    def m_at(xi):
        if support == "cantilever" and xi == 1:
            return sympy.S.Zero
        ends = _ENDS[support]
        if (xi == 0 and ends[0] == "pinned") or (xi == 1 and ends[1] == "pinned"):
            return sympy.S.Zero
        return section_moment(xi)

    if support == "cantilever":
        equations = [sympy.Eq(m_at(1), m_at(0) + va - moment_about(0, 1, 1)),
                     sympy.Eq(va, load_on(0, 1))]
        unknowns = [va, acc]
    else:
        c = critical
        equations = [sympy.Eq(m_at(c), m_at(0) + va * c - moment_about(0, c, c)),
                     sympy.Eq(m_at(c), m_at(1) + vb * (1 - c) + moment_about(c, 1, c)),
                     sympy.Eq(va + vb, load_on(0, 1))]
        unknowns = [va, vb, acc]
    solution = sympy.solve(equations, unknowns, dict=True)[0]
    reactions = [("left", va)] + ([] if support == "cantilever" else [("right", vb)])
    rows = []
    for side, unknown in reactions:
        value = sympy.expand(solution[unknown])
        a, b = value.coeff(R), value.coeff(F)
        # the part that is neither: from the moments M_p at yielded sections (units M_p/L)
        constant = sympy.expand(value - a * R - b * F)
        rows.append((side, sympy.radsimp(a), sympy.radsimp(b), sympy.radsimp(constant)))
    return RangeFactors(item.name, item.shape, item.load_factor, item.mass_factor,
                        item.stiffness, tuple(rows), item.shape_note)


@dataclass(frozen=True)
class EquivalentMember:
    """A member of the case file and its equivalent oscillator, exact SI.

    The oscillator is K_LM·M·ÿ + c·ẏ + R(y) = F(t) in the deflection y at x_r = ξ_r·L,
    F the total load (p·L for a uniform load p per length).
    """

    support: str
    distribution: str
    span: sympy.Expr
    rigidity: sympy.Expr
    mass_per_length: sympy.Expr
    plastic_moment: sympy.Expr | None
    damping_ratio: sympy.Expr
    factors: MemberFactors

    @property
    def mass(self) -> sympy.Expr:
        """M = m·L."""
        return self.mass_per_length * self.span

    def stiffness(self, name: str) -> sympy.Expr | None:
        """k of the range: total load per deflection at x_r (EI/L³ times the derived number)."""
        item = self.factors.range(name)
        if item is None or item.stiffness is None:
            return None
        return item.stiffness * self.rigidity / self.span**3

    def resistance(self, name: str) -> sympy.Expr | None:
        """The total load at the end of the range: R_e (first yield) or R_m (mechanism)."""
        if self.plastic_moment is None:
            return None
        scale = self.plastic_moment / self.span
        if name == "elastic":
            return self.factors.first_yield * scale
        return self.factors.collapse * scale

    @property
    def ranges(self) -> tuple[RangeFactors, ...]:
        """The ranges that occur: elastic only without a plastic moment."""
        if self.plastic_moment is None:
            return self.factors.ranges[:1]
        return self.factors.ranges

    @property
    def load_mass_factor(self) -> sympy.Expr:
        """K_LM of the oscillator: the elastic one, or with a plastic moment the mean of the
        elastic and plastic values (one mass for the whole response)."""
        elastic = self.factors.range("elastic").load_mass_factor
        if self.plastic_moment is None:
            return elastic
        return (elastic + self.factors.range("plastic").load_mass_factor) / 2

    @property
    def equivalent_stiffness(self) -> sympy.Expr:
        """k_E: the elastic stiffness, or where the fixed ends yield first the stiffness of the
        elastic-perfectly-plastic line with the same area under the resistance up to R_m."""
        k1 = self.stiffness("elastic")
        k2 = self.stiffness("elastic-plastic")
        if self.plastic_moment is None or k2 is None:
            return k1
        r_e, r_m = self.resistance("elastic"), self.resistance("plastic")
        y_e = r_e / k1
        y_p = y_e + (r_m - r_e) / k2
        area = r_e * y_e / 2 + (r_e + r_m) * (y_p - y_e) / 2
        return sympy.radsimp(sympy.simplify(r_m**2 / (2 * (r_m * y_p - area))))

    @property
    def reference_text(self) -> str:
        xi = self.factors.reference
        if xi == sympy.Rational(1, 2):
            return "midspan"
        if xi == 1:
            return "the tip"
        return f"x = ({sympy.sstr(xi)})·L ≈ {float(xi):.4f}·L from the fixed end"


def oscillator_number(value: sympy.Expr) -> sympy.Expr:
    """``value`` for the oscillator: itself when rational, else its 30-significant-digit
    rational (irrational factors such as √33 would make every later stage symbolic in them)."""
    value = sympy.nsimplify(value) if value.is_Float else value
    if value.is_Rational:
        return value
    return sympy.Rational(str(sympy.N(value, 30)))


def equivalent_member(support: str, distribution: str, span, rigidity, mass_per_length,
                      plastic_moment, damping_ratio) -> EquivalentMember:
    return EquivalentMember(support, distribution, span, rigidity, mass_per_length,
                            plastic_moment, damping_ratio, factors_of(support, distribution))


@functools.cache
def factors_of(support: str, distribution: str) -> MemberFactors:
    """derive_factors, remembered per (support, distribution): the result is immutable."""
    return derive_factors(support, distribution)


def scale_load(load, factor: sympy.Expr):
    """The load spec times ``factor`` (a load per length → the total load on the span)."""
    from dataclasses import replace
    from types import MappingProxyType
    values = {name: (value * factor if name in ("amplitude", "impulse", "rate") else value)
              for name, value in load.values.items()}
    return replace(load, values=MappingProxyType(values),
                   points=tuple((t, v * factor) for t, v in load.points),
                   expression=None if load.expression is None else load.expression * factor)
