"""Shared fixtures: cases from TOML text, derivations, and the command line in a folder.

The worked cases (worked_cases/*.toml) are derived at most once per test session:
:func:`worked_derivation` (or the ``worked`` fixture) caches each derivation, so the tests
of rendering, results, sheets and the Python interface that read the same worked case share
one derivation instead of deriving it again in every file. A ``Derivation`` is immutable
(frozen dataclasses all the way down), so sharing it cannot leak one test into another; a
test that needs a changed one builds it with ``dataclasses.replace``. A test that patches the
engine (monkeypatch) must derive afresh, never through this cache.
"""

from __future__ import annotations

import functools
import math
import textwrap
from collections.abc import Callable
from pathlib import Path

import pytest

import closedform

WORKED = Path(__file__).resolve().parent.parent / "worked_cases"


def case_from(text: str, name: str = "test.toml") -> closedform.Case:
    return closedform.load_case_text(textwrap.dedent(text), name)


def derive_text(text: str, name: str = "test.toml") -> closedform.Derivation:
    return closedform.derive(case_from(text, name))


def long_table_history(segments: int = 60) -> closedform.Derivation:
    """The derivation of :func:`long_table_case`."""
    return closedform.derive(long_table_case(segments))


def long_table_case(segments: int = 60) -> closedform.Case:
    """An invented test case: a damped spring-mass-damper (40 kg, 250 kN/m, ζ = 0.04) under a
    table load of ``segments`` ramps (more than the 40 pieces above which the checks and the
    energy balance take their long-history routes), with an impulse inside, over 0.4 s."""
    rows = ", ".join(f"[{i * 0.004:.3f}, {0 if i in (0, segments) else 200 + 150 * math.sin(i / 3):.2f}]"
                     for i in range(segments + 1))
    return case_from(f"""
        title = "results"
        [system]
        model = "spring-mass-damper"
        mass = "40 kg"
        stiffness = "250 kN/m"
        damping_ratio = 0.04
        [[load]]
        shape = "table"
        points = [{rows}]
        [[load]]
        shape = "impulse"
        at = "0.1 s"
        impulse = "2 N*s"
        [report]
        until = "0.4 s"
    """)


@functools.cache
def worked_derivation(stem: str) -> closedform.Derivation:
    """The derivation of ``worked_cases/STEM.toml``, derived once per test session."""
    return closedform.derive(closedform.load_case(WORKED / f"{stem}.toml"))


@pytest.fixture
def derive_case():
    return derive_text


def check_run(name: str):
    """The run of one family of the checks registry (closedform.checks.registry)."""
    from closedform.checks import registry

    [family] = [f for f in registry.FAMILIES if f.name == name]
    return family.run


def replace_check_run(monkeypatch, name: str, run) -> None:
    """Put ``run`` in place of the named family's run in the checks registry, for one test."""
    import dataclasses

    from closedform.checks import registry

    check_run(name)                     # the family exists
    monkeypatch.setattr(registry, "FAMILIES", tuple(
        dataclasses.replace(f, run=run) if f.name == name else f for f in registry.FAMILIES))


@pytest.fixture(scope="session")
def worked() -> Callable[[str], closedform.Derivation]:
    """:func:`worked_derivation`, as a fixture."""
    return worked_derivation
