"""Several masses: natural modes, and the modal equations solved by the scalar engine.

Method (classical modal analysis, stated as theorems rather than copied from a text):

* the undamped natural frequencies ω_r are the roots of the characteristic equation
  det(K − ω²M) = 0, a polynomial of degree n in λ = ω² with exact rational coefficients.
  It is factored over the rationals; a linear factor gives an exact ω_r = √λ_r, any other
  factor is solved to 30 significant digits;
* the mode shapes φ_r solve (K − λ_r M) φ_r = 0: exactly (rational null space, repeated
  roots M-orthogonalised) for exact λ_r, at 50 digits from the symmetric eigenproblem
  L⁻¹ K L⁻ᵀ (M = L Lᵀ) otherwise. Each shape is scaled so its largest entry is +1;
* with x = Σ φ_r q_r, M-orthogonality of the shapes (φ_rᵀ M φ_s = 0, r ≠ s) turns the matrix
  equation into one scalar equation per mode when the damping is classical (C Φ diagonal in
  the modal basis: per-mode ratios, Rayleigh damping, or a damping matrix with
  C M⁻¹ K = K M⁻¹ C, the Caughey–O'Kelly condition):
  q_r″ + 2 ζ_r ω_r q_r′ + ω_r² q_r = p_r(t), p_r = φ_rᵀ f(t) / M_r (force) or
  −Γ_r a_g(t) (support acceleration), M_r = φ_rᵀ M φ_r, Γ_r = φ_rᵀ M 1 / M_r;
  each is solved by the scalar Laplace engine (``response.solve``) exactly as a one-mass
  case is, and the responses are summed back: x_i = Σ_r φ_ir q_r;
* a damping matrix that is not classical is solved by complex modes of the state
  equation y′ = A y + b(t), y = (x, x′): A = Ψ diag(p_k) Ψ⁻¹ (50-digit eigen-decomposition,
  poles and vectors carried at 30 digits; the poles are the roots of det(Ms² + Cs + K)),
  z_k = l_k y with z_k′ = p_k z_k + l_k b. For a conjugate pair the real and imaginary
  parts of z_k obey real second-order equations with an input derivative,
  η″ − 2σ η′ + |p|² η = part(c) g′ − part(p̄ c) g, each solved by the same scalar engine
  (input polynomial s or 1); a real pole gives z′ − p z = c g. Then
  x_i = Σ 2(Re ψ_ik Re z_k − Im ψ_ik Im z_k) (+ ψ_ik z_k for real poles).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from types import MappingProxyType
from typing import Any

import mpmath
import sympy

from . import quantities
from .chain_case import ChainSpec
from .errors import DerivationError
from .laplace import Pole, s
from .loads import LoadHistory, Rewrite, SingularityTerm, rewrite_loads
from .response import EXACT_BREAKPOINT_LIMIT, Piece, Solution, coefficient_policy, load_pieces, solve
from .results import Extreme, extreme_magnitude, numeric_intervals, piece_functions
from .specs import Case, SystemSpec
from .systems import LinearModel, build_model

LAMBDA = sympy.Symbol("lambda", positive=True)   # λ = ω² in the characteristic equation
DIGITS = 30
DEFAULT_PERIODS = 5


@dataclass(frozen=True)
class NaturalMode:
    """One natural mode and its modal equation, with the scalar engine's solution of it.

    ``shape`` has its largest entry +1; ``participation`` is Γ_r = φᵀM1/M_r and
    ``effective_mass`` (φᵀM1)²/M_r (their sum over the modes is the total mass);
    ``load_factors`` are φ_jr/M_r, the share of a force on mass j in p_r.
    """

    number: int
    eigenvalue: sympy.Expr           # λ_r = ω_r²
    omega: sympy.Expr
    exact: bool
    shape: tuple[sympy.Expr, ...]
    modal_mass: sympy.Expr
    modal_stiffness: sympy.Expr
    damping_ratio: sympy.Expr | None     # None: non-classical damping couples the modes
    participation: sympy.Expr
    effective_mass: sympy.Expr
    load_factors: tuple[sympy.Expr, ...]
    initial: tuple[sympy.Expr, sympy.Expr]
    model: LinearModel | None = None
    history: LoadHistory | None = None
    solution: Solution | None = None


@dataclass(frozen=True)
class Response:
    """One response history of the system: a mass's displacement, a spring's stretch, the
    support reaction. ``kind`` is displacement | stretch | support-reaction."""

    name: str                         # JSON name: x1, x2, …, e1, …, R
    label: str
    kind: str
    pieces: tuple[Piece, ...]
    peak: Extreme | None
    stiffness: sympy.Expr | None = None    # springs: k, so the spring force is k·e
    spring_force: Extreme | None = None


@dataclass(frozen=True)
class ComplexMode:
    """One state-space pole σ ± iω_d (frequency 0: a real pole) and the scalar problems
    the engine solved for its modal coordinate."""

    number: int
    rate: sympy.Expr
    frequency: sympy.Expr
    model: LinearModel
    solutions: tuple[tuple[str, Solution], ...]


@dataclass(frozen=True)
class StateSpaceRoute:
    """The non-classical route: det(Ms² + Cs + K) and the complex modes."""

    polynomial: sympy.Expr
    modes: tuple[ComplexMode, ...]


@dataclass(frozen=True)
class ChainNumbers:
    """The results of the watched mass in the shape the console line reads."""

    peak: Extreme | None
    static: float | None
    dlf: float | None


@dataclass(frozen=True)
class ChainDerivation:
    """Everything derived for a case of several masses, immutable."""

    case: Case
    chain: ChainSpec
    route: str                          # "modal" | "state-space"
    characteristic: sympy.Expr          # det(K − λM); det(Ms² + Cs + K) is on state_space
    factored: sympy.Expr
    modes: tuple[NaturalMode, ...]
    state_space: StateSpaceRoute | None
    damping_matrix: sympy.ImmutableMatrix    # the C of the equation (classical C for ratios)
    history: LoadHistory
    until: sympy.Expr
    window_note: str
    responses: tuple[Response, ...]
    numbers: ChainNumbers
    exact: bool
    checks: tuple = ()
    warnings: tuple[str, ...] = ()

    @property
    def masses(self) -> tuple[Response, ...]:
        return tuple(r for r in self.responses if r.kind == "displacement")

    @property
    def springs(self) -> tuple[Response, ...]:
        return tuple(r for r in self.responses if r.kind == "stretch")

    @property
    def reaction(self) -> Response:
        return next(r for r in self.responses if r.kind == "support-reaction")

    @property
    def watched(self) -> Response:
        return self.masses[self.chain.watch - 1]

    @property
    def pieces(self) -> tuple[Piece, ...]:
        return self.watched.pieces

    @property
    def window(self):
        from .derivation import Window
        return Window(self.until, self.window_note)

    @property
    def status(self) -> str:
        return "verified" if self.checks and all(c.passed for c in self.checks) else "failed"

    @property
    def passed(self) -> bool:
        return self.status == "verified"

    def response_names(self) -> tuple[str, ...]:
        """The names ``evaluate(times, response=…)`` accepts: x1…, e1…, R."""
        return tuple(r.name for r in self.responses)

    def evaluate(self, times, derivative: int = 0, *, response: str | None = None):
        """A response at ``times`` (s, inside [0, until]) from the closed-form pieces, SI.

        Parameters
        ----------
        times : array_like
            Times in seconds; at a breakpoint the piece that starts there is used.
        derivative : int, optional
            0 for the value, 1 for the first time derivative, and so on.
        response : str, optional
            ``x1``, ``x2``, … (masses), ``e1``, … (spring stretches), ``R`` (support
            reaction); default the watched mass.

        Returns
        -------
        numpy.ndarray
            float64 values, the shape of ``times``.
        """
        import numpy

        from .errors import ClosedformError

        name = response or self.watched.name
        chosen = next((r for r in self.responses if r.name == name), None)
        if chosen is None:
            raise ClosedformError(f"no response {name!r} (expected one of: "
                                  f"{', '.join(self.response_names())})")
        grid = numpy.asarray(times, dtype=float)
        starts = numpy.array([float(sympy.N(p.start, 30)) for p in chosen.pieces])
        index = numpy.clip(numpy.searchsorted(starts, grid, side="right") - 1, 0, None)
        values = numpy.zeros_like(grid)
        for k, piece in enumerate(chosen.pieces):
            mask = index == k
            if not mask.any():
                continue
            function = piece.numeric if piece.numeric is not None else piece.local.numeric()
            for _ in range(derivative):
                function = function.derivative()
            values[mask] = function.evaluate_float(grid[mask] - starts[k])
        return values

    def to_dict(self) -> dict[str, Any]:
        from .chain_output import result_dictionary
        return result_dictionary(self)

    def to_json(self) -> str:
        import json
        return json.dumps(self.to_dict(), indent=2, allow_nan=False)

    def _repr_markdown_(self) -> str:
        from .chain_sheet import render_markdown
        return render_markdown(self)

    def _repr_latex_(self) -> str:
        from .chain_sheet import render_latex
        return render_latex(self, standalone=False)


# ----------------------------------------------------------------------------- modes


def characteristic_polynomial(chain: ChainSpec) -> sympy.Poly:
    """det(K − λM) as a polynomial in λ with exact rational coefficients."""
    matrix = chain.stiffness_matrix - LAMBDA * chain.mass_matrix
    return sympy.Poly(sympy.expand(matrix.det(method="berkowitz")), LAMBDA)


def _numeric_eigen(mass: sympy.ImmutableMatrix, stiffness: sympy.ImmutableMatrix, dps: int = 50):
    """Eigenvalues (rising) and M-orthonormal shapes of K φ = λ M φ at ``dps`` digits."""
    n = mass.shape[0]
    with mpmath.workdps(dps):
        m = mpmath.matrix([[mpmath.mpf(sympy.Rational(mass[i, j]).p) / sympy.Rational(mass[i, j]).q
                            for j in range(n)] for i in range(n)])
        k = mpmath.matrix([[mpmath.mpf(sympy.Rational(stiffness[i, j]).p)
                            / sympy.Rational(stiffness[i, j]).q for j in range(n)] for i in range(n)])
        lower = mpmath.cholesky(m)
        inverse = mpmath.inverse(lower)
        a = inverse * k * inverse.T
        a = (a + a.T) / 2
        values, vectors = mpmath.eigsy(a)
        order = sorted(range(n), key=lambda i: values[i])
        shapes = inverse.T * vectors
        return ([values[i] for i in order], [[shapes[j, i] for j in range(n)] for i in order])


def _scaled_shape(vector: Sequence[Any]) -> list[Any]:
    """The shape with its largest entry (by magnitude, the first such) equal to +1."""
    magnitudes = [abs(sympy.N(v, 40)) if isinstance(v, sympy.Expr) else abs(v) for v in vector]
    top = max(range(len(vector)), key=lambda i: (magnitudes[i], -i))
    return [v / vector[top] for v in vector]


def _float(value: Any) -> sympy.Float:
    if isinstance(value, sympy.Expr):
        return sympy.Float(sympy.N(value, DIGITS + 10), DIGITS)
    return sympy.Float(mpmath.nstr(value, DIGITS + 10, strip_zeros=False), DIGITS)


def natural_modes(chain: ChainSpec) -> tuple[sympy.Poly, sympy.Expr, list[tuple]]:
    """(det(K − λM), its factored form, [(λ, exact, shape)] in rising order)."""
    polynomial = characteristic_polynomial(chain)
    _lead, factors = polynomial.factor_list()
    mass, stiffness = chain.mass_matrix, chain.stiffness_matrix
    numeric_values, numeric_shapes = _numeric_eigen(mass, stiffness)
    found: list[tuple] = []
    for factor, multiplicity in factors:
        if factor.degree() == 1:
            c = factor.all_coeffs()
            value = sympy.Rational(-c[1], c[0])
            basis = (stiffness - value * mass).nullspace()
            if len(basis) != multiplicity:
                raise DerivationError(f"the null space of K − {value}·M has {len(basis)} "
                                      f"vectors for a root of multiplicity {multiplicity}")
            orthogonal: list[sympy.Matrix] = []
            for vector in basis:
                for other in orthogonal:
                    vector = vector - (other.T * mass * vector)[0] / (other.T * mass * other)[0] * other
                orthogonal.append(vector)
            for vector in orthogonal:
                found.append((value, True, tuple(sympy.simplify(v) for v in _scaled_shape(list(vector)))))
        else:
            for root in factor.nroots(n=DIGITS + 10, maxsteps=500):
                value = sympy.Float(sympy.re(root), DIGITS)
                for _ in range(multiplicity):
                    found.append((value, False, None))
    found.sort(key=lambda item: sympy.N(item[0], 40))
    if len(found) != mass.shape[0]:
        raise DerivationError("the characteristic equation did not give one root per mass")
    result = []
    taken: set[int] = set()
    for value, exact, shape in found:
        if shape is None:
            index = min((i for i in range(len(numeric_values)) if i not in taken),
                        key=lambda i: abs(numeric_values[i] - mpmath.mpf(str(value))))
            taken.add(index)
            with mpmath.workdps(50):
                shape = tuple(_float(v) for v in _scaled_shape(numeric_shapes[index]))
        else:
            index = min((i for i in range(len(numeric_values)) if i not in taken),
                        key=lambda i: abs(numeric_values[i] - mpmath.mpf(str(sympy.N(value, 40)))))
            taken.add(index)
        result.append((value, exact, shape))
    return polynomial, sympy.factor(polynomial.as_expr()), result


def classical_damping(chain: ChainSpec) -> bool:
    """C M⁻¹ K = K M⁻¹ C (exactly): the damping matrix is diagonal in the modal basis."""
    c = chain.damping_matrix
    if c is None:
        return True
    m_inverse = chain.mass_matrix.inv()
    difference = c * m_inverse * chain.stiffness_matrix - chain.stiffness_matrix * m_inverse * c
    return all(sympy.simplify(entry) == 0 for entry in difference)


def _modal_model(eigenvalue: sympy.Expr, ratio: sympy.Expr, number: int) -> LinearModel:
    """q″ + 2ζω q′ + ω² q = p(t), through the scalar model builder (its poles and regime)."""
    omega = sympy.sqrt(eigenvalue)
    parameters = {"mass": sympy.S.One, "stiffness": eigenvalue, "damping": 2 * ratio * omega}
    if ratio != 0:
        parameters["damping_ratio"] = ratio
    d = quantities.dimension
    spec = SystemSpec("spring-mass-damper", MappingProxyType(parameters), None,
                      d("force"), d("length"))
    model = build_model(spec, {}, key_prefix="system")
    return replace(model, variable=f"q_{number}", load_name=f"p_{number}")


def scaled_history(history: LoadHistory, factor_of_load) -> LoadHistory:
    """The load history with every term of load N multiplied by ``factor_of_load(N)`` (zero
    factors kept, so that every mode has the same breakpoints)."""
    rewrites = []
    for rewrite in history.rewrites:
        factor = factor_of_load(rewrite.load_number)
        terms = tuple(replace(term, coefficient=term.coefficient * factor)
                      if isinstance(term, SingularityTerm)
                      else replace(term, impulse=term.impulse * factor)
                      for term in rewrite.terms)
        rewrites.append(Rewrite(rewrite.load_number, rewrite.shape, rewrite.rule, rewrite.source,
                                terms))
    return LoadHistory(tuple(rewrites))


def _ratio_of_mode(chain: ChainSpec, index: int, eigenvalue, shape, modal_mass) -> sympy.Expr:
    omega = sympy.sqrt(eigenvalue)
    if chain.damping_source == "none":
        return sympy.S.Zero
    if chain.damping_ratios is not None:
        return chain.damping_ratios[index]
    phi = sympy.Matrix(shape)
    value = (phi.T * chain.damping_matrix * phi)[0] / (2 * omega * modal_mass)
    return value if value.has(sympy.Float) else sympy.radsimp(sympy.simplify(value))


# ----------------------------------------------------------------------------- the derivation


def _window(case: Case, chain: ChainSpec, slowest: sympy.Expr) -> tuple[sympy.Expr, str]:
    if case.report.until is not None:
        return case.report.until, "as given in [report] until"
    ends = [start + load.length() for load in case.loads for start in load.starts()]
    end = max(ends, key=lambda e: sympy.N(e, 30)) if ends else sympy.S.Zero
    period = 2 * sympy.pi / slowest
    until = end + DEFAULT_PERIODS * period
    if until.has(sympy.Float) or sympy.count_ops(until) > 12:
        until = sympy.Float(sympy.N(until, DIGITS), DIGITS)
    return until, (f"default: end of the last load plus {DEFAULT_PERIODS} times the longest "
                   "natural period")


def derive_chain(case: Case, *, time_budget: float | None = None) -> ChainDerivation:
    """Derive, evaluate and check the response of a case of several masses."""
    from .budget import time_budget as budget_for
    from .checks.chain import chain_checks

    chain: ChainSpec = case.chain
    with budget_for(time_budget, case.source) as budget:
        with budget.stage("natural modes"):
            polynomial, factored, roots = natural_modes(chain)
        history = rewrite_loads(case.loads)
        breakpoints = {t.at for t in history.terms} | {i.at for i in history.impulses}
        classical = classical_damping(chain)
        slowest = sympy.sqrt(roots[0][0])
        until, note = _window(case, chain, slowest)
        with budget.stage("modal equations (Laplace transform and assembly)"):
            if classical:
                exact = all(item[1] for item in roots) and len(breakpoints) <= EXACT_BREAKPOINT_LIMIT
                modes = _modal_solutions(case, chain, roots, history, until, exact)
                masses = _sum_modes(modes, exact)
                damping = _classical_damping_matrix(chain, modes)
                route, state_space, characteristic = "modal", None, polynomial.as_expr()
            else:
                # undamped modes for the sheet; the damping couples them (no modal ratio)
                modes = tuple(replace(_mode_data(chain, i, value, exact_root, shape),
                                      damping_ratio=None)
                              for i, (value, exact_root, shape) in enumerate(roots))
                state_space, masses, exact = _state_space(case, chain, history, until)
                damping = chain.damping_matrix
                route, characteristic = "state-space", polynomial.as_expr()
        with budget.stage("results"):
            responses = _responses(chain, masses, damping, until, exact)
            numbers = _numbers(case, chain, history, responses, until)
        partial = ChainDerivation(case, chain, route, characteristic, factored, modes,
                                  state_space, damping, history, until, note, responses,
                                  numbers, exact)
        with budget.stage("verification"):
            checks = tuple(chain_checks(partial))
    return replace(partial, checks=checks, warnings=_warnings(case, partial))


def _mode_data(chain: ChainSpec, index: int, value, exact: bool, shape) -> NaturalMode:
    mass = chain.mass_matrix
    phi = sympy.Matrix(shape)
    modal_mass = (phi.T * mass * phi)[0]
    ones = sympy.ones(mass.shape[0], 1)
    loading = (phi.T * mass * ones)[0]
    gamma = loading / modal_mass
    ratio = _ratio_of_mode(chain, index, value, shape, modal_mass)
    x0 = sympy.Matrix(chain.initial_displacements)
    v0 = sympy.Matrix(chain.initial_velocities)
    q0 = (phi.T * mass * x0)[0] / modal_mass
    qd0 = (phi.T * mass * v0)[0] / modal_mass
    return NaturalMode(index + 1, value, sympy.sqrt(value), exact, tuple(shape), modal_mass,
                       value * modal_mass, ratio, gamma, loading**2 / modal_mass,
                       tuple(v / modal_mass for v in shape), (q0, qd0))


def _modal_solutions(case: Case, chain: ChainSpec, roots, history: LoadHistory, until,
                     exact: bool) -> tuple[NaturalMode, ...]:
    modes = []
    for index, (value, exact_root, shape) in enumerate(roots):
        mode = _mode_data(chain, index, value, exact_root, shape)
        model = _modal_model(value, mode.damping_ratio, mode.number)
        if chain.excitation == "force":
            factors = mode.load_factors
            modal_history = scaled_history(
                history, lambda n, factors=factors: factors[chain.load_masses[n - 1] - 1])
        else:
            modal_history = scaled_history(history, lambda n, g=mode.participation: -g)
        initial = None if all(v == 0 for v in mode.initial) else mode.initial
        solution = solve(model, modal_history, initial, until, exact=exact)
        modes.append(replace(mode, model=model, history=modal_history, solution=solution))
    return tuple(modes)


def _combine(parts: Sequence[tuple[sympy.Expr, Sequence[Piece]]], exact: bool) -> tuple[Piece, ...]:
    """Σ factor · pieces, interval by interval (every part has the same breakpoints)."""
    tidy = coefficient_policy(exact)
    lengths = {len(p) for _f, p in parts}
    if len(lengths) != 1:
        raise DerivationError("the modal solutions do not share their breakpoints")
    combined = []
    for k in range(lengths.pop()):
        first = parts[0][1][k]
        local = None
        terms = [pieces[k].local.scaled(factor) for factor, pieces in parts]
        for term in terms:
            local = term if local is None else local + term
        local = local.map_coefficients(tidy)
        numeric = None
        if not exact:
            local = _without_residue(local, terms)
            numeric = local.numeric()
        combined.append(Piece(first.start, first.end, local, numeric))
    return tuple(combined)


RESIDUE = 1e-26   # of the parts' magnitudes: below the 30 digits carried, a cancellation


def _without_residue(total, parts):
    """The sum without the coefficients that 30-digit parts cancelled to rounding residue
    (the parts of a real pole's complex-phased eigenvector, say)."""
    kept = []
    for mode, c in total.terms.items():
        size = sum(abs(float(part.terms.get(mode, 0))) for part in parts)
        if abs(float(c)) > RESIDUE * size:
            kept.append((mode, c))
    return type(total).from_terms(kept)


def _sum_modes(modes: Sequence[NaturalMode], exact: bool) -> list[tuple[Piece, ...]]:
    n = len(modes)
    return [_combine([(mode.shape[i], mode.solution.pieces) for mode in modes], exact)
            for i in range(n)]


def _classical_damping_matrix(chain: ChainSpec, modes: Sequence[NaturalMode]):
    """The damping matrix of the equation: given, Rayleigh, or for per-mode ratios
    C = M Φ diag(2ζ_r ω_r / M_r) Φᵀ M (the matrix whose modal damping is ζ_r)."""
    if chain.damping_matrix is not None:
        return chain.damping_matrix
    n = chain.size
    if chain.damping_source == "none":
        return sympy.ImmutableMatrix(sympy.zeros(n, n))
    phi = sympy.Matrix([[mode.shape[i] for mode in modes] for i in range(n)])
    middle = sympy.diag(*[2 * mode.damping_ratio * mode.omega / mode.modal_mass for mode in modes])
    matrix = chain.mass_matrix * phi * middle * phi.T * chain.mass_matrix
    return sympy.ImmutableMatrix(matrix.applyfunc(
        lambda e: e if e.has(sympy.Float) else sympy.radsimp(sympy.simplify(e))))


def _state_space(case: Case, chain: ChainSpec, history: LoadHistory, until):
    """The non-classical route: complex modes of the state equation, each conjugate pair
    written as real second-order equations solved by the scalar engine.

    With y = (x, x′), y′ = A y + b(t) and A = Ψ diag(p) Ψ⁻¹ (rows l_k of Ψ⁻¹), the modal
    coordinate z_k = l_k y obeys z_k′ = p_k z_k + l_k b(t). For a pair p, p̄ the real and
    imaginary parts η of z obey (D − p)(D − p̄) η = part[(D − p̄) l b], i.e.
    η″ − 2σ η′ + |p|² η = part(c) g′ − part(p̄ c) g for an input c·g(t); a real pole gives
    z′ − p z = c g. Then x_i = Σ_pairs 2(Re ψ_ik Re z_k − Im ψ_ik Im z_k) + Σ_real ψ_ik z_k.
    """
    n = chain.size
    mass, damping, stiffness = chain.mass_matrix, chain.damping_matrix, chain.stiffness_matrix
    polynomial = sympy.expand(sympy.Matrix(mass * s**2 + damping * s + stiffness).det(
        method="berkowitz"))
    with mpmath.workdps(50):
        def mp(value):
            return mpmath.mpf(sympy.Rational(value).p) / sympy.Rational(value).q
        m_inverse = mpmath.inverse(mpmath.matrix([[mp(mass[i, j]) for j in range(n)]
                                                  for i in range(n)]))
        k = mpmath.matrix([[mp(stiffness[i, j]) for j in range(n)] for i in range(n)])
        c = mpmath.matrix([[mp(damping[i, j]) for j in range(n)] for i in range(n)])
        a = mpmath.zeros(2 * n, 2 * n)
        lower_k, lower_c = -m_inverse * k, -m_inverse * c
        for i in range(n):
            a[i, n + i] = 1
            for j in range(n):
                a[n + i, j], a[n + i, n + j] = lower_k[i, j], lower_c[i, j]
        values, right = mpmath.eig(a)
        left = mpmath.inverse(right)
        y0 = mpmath.matrix([mp(v) for v in chain.initial_displacements]
                           + [mp(v) for v in chain.initial_velocities])
        if chain.excitation == "force":
            inputs = {j + 1: mpmath.matrix([0] * n + [m_inverse[i, j] for i in range(n)])
                      for j in range(n)}
        else:
            inputs = {None: mpmath.matrix([0] * n + [-1] * n)}
        chosen = []
        for index, value in enumerate(values):
            scale = abs(value)
            if abs(value.imag) <= mpmath.mpf(10) ** -35 * scale:
                chosen.append((index, False))
            elif value.imag > 0:
                chosen.append((index, True))
        for first, (i, _pi) in enumerate(chosen):
            for j, _pj in chosen[first + 1:]:
                if abs(values[i] - values[j]) <= mpmath.mpf(10) ** -25 * abs(values[i]):
                    raise DerivationError("repeated state-space poles (a defective or repeated "
                                          "complex mode) are not supported; perturb the damping")
        pairs, contributions = [], [[] for _ in range(n)]
        for number, (index, is_pair) in enumerate(chosen, start=1):
            p = values[index]
            z0 = sum(left[index, q] * y0[q] for q in range(2 * n))
            factors = {key: sum(left[index, q] * vector[q] for q in range(2 * n))
                       for key, vector in inputs.items()}
            psi = [right[i, index] for i in range(n)]
            rate, frequency = _sympy_float(p.real), _sympy_float(p.imag) if is_pair else sympy.S.Zero
            solutions = []
            if is_pair:
                model = LinearModel("ode", f"eta_{number}", f"g_{number}",
                                    (sympy.S.One, -2 * rate, rate**2 + frequency**2), sympy.S.One,
                                    sympy.S.One, (Pole(rate, frequency),), "under-damped", False)
                for part, weight in (("re", [2 * v.real for v in psi]),
                                     ("im", [-2 * v.imag for v in psi])):
                    def take(value, part=part):
                        return _sympy_float(value.real if part == "re" else value.imag)
                    derivative = scaled_history(history, lambda n_, f=factors, t=take:
                                                t(f[_input_key(chain, n_)]))
                    direct = scaled_history(history, lambda n_, f=factors, t=take, p=p:
                                            -t(mpmath.conj(p) * f[_input_key(chain, n_)]))
                    initial = (take(z0), take(p * z0))
                    initial = None if all(v == 0 for v in initial) else initial
                    for name, scale, sub, start in (("s", s, derivative, None),
                                                    ("1", sympy.S.One, direct, initial)):
                        solution = solve(replace(model, input_scale=scale), sub, start, until,
                                         exact=False)
                        solutions.append((f"{part} z_{number}, input {name}", solution))
                        for i in range(n):
                            contributions[i].append((_sympy_float(weight[i]), solution.pieces))
            else:
                model = LinearModel("ode", f"z_{number}", f"g_{number}", (sympy.S.One, -rate),
                                    sympy.S.One, sympy.S.One, (Pole(rate, sympy.S.Zero),),
                                    "first-order", False)
                # the eigenvector may carry any complex phase: z = Re z + i Im z, both real,
                # each obeys z′ − p z = part(c) g, and x_i gets Re(ψ_ik z_k)
                for part, weight in (("re", [v.real for v in psi]), ("im", [-v.imag for v in psi])):
                    def take(value, part=part):
                        return _sympy_float(value.real if part == "re" else value.imag)
                    sub = scaled_history(history, lambda n_, f=factors, t=take:
                                         t(f[_input_key(chain, n_)]))
                    initial = (take(z0),)
                    solution = solve(model, sub, None if initial[0] == 0 else initial, until,
                                     exact=False)
                    solutions.append((f"{part} z_{number}", solution))
                    for i in range(n):
                        contributions[i].append((_sympy_float(weight[i]), solution.pieces))
            pairs.append(ComplexMode(number, rate, frequency, model, tuple(solutions)))
    masses = [_combine(parts, False) for parts in contributions]
    return StateSpaceRoute(polynomial, tuple(pairs)), masses, False


def _input_key(chain: ChainSpec, load_number: int):
    return chain.load_masses[load_number - 1] if chain.excitation == "force" else None


def _sympy_float(value) -> sympy.Float:
    return sympy.Float(mpmath.nstr(value, DIGITS + 10, strip_zeros=False), DIGITS)


def _responses(chain: ChainSpec, masses, damping, until, exact: bool) -> tuple[Response, ...]:
    n = chain.size
    responses = []
    for i in range(n):
        responses.append(Response(f"x{i + 1}", f"mass {i + 1}", "displacement", masses[i],
                                  _peak(masses[i], until)))
    zero = [(sympy.S.Zero, masses[0])]
    for spring in chain.springs:
        parts = [(sympy.S.One, masses[spring.second - 1])]
        if spring.first:
            parts.append((sympy.S.NegativeOne, masses[spring.first - 1]))
        pieces = _combine(parts or zero, exact)
        peak = _peak(pieces, until)
        force = None if peak is None else Extreme(
            float(spring.stiffness) * peak.value, peak.time,
            None if peak.value_mp is None else peak.value_mp * mpmath.mpf(str(sympy.N(spring.stiffness, 40))),
            peak.time_mp)
        where = "support" if spring.first == 0 else f"mass {spring.first}"
        responses.append(Response(f"e{spring.number}", f"spring {spring.number} ({where} to mass "
                                  f"{spring.second})", "stretch", pieces, peak, spring.stiffness,
                                  force))
    ones = sympy.ones(1, n)
    k_row = ones * chain.stiffness_matrix
    c_row = ones * damping
    parts = [(k_row[j], masses[j]) for j in range(n) if k_row[j] != 0]
    velocity = [tuple(Piece(p.start, p.end, p.local.derivative(),
                            p.numeric.derivative() if p.numeric is not None else None)
                      for p in masses[j]) for j in range(n)]
    parts += [(c_row[j], velocity[j]) for j in range(n) if c_row[j] != 0]
    reaction = _combine(parts or zero, exact)
    responses.append(Response("R", "support reaction", "support-reaction", reaction,
                              _peak(reaction, until)))
    return tuple(responses)


def _peak(pieces: Sequence[Piece], until) -> Extreme | None:
    intervals = numeric_intervals(piece_functions(pieces), [p.start for p in pieces], until)
    return extreme_magnitude(intervals)


def _numbers(case: Case, chain: ChainSpec, history: LoadHistory, responses, until) -> ChainNumbers:
    """The watched mass's peak, its static displacement under every load held at its own
    largest value at once (force) or under the largest support acceleration, and the DLF."""
    n = chain.size
    watched = responses[chain.watch - 1]
    vector = sympy.zeros(n, 1)
    for load in case.loads:
        rewrites = tuple(r for r in history.rewrites if r.load_number == load.number)
        sub = LoadHistory(rewrites)
        times = sorted({t.at for t in sub.terms} | {sympy.S.Zero}, key=lambda v: sympy.N(v, 40))
        times = [t for t in times if sympy.N(t - until, 40) < 0]
        if not sub.terms:
            continue
        locals_ = load_pieces(sub, times, exact=True)
        largest = extreme_magnitude(numeric_intervals(locals_, times, until))
        if largest is None:
            continue
        value = sympy.Float(largest.value, 17)
        if chain.excitation == "force":
            vector[chain.load_masses[load.number - 1] - 1] += value
        else:
            vector += -chain.mass_matrix * sympy.ones(n, 1) * value
    static = None
    if any(v != 0 for v in vector):
        solution = chain.stiffness_matrix.inv() * vector
        static = abs(float(solution[chain.watch - 1])) or None
    peak = watched.peak
    dlf = abs(peak.value) / static if (peak is not None and static) else None
    return ChainNumbers(peak, static, dlf)


def _warnings(case: Case, derivation: ChainDerivation) -> tuple[str, ...]:
    warnings = []
    peak = derivation.numbers.peak
    until = float(sympy.N(derivation.until, 30))
    if peak is not None and abs(peak.time - until) <= 1e-9 * until:
        warnings.append(f"{case.source}: report.until: the peak of mass {derivation.chain.watch} "
                        f"sits at the end of the analysis window (t = {until:.6g} s); the "
                        "response may still grow after it (extend until)")
    for load in case.loads:
        if sympy.N(load.starts()[0] - derivation.until, 30) >= 0:
            warnings.append(f"{case.source}: {load.key}: starts at or after the end of the "
                            "analysis window and does not act on it")
    return tuple(warnings)
