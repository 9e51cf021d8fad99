"""Sheets a checker will sign: every printed equation read back, report units, numbers,
status words, warnings and layout.

The equation re-reading check (closedform.reread) parses the printed LaTeX with its own
reader and compares it with the derivation. Its reader is checked here against mpmath's
functions; the check itself is shown to catch corrupted printed lines (mutation tests).
"""

from __future__ import annotations

import re
import textwrap
from pathlib import Path

import mpmath
import pytest

import closedform
from closedform import render, reread

ROOT = Path(__file__).resolve().parent.parent
WORKED = ROOT / "worked_cases"
CASES = sorted(path.stem for path in WORKED.glob("*.toml"))
CHECK = "printed equations re-read"


def derive_text(text: str, name: str = "sheet.toml") -> closedform.Derivation:
    return closedform.derive(closedform.load_case_text(textwrap.dedent(text), name))


def check_of(derivation) -> closedform.verify.Check:
    [check] = [c for c in derivation.checks if c.name == CHECK]
    return check


RAMP = """
title = "Ramp held after 6 s"
[system]
model = "first-order"
time_constant = "0.8 s"
gain = 1
input_unit = "K"
[[load]]
shape = "ramp"
rate = "2.5 K/s"
duration = "6 s"
[report]
until = "12 s"
"""


# ----------------------------------------------------------------------------- the reader


@pytest.mark.parametrize("latex, env, expected", [
    (r"\frac{5}{2}\,t\,H\!\left(t\right)", {"t": 3}, 7.5),
    (r"- \frac{5}{2}\,\left(t - 6\right)\,H\!\left(t - 6\right)", {"t": 3}, 0),
    (r"- \frac{5}{2}\,\left(t - 6\right)\,H\!\left(t - 6\right)", {"t": 8}, -5),
    (r"e^{- \frac{5 u}{4}}", {"u": 2}, mpmath.exp(-2.5)),
    (r"2 e^{- 50 \hat{t}} \left(3 \cos{\left(4 \hat{t} \right)} - \sin{\left(4 \hat{t} \right)}\right)",
     {r"\hat{t}": 0.1}, 2 * mpmath.exp(-5) * (3 * mpmath.cos(0.4) - mpmath.sin(0.4))),
    (r"\frac{\sqrt{3} i}{2} + 1.5 \cdot 10^{-3}", {}, mpmath.mpc(1.5e-3, mpmath.sqrt(3) / 2)),
    (r"\frac{3}{4 e} - \frac{27}{400 e^{\frac{5}{2}}}", {}, 0.75 / mpmath.e - 27 / (400 * mpmath.e ** 2.5)),
    (r"F_{0} d^{2} s^{2} + \frac{k}{m}", {"F_{0}": 2, "d": 3, "s": 0.5, "k": 4, "m": 8}, 5.0),
])
def test_reader_evaluates_the_sheet_grammar_like_mpmath(latex, env, expected):
    with mpmath.workdps(30):
        assert abs(reread.read(latex)(env) - expected) < 1e-12   # expected in doubles


@pytest.mark.parametrize("latex", [r"\frac{1}{", r"3 +", r"\left(t\right", r"\begin{x}"])
def test_reader_refuses_text_outside_its_grammar(latex):
    with pytest.raises(reread.Unreadable):
        reread.read(latex)(dict(t=1, x=1))


def test_reader_never_evaluates_a_step_at_its_jump():
    with pytest.raises(reread.Unreadable):
        reread.read(r"H\!\left(t - 6\right)")({"t": 6})


# ----------------------------------------------------------------------------- 11.1: load lines


def test_ramp_with_duration_prints_every_term_with_its_step():
    # Before the fix the sheet printed 5t/2·H(t) + 15 − 5t/2·H(t − 6): 22.5 K at t = 3 s.
    markdown = render.render_markdown(derive_text(RAMP))
    [line] = re.findall(r"^\{u\}_\{1\}\(t\) = (.*)$", markdown, flags=re.M)
    value = reread.read(line)
    assert value({"t": 3}) == pytest.approx(7.5)      # r·t = 2.5 K/s · 3 s
    assert value({"t": 9}) == pytest.approx(15)       # held at r·d = 15 K after 6 s
    assert value({"t": -1}) == 0                      # nothing before the load starts


@pytest.mark.parametrize("load", [
    'shape = "triangle"\namplitude = "2 N"\nduration = "0.5 s"',
    'shape = "trapezoid"\namplitude = "2 N"\nrise = "0.1 s"\nhold = "0.2 s"\nfall = "0.3 s"',
    'shape = "ramp"\nrate = "4 N/s"\nduration = "0.3 s"\nat = "0.2 s"',
])
def test_load_lines_of_ramps_triangles_and_trapezoids_read_back(load):
    derivation = derive_text(f"""
        title = "Pulse"
        [system]
        model = "spring-mass-damper"
        mass = "1 kg"
        stiffness = "40 N/m"
        [[load]]
        {load}
        [report]
        until = "2 s"
        """.replace("\n        ", "\n"))
    assert check_of(derivation).passed, check_of(derivation).detail
    assert derivation.status == "verified"


# ----------------------------------------------------------------------------- the check


@pytest.mark.parametrize("stem", CASES)
def test_every_worked_sheet_reads_back_equal_to_its_derivation(stem):
    derivation = closedform.derive(closedform.load_case(WORKED / f"{stem}.toml"))
    check = check_of(derivation)
    assert check.passed, check.detail
    numeric = int(check.detail.split()[0])
    assert numeric >= 5, check.detail       # load lines, P, Q, transforms, pieces at least


def _buggy_singularity_term(coefficient, mode, shift):
    """The printing before the fix: c·g(t − a) expanded, the step attached to its end."""
    import sympy
    t = sympy.Symbol("t")
    at = sympy.Integer(shift.split("-")[1]) if shift != "t" else 0   # whole seconds here
    body = render.typeset(coefficient * mode.expression(t - at))
    step = rf"H\!\left({shift}\right)"
    return step if body == "1" else rf"{body}\,{step}"


def test_mutation_the_old_load_line_fails_the_sheet(monkeypatch):
    monkeypatch.setattr(render, "_singularity_term", _buggy_singularity_term)
    derivation = derive_text(RAMP)
    check = check_of(derivation)
    assert not check.passed
    assert "load line 1" in check.detail
    assert derivation.status == "failed"
    markdown = render.render_markdown(derivation)
    assert markdown.startswith("# FAILED — do not use: ")
    assert "**FAILED" in markdown.splitlines()[2]


def test_mutation_one_corrupted_interval_line_fails_the_sheet(monkeypatch):
    original = render.grouped_terms
    calls = []

    def corrupt(rows, u, width=render.LINE_WIDTH):
        terms = original(rows, u, width)
        calls.append(1)
        if len(calls) == 3:          # one line only: a sign flipped in one printed term
            first = terms[0]
            terms[0] = first[1:].lstrip() if first.startswith("-") else "- " + first
        return terms
    monkeypatch.setattr(render, "grouped_terms", corrupt)
    derivation = derive_text(RAMP)
    check = check_of(derivation)
    assert not check.passed, check.detail
    assert derivation.status == "failed"


def test_mutation_a_wrong_partial_fraction_coefficient_fails_the_sheet(monkeypatch):
    original = render.display

    def corrupt(lhs, terms, note=None):
        terms = list(terms)
        if lhs == "c_{2}":
            terms = [t.replace("4", "3", 1) for t in terms]
        return original(lhs, terms, note)
    monkeypatch.setattr(render, "display", corrupt)
    check = check_of(derive_text(RAMP))
    assert not check.passed
    assert "partial-fraction coefficient 2" in check.detail


def test_mutation_an_unreadable_printed_line_fails_the_sheet(monkeypatch):
    original = render.display

    def corrupt(lhs, terms, note=None):
        terms = list(terms)
        if lhs == "P(s)":
            terms[-1] = terms[-1] + r" \frac{1}{"
        return original(lhs, terms, note)
    monkeypatch.setattr(render, "display", corrupt)
    check = check_of(derive_text(RAMP))
    assert not check.passed
    assert "could not be read back" in check.detail


def test_an_equation_printed_without_a_record_fails_the_sheet(monkeypatch):
    original = render.sheet_context

    def extra(derivation, target="md", **kwargs):
        context = original(derivation, target, **kwargs)
        context["window_note"] = render.Math("\n\n$$\nz = 1\n$$\n\n")
        return context
    monkeypatch.setattr(render, "sheet_context", extra)
    check = check_of(derive_text(RAMP))
    assert not check.passed
    assert "without a record" in check.detail
