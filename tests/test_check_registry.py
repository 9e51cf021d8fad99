"""The registry of checks (closedform.checks.registry): one list of families, run in its
order by ``derive`` and, for the families that apply to a claimed response, by ``check``.

A throwaway family added in a test shows the recipe of DEVELOPERS.md ("Adding a check"):
one entry in the registry, and its check appears in the derivation, in its place, and a
failing one makes the derivation fail.
"""

from __future__ import annotations

import json

import pytest

from closedform.checks import registry
from closedform.checks.base import Check
from closedform.derivation import result_dictionary

from .conftest import derive_text

CASE = """
title = "Hammer on a skid"
[system]
model = "spring-mass-damper"
mass = "420 kg"
stiffness = "2.6 MN/m"
damping_ratio = 0.02
[[load]]
shape = "rectangle"
at = "20 ms"
duration = "1.5 ms"
impulse = "95 N*s"
[report]
until = "250 ms"
"""


def test_the_families_and_where_they_run():
    assert [f.name for f in registry.FAMILIES] == [
        "verification", "energy balance", "yielding spring", "re-reading the printed equations",
        "extremes", "response metrics", "member"]
    assert [f.name for f in registry.families(registry.DERIVE)] == \
        [f.name for f in registry.FAMILIES]
    assert [f.name for f in registry.families(registry.CLAIM)] == ["verification",
                                                                    "energy balance"]
    with pytest.raises(ValueError, match="unknown run of the checks: 'sheet'"):
        registry.families("sheet")


def test_run_checks_keeps_the_registry_order_and_enters_each_stage(monkeypatch):
    def family(name, applies):
        return registry.CheckFamily(name, frozenset(applies),
                                    lambda response: [Check(f"{name} of {response}", True, "")])
    monkeypatch.setattr(registry, "FAMILIES", (
        family("first", {registry.DERIVE, registry.CLAIM}), family("second", {registry.DERIVE}),
        family("third", {registry.CLAIM})))
    entered = []

    class Stage:
        def __init__(self, name):
            self.name = name

        def __enter__(self):
            entered.append(self.name)

        def __exit__(self, *exc):
            return False

    checks = registry.run_checks("r", registry.DERIVE, stage=Stage)
    assert [c.name for c in checks] == ["first of r", "second of r"]
    assert entered == ["first", "second"]
    assert [c.name for c in registry.run_checks("r", registry.CLAIM)] == ["first of r",
                                                                         "third of r"]


def test_a_family_added_to_the_registry_runs_in_derive_in_its_place(monkeypatch):
    seen = []

    def throwaway(derivation):
        seen.append(derivation.case.title)
        return [Check("throwaway check", True, "the title is read")]

    monkeypatch.setattr(registry, "FAMILIES", registry.FAMILIES[:2] + (
        registry.CheckFamily("throwaway", frozenset({registry.DERIVE}), throwaway),
    ) + registry.FAMILIES[2:])
    derivation = derive_text(CASE)
    names = [c.name for c in derivation.checks]
    assert seen == ["Hammer on a skid"]
    energy = max(i for i, name in enumerate(names) if name.startswith("energy balance"))
    assert names[energy + 1] == "throwaway check"
    assert names[energy + 2] == "printed equations re-read"
    assert names[-1] == "finite results"
    assert derivation.status == "verified"
    result = json.loads(json.dumps(result_dictionary(derivation)))
    assert "throwaway check" in [c["name"] for c in result["checks"]]


def test_a_failing_family_makes_the_derivation_fail(monkeypatch):
    monkeypatch.setattr(registry, "FAMILIES", registry.FAMILIES + (registry.CheckFamily(
        "always wrong", frozenset({registry.DERIVE}),
        lambda derivation: [Check("always wrong", False, "found wrong on purpose")]),))
    derivation = derive_text(CASE)
    assert derivation.status == "failed"
    assert [c.name for c in derivation.checks if not c.passed] == ["always wrong"]


def test_each_family_fits_either_one_linear_equation_or_a_yielding_spring():
    """A yielding spring (a case with [system.resistance], issue 15) changes its equation at
    every event: the checks of one linear equation do not fit it, its own family does."""
    import types

    def response(resistance):
        return types.SimpleNamespace(case=types.SimpleNamespace(
            system=types.SimpleNamespace(resistance=resistance)))

    fitting = {name: [f.name for f in registry.FAMILIES if f.fits(response(name))]
               for name in (None, "a resistance")}
    assert fitting[None] == ["verification", "energy balance",
                             "re-reading the printed equations", "extremes",
                             "response metrics"]
    assert fitting["a resistance"] == ["yielding spring", "re-reading the printed equations"]
    assert not registry.yielding("a response without a case")


def test_a_yielding_spring_is_checked_through_the_registry(monkeypatch):
    """derive_plastic runs its checks through the registry: the yielding family replaced by a
    failing one makes the yielding worked case FAILED, its linear families never run."""
    import closedform

    from .conftest import WORKED, replace_check_run

    ran = []
    replace_check_run(monkeypatch, "yielding spring",
                      lambda derivation: [Check("wrong on purpose", False, "found wrong")])
    replace_check_run(monkeypatch, "energy balance", lambda derivation: ran.append(1) or [])
    derivation = closedform.derive(closedform.load_case(WORKED / "blast-wall-yielding.toml"))
    assert derivation.status == "failed"
    assert [c.name for c in derivation.checks if not c.passed] == ["wrong on purpose"]
    assert ran == []
