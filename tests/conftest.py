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
