"""Independent checks of a derived piecewise response.

Nothing here reuses the derivation's code path. The equation is rebuilt from the model's
parameters (the model table of the design brief), the load is evaluated from each load's own
definition (half-sine: amplitude·sin(π τ/d) for 0 ≤ τ < d, τ = t − start, …), never from the
singularity terms, and the numerical cross-check integrates the original equation by a
method that has nothing in common with Laplace partial fractions.

The checks, each of which fails with a figure when the pieces are wrong:

* **pieces cover the analysis window**: the pieces start at 0, meet end to end, run to ``until``.
* **ode residual on (a, b)**: each piece put into a_n x⁽ⁿ⁾ + … + a_0 x − b·load(t) on its
  interval. Exact pieces must give exactly 0 (term-by-term expansion; where that does not
  reduce to 0, 60-digit evaluation at several points, |residual| ≤ 1e-40 × scale);
  pieces with 30-digit float coefficients must stay below 1e-20 × scale at 30 digits. The
  scale is the sum of the magnitudes of the terms that were added, so the figure is a
  relative cancellation error.
* **initial values**: x(0⁺) … x⁽ⁿ⁻¹⁾(0⁺) equal the case's initial values; an impulse J at
  t = 0 adds b·J/a_n to x⁽ⁿ⁻¹⁾(0⁺).
* **breakpoint conditions at t = …**: x … x⁽ⁿ⁻²⁾ continuous at every piece boundary,
  x⁽ⁿ⁻¹⁾ jumping by exactly b·ΣJ/a_n where impulses act.
* where derivatives of the input act (b_m f⁽ᵐ⁾ + … + b_0 f), the residual takes them from
  the load's own branches, the initial and breakpoint conditions add the jumps they cause
  (through the auxiliary w with a_n w⁽ⁿ⁾ + … + a_0 w = f and x = Σ b_j w⁽ʲ⁾), and the
  integration follows w and samples x = Σ b_j w⁽ʲ⁾; long histories keep the per-piece
  checks up to INPUT_PIECE_LIMIT pieces.
* **independent integration**: the equation integrated at 40 digits between the load's own
  breakpoints and compared with the pieces at 64 or more points.
* **impulse of load[N]**: for pulses given by their area, ∫ shape dt equals that area.

Long histories (more than LONG_HISTORY pieces, numeric cases: measured tables, many repeats)
get the same checks on numbers, without sympy differentiation or substitution per piece:
each piece is parsed once into its exp·cos/sin·polynomial terms, the load is evaluated with
numbers from each load's own definition, and the residual and the breakpoint conditions are
one check each, **ode residual on N pieces** and **breakpoint conditions at N − 1
boundaries**, with the worst figure and where it occurs (residual at 3 points per interval
between load breakpoints). The integration is compared at one or more points inside every
load interval, at most LONG_SAMPLES, never on a breakpoint; steps of equal length share
their matrix exponential. See the notes at the top of long.py.

Symbolic cases get the residual, initial and breakpoint checks symbolically, and the numeric
checks with the declared values (all symbols valued) or at three seeded random positive
substitutions (some symbols without value).
"""

from __future__ import annotations

from typing import Any

from ..case import Case
from .base import Check
from .exact import breakpoint_checks, coverage_check, impulse_area_checks, initial_check, residual_checks
from .integrator import integration_check
from .long import is_long, long_problem
from .long_checks import long_history_checks
from .model import Problem, equation_of, problem_of
from .substitutions import describe, random_substitutions, resolved_values

INPUT_PIECE_LIMIT = 400            # with input derivatives: per-piece checks up to this many


def _numeric_checks(problem: Problem, peak: Any) -> list[Check]:
    checks = [coverage_check(problem, {})]
    checks += residual_checks(problem, {}, (), symbolic=False)
    checks.append(initial_check(problem, {}, (), symbolic=False))
    checks += breakpoint_checks(problem, {}, (), symbolic=False)
    checks.append(integration_check(problem, peak=peak))
    return checks


def verify(derivation: Any) -> list[Check]:
    """The independent checks of one derivation (see the module docstring).

    Never raises: whatever cannot be evaluated is a failed check saying why.
    """
    try:
        case: Case = derivation.case
        inputs = equation_of(case.system).inputs
        if inputs and len(derivation.pieces) > INPUT_PIECE_LIMIT:
            return [Check("verification", False, f"derivatives of the input act on more than "
                          f"{INPUT_PIECE_LIMIT} pieces, more than these checks take (the "
                          "long-history checks do not carry them)", inconclusive=True)]
        long = is_long(case, derivation) and not inputs   # (inputs: the per-piece checks)
        problem: Any = long_problem(derivation) if long else problem_of(derivation)
    except Exception as error:  # noqa: BLE001 - reported as a failed check
        return [Check("verification set-up", False,
                      f"could not read the case or the pieces: {type(error).__name__}: {error}")]
    results = getattr(derivation, "numbers", None)
    peak = getattr(getattr(results, "peak", None), "value", None)
    try:
        if long:
            return long_history_checks(case, problem, peak)
        return _checks(case, problem, peak)
    except Exception as error:  # noqa: BLE001 - reported as a failed check
        return [Check("verification", False,
                      f"the checks could not be completed: {type(error).__name__}: {error}")]


def _checks(case: Case, problem: Problem, peak: Any) -> list[Check]:
    if not case.symbols:
        return _numeric_checks(problem, peak) + impulse_area_checks(case, [{}])

    if case.is_fully_valued:
        values = resolved_values(case)
        numeric = _numeric_checks(problem.subs(values), peak)
        symbolic = residual_checks(problem, values, [values], symbolic=True)
        return numeric[:1] + symbolic + numeric[1:] + impulse_area_checks(case, [values])

    draws = random_substitutions(case, problem)
    if not draws:
        return [Check("random substitutions", False,
                      "no positive substitution of the symbols without value keeps the order of "
                      "the pieces (and the damping regime) in 400 draws")]
    reference = draws[0]
    checks = [coverage_check(problem, reference)]
    checks += residual_checks(problem, reference, draws, symbolic=True)
    checks.append(initial_check(problem, reference, draws, symbolic=True))
    checks += breakpoint_checks(problem, reference, draws, symbolic=True)
    for number, values in enumerate(draws, start=1):
        label = f"substitution {number} of {len(draws)}: {describe(values)}"
        checks.append(integration_check(problem.subs(values), label))
    return checks + impulse_area_checks(case, draws)
