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

from ..workers import fork_available, start_alongside
from .base import Check
from .energy import energy_checks
from .extremes import extreme_checks, metric_checks
from .long import LONG_HISTORY
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
    #: whether it may run in a helper process on a spare core while the others run here:
    #: the independent verification, as long as the energy balance and the extremes
    #: together for a long history (it reads nothing that they compute)
    alongside: bool = False


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
    CheckFamily("verification", frozenset({DERIVE, CLAIM}), verify, linear, alongside=True),
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
               without: Collection[str] = (), alongside: bool = False) -> tuple[Check, ...]:
    """The checks of every family that applies to ``run`` and fits the response, in the
    registry's order; the families named in ``without`` are left out (a ductility spectrum
    prints no sheet, so it has no printed equations to re-read).

    ``stage`` (the time budget's ``stage``) is entered around each family with its name.
    ``alongside`` (a spare core; the caller knows whether it has one) runs the families
    marked ``alongside`` of a long history (more than ALONGSIDE_PIECES pieces) in a helper
    process while the others run here: the same checks, in the same order, as when they
    run one after the other. A helper that ends without its checks (killed, out of memory)
    has its families run here instead."""
    entered = stage if stage is not None else (lambda name: nullcontext())
    chosen = [family for family in families(run)
              if family.name not in without and family.fits(response)]
    helped = [family for family in chosen if family.alongside] \
        if alongside and _helper_pays(response) else []
    done: dict[str, Sequence[Check]] = {}
    if helped:
        with start_alongside(_run_families, (helped, response)) as helper:
            for family in chosen:
                if family not in helped:
                    with entered(family.name):
                        done[family.name] = family.run(response)
            with entered(" and ".join(family.name for family in helped)):
                reply = helper.result()
        if isinstance(reply, dict):
            done.update(reply)
    checks: list[Check] = []
    for family in chosen:
        if family.name not in done:      # no helper, or a helper lost: run here
            with entered(family.name):
                done[family.name] = family.run(response)
        checks += done[family.name]
    return tuple(checks)


#: More pieces than this (a long history, checked on numbers) and a family marked
#: ``alongside`` runs in a helper process when there is a spare core; a short history's
#: checks are over in less time than the fork and the sympy work it cannot share would take.
ALONGSIDE_PIECES = LONG_HISTORY


def _helper_pays(response: Any) -> bool:
    return fork_available() and len(getattr(response, "pieces", ())) > ALONGSIDE_PIECES


def _run_families(families: Sequence[CheckFamily], response: Any) -> dict[str, Sequence[Check]]:
    return {family.name: list(family.run(response)) for family in families}
