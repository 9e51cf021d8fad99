"""The independent checks of a derivation, one module per concern.

``registry.FAMILIES`` lists the families of checks in the order they run; ``run_checks`` runs
them for ``derive`` and for the ``check`` command. The modules never import the engine's
solving code (tests/test_checks_boundary.py enforces it): the equation is rebuilt from the
model's parameters (``model``), the load from each load's own definition, the numbers by the
checks' own compiler (``compiler``).

* ``base``: ``Check`` and its outcome, precisions, limits, helpers for numbers;
* ``model``: the checks' equation, load model and ``Problem``;
* ``compiler``: sympy expressions to mpmath functions;
* ``substitutions``: declared values and seeded random substitutions of the symbols;
* ``exact``: coverage, residual, initial values, breakpoint conditions, pulse areas;
* ``integrator``: the 40-digit matrix-exponential integration and its comparison;
* ``long`` and ``long_checks``: the numeric route of long histories;
* ``verification``: ``verify``, the checks of the equation in their order;
* ``energy``, ``extremes``, ``reread``, ``spectrum_check``: the work-energy balance, the
  extremes established again, the printed equations read back, the shock-spectrum points.

Importing the package imports none of them.
"""
