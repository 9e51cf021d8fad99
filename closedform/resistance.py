"""The resistance function of a yielding spring, as the case file gives it.

``[system.resistance]`` replaces the linear spring force k·x of a spring-mass-damper or
base-excitation model by an elastic-plastic (or bilinear) one:

- elastic with the stiffness k up to the yield force R_y (at the yield displacement
  x_y = R_y/k);
- then along the yield line: R = ±R_y (elastic-plastic) or R = k₂·x ± R_y·(1 − k₂/k)
  (bilinear, post-yield stiffness k₂, kinematic hardening: the elastic range keeps its
  width 2·R_y in force);
- unloading (velocity changing sign on a yield line) elastic with k, and yielding in the
  other direction on the opposite line.

This module only reads and validates the table; the phases are solved by ``plastic``.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import sympy

KINDS = ("elastic-plastic", "bilinear")
RESISTANCE_KEYS = ("kind", "yield", "yield_displacement", "post_yield_stiffness")
SPRING_MODELS = ("spring-mass-damper", "base-excitation")


@dataclass(frozen=True)
class Resistance:
    """The resistance function in exact SI: yield force R_y, elastic stiffness k and the
    post-yield stiffness k₂ (0 for elastic-plastic)."""

    kind: str
    yield_force: sympy.Expr
    stiffness: sympy.Expr
    post_yield_stiffness: sympy.Expr
    given: str = "yield"            # which key the yield was given by

    @property
    def yield_displacement(self) -> sympy.Expr:
        """x_y = R_y / k."""
        return self.yield_force / self.stiffness

    @property
    def hardening_ratio(self) -> sympy.Expr:
        """α = k₂ / k (0 ≤ α < 1)."""
        return self.post_yield_stiffness / self.stiffness

    def line_intercept(self, direction: int) -> sympy.Expr:
        """c in the yield line R = k₂·x + c for ``direction`` +1 (upper) or −1 (lower):
        ±R_y·(1 − α), which passes through (±x_y, ±R_y)."""
        return direction * self.yield_force * (1 - self.hardening_ratio)


Quantity = Callable[[Any, str, str], sympy.Expr]
Failure = Callable[[str, str], Exception]


def read_resistance(data: Any, model: str, stiffness: sympy.Expr | None, quantity: Quantity,
                    error: Failure, table: Callable[[Any, str], Mapping[str, Any]]
                    ) -> Resistance:
    """The ``[system.resistance]`` table, validated; ``quantity(value, dimension, key)``
    reads a quantity and ``error(key, message)`` makes the located input error."""
    key = "system.resistance"
    if model not in SPRING_MODELS:
        raise error(key, f"a resistance function needs a model with a spring "
                         f"({' or '.join(SPRING_MODELS)}); the {model} model has none")
    data = table(data, key)
    for name in data:
        if name not in RESISTANCE_KEYS:
            raise error(f"{key}.{name}", f"unknown key '{name}' (expected one of: "
                                         f"{', '.join(RESISTANCE_KEYS)})")
    kind = data.get("kind")
    if kind not in KINDS:
        shown = f"'{kind}'" if isinstance(kind, str) else "nothing" if kind is None else repr(kind)
        raise error(f"{key}.kind", f"expected one of: {', '.join(KINDS)} (got {shown})")
    if stiffness is None or stiffness.free_symbols:
        raise error(key, "a resistance function needs a numeric stiffness (events are found "
                         "numerically from the closed forms)")
    if ("yield" in data) == ("yield_displacement" in data):
        raise error(f"{key}.yield", "give yield (the spring force at first yield) or "
                                    "yield_displacement, exactly one of them")
    if "yield" in data:
        yield_force = quantity(data["yield"], "force", f"{key}.yield")
        given, name, unit = "yield", "yield", "N"
    else:
        displacement = quantity(data["yield_displacement"], "length", f"{key}.yield_displacement")
        yield_force = displacement * stiffness
        given, name, unit = "yield_displacement", "yield_displacement", "m"
    shown = yield_force if given == "yield" else yield_force / stiffness
    if yield_force.free_symbols:
        raise error(f"{key}.{name}", "must be a number, not a symbol")
    if not yield_force > 0:
        raise error(f"{key}.{name}", f"must be positive (got {float(shown):g} {unit})")
    post = sympy.S.Zero
    if kind == "bilinear":
        if "post_yield_stiffness" not in data:
            raise error(f"{key}.post_yield_stiffness", "missing (a bilinear resistance needs "
                                                       "the stiffness after yield)")
        post = quantity(data["post_yield_stiffness"], "stiffness", f"{key}.post_yield_stiffness")
        if post.free_symbols:
            raise error(f"{key}.post_yield_stiffness", "must be a number, not a symbol")
        if post < 0:
            raise error(f"{key}.post_yield_stiffness",
                        f"must not be negative (got {float(post):g} N/m)")
        if post >= stiffness:
            raise error(f"{key}.post_yield_stiffness",
                        f"must be below the stiffness {float(stiffness):g} N/m "
                        f"(got {float(post):g} N/m)")
    elif "post_yield_stiffness" in data:
        raise error(f"{key}.post_yield_stiffness", "only for kind = \"bilinear\" (an "
                                                   "elastic-plastic spring has none)")
    return Resistance(kind, sympy.nsimplify(yield_force) if yield_force.is_Float else yield_force,
                      stiffness, post, given)
