"""``closedform appendix`` shows the claims of every case that has them (issue 12, item 4)."""

from __future__ import annotations

import textwrap
from pathlib import Path

from closedform.cli import main

# Undamped step F/k = 20 mm, ω = 50 rad/s: peak 2F/k = 40 mm at π/ω (Chopra, Dynamics of
# Structures, 4th ed., section 4.3; from memory).
STEP = """
title = "Audited step"
[system]
model = "spring-mass-damper"
mass = "200 kg"
stiffness = "500 kN/m"
[[load]]
shape = "step"
amplitude = "10 kN"
[report]
until = "0.2 s"
[claims]
peak = "40 mm"
static = "25 mm"
"""

PLAIN = """
title = "Plain step"
[system]
model = "first-order"
time_constant = "0.5 s"
[[load]]
shape = "step"
amplitude = "1"
[report]
until = "2 s"
"""


def folder_of_cases(tmp_path: Path, claims: str = STEP) -> Path:
    folder = tmp_path / "cases"
    folder.mkdir()
    (folder / "a-audited.toml").write_text(textwrap.dedent(claims), encoding="utf-8")
    (folder / "b-plain.toml").write_text(textwrap.dedent(PLAIN), encoding="utf-8")
    return folder


def test_the_summary_counts_the_claims_and_each_audited_case_shows_its_verdicts(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["appendix", str(folder_of_cases(tmp_path)), "-o", str(out),
                 "--format", "md,tex", "--jobs", "1"]) == 0
    capsys.readouterr()
    markdown = (out / "appendix.md").read_text()
    assert "| Section | Case | Reference | Peak | DLF | Claims | Status |" in markdown
    rows = [row for row in markdown.splitlines() if row.startswith("| [")]
    assert "| **1 confirmed, 1 refuted** |" in rows[0]
    assert rows[1].endswith("| — | verified |")          # no claims
    assert "### Claims audited for section 1: 1 confirmed, 1 refuted" in markdown
    assert "| 2 | static | 0.025 m | 0.02 m | $0.25$ | $0.005$ | **REFUTED** |" in markdown
    tex = (out / "appendix.tex").read_text()
    assert r"\subsection*{Claims audited for section~\ref{case:a-audited}: 1 confirmed, 1 refuted}" in tex


def test_an_unusable_claim_makes_the_appendix_write_nothing(tmp_path, capsys):
    out = tmp_path / "out"
    folder = folder_of_cases(tmp_path, STEP.replace('static = "25 mm"', "tolerance = 5"))
    assert main(["appendix", str(folder), "-o", str(out), "--jobs", "1"]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0] == (f"{folder / 'a-audited.toml'}:14: claims.tolerance: expected a relative "
                      "tolerance between 0 and 1 (such as 0.005) or a percentage such as "
                      "\"0.5 %\", got 5 (did you mean \"5 %\"?)")
    assert not out.exists()
