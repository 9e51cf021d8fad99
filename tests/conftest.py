"""Shared fixtures: cases from TOML text, derivations, and the command line in a folder."""

from __future__ import annotations

import textwrap

import pytest

import closedform


def case_from(text: str, name: str = "test.toml") -> closedform.Case:
    return closedform.load_case_text(textwrap.dedent(text), name)


def derive_text(text: str, name: str = "test.toml") -> closedform.Derivation:
    return closedform.derive(case_from(text, name))


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
