"""One registry of the families of checks, in the order they run and are reported.

``derive`` runs every family that applies to a derivation (``DERIVE``), the ``check`` command
the ones that apply to a claimed response (``CLAIM``: a derivation-shaped response made of our
pieces up to a claimed formula, see ``audit.ClaimedResponse``). Each family returns its
checks as a list; the order of the families here is the order of the checks in the JSON
result and on the sheets.

A new family is one module in this package and one entry in ``FAMILIES``. A family's ``fits``
says which responses it checks: the checks of one linear equation (verification, energy
balance, extremes) leave out a yielding spring, whose own family (``plastic``) checks it; a member's equivalent oscillator (issue 16) is
checked by these and by its own family (``member``: factors, shape, collapse, reactions).
"""

from __future__ import annotations

from collections.abc import Callable, Collection, Iterator, Sequence
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from typing import Any

from .base import Check
from .energy import energy_checks
from .extremes import extreme_checks, metric_checks
from .member import is_member, member_family
from .plastic import plastic_checks
from .verification import verify

PRINTED_EQUATIONS = "re-reading the printed equations"   # the family a run without a sheet leaves out
DERIVE = "derive"      # the checks of a derivation (``closedform derive``, ``derive()``)
CLAIM = "claim"        # the checks of a claimed response (``closedform check``)


@dataclass(frozen=True)
class CheckFamily:
    """A family of checks: ``name`` is also the stage the time budget names while it runs;
    ``applies`` the runs it belongs to (``DERIVE``, ``CLAIM``); ``run`` gives its checks."""

    name: str
    applies: frozenset[str]
    run: Callable[[Any], Sequence[Check]]
    fits: Callable[[Any], bool] = lambda response: True    # the responses it checks


def yielding(response: Any) -> bool:
    """Whether the response is that of a yielding spring (a case with [system.resistance]):
    its equation changes at every event, so the checks of one linear equation do not apply
    to it and the checks of the yielding spring do."""
    system = getattr(getattr(response, "case", None), "system", None)
    return getattr(system, "resistance", None) is not None


def linear(response: Any) -> bool:
    """Whether the response is that of one linear equation (every case but a yielding one)."""
    return not yielding(response)


def _printed_equations(derivation: Any) -> Sequence[Check]:
    # The sheet is rendered and read back with the checks' own parser (reread.py); the
    # rendering lives with the sheets (imported here, when run: render imports this package).
    from ..render import printed_equation_check

    return [printed_equation_check(derivation)]


FAMILIES: tuple[CheckFamily, ...] = (
    CheckFamily("verification", frozenset({DERIVE, CLAIM}), verify, linear),
    CheckFamily("energy balance", frozenset({DERIVE, CLAIM}), energy_checks, linear),
    CheckFamily("yielding spring", frozenset({DERIVE}), plastic_checks, yielding),
    CheckFamily(PRINTED_EQUATIONS, frozenset({DERIVE}), _printed_equations),
    CheckFamily("extremes", frozenset({DERIVE}), extreme_checks, linear),
    CheckFamily("response metrics", frozenset({DERIVE}), metric_checks, linear),
    CheckFamily("member", frozenset({DERIVE}), member_family, is_member),
)


def families(run: str) -> Iterator[CheckFamily]:
    """The families that apply to ``run`` (``DERIVE`` or ``CLAIM``), in order."""
    if run not in (DERIVE, CLAIM):
        raise ValueError(f"unknown run of the checks: {run!r}")
    return (family for family in FAMILIES if run in family.applies)


def run_checks(response: Any, run: str,
               stage: Callable[[str], AbstractContextManager] | None = None, *,
               without: Collection[str] = ()) -> tuple[Check, ...]:
    """The checks of every family that applies to ``run`` and fits the response, in the
    registry's order; the families named in ``without`` are left out (a ductility spectrum
    prints no sheet, so it has no printed equations to re-read).

    ``stage`` (the time budget's ``stage``) is entered around each family with its name."""
    checks: list[Check] = []
    for family in families(run):
        if family.name in without or not family.fits(response):
            continue
        with stage(family.name) if stage is not None else nullcontext():
            checks += family.run(response)
    return tuple(checks)
