"""The sheet of a case of several masses: golden files of the worked case, its sections,
and the PDF (when pdflatex is on the PATH).

After a deliberate change to the chain sheet, regenerate the golden files with
``python -m tests.test_chain_sheet --update-golden`` and review the diff.
"""

from __future__ import annotations

import functools
import sys
from pathlib import Path

import pytest

import closedform
from closedform import chain_sheet, render

ROOT = Path(__file__).resolve().parent.parent
CASE = ROOT / "worked_cases" / "several-masses" / "instrument-rack-slab.toml"
GOLDEN = Path(__file__).resolve().parent / "golden" / "several-masses"
STEM = CASE.stem


@functools.cache
def derivation():
    return closedform.derive(closedform.load_case(CASE))


def sheets() -> dict[str, str]:
    return {"md": chain_sheet.render_markdown(derivation(), stem=STEM),
            "tex": chain_sheet.render_latex(derivation(), stem=STEM)}


def test_worked_case_is_verified():
    assert derivation().status == "verified"
    assert derivation().route == "modal"


@pytest.mark.parametrize("suffix", ["md", "tex"])
def test_sheet_matches_its_golden_file(suffix):
    golden = GOLDEN / f"{STEM}.{suffix}"
    assert sheets()[suffix] == golden.read_text(encoding="utf-8"), \
        "the sheet differs from its golden file; run python -m tests.test_chain_sheet --update-golden"


def test_sheet_shows_the_derivation_in_order():
    md = sheets()["md"]
    order = ["**Status: VERIFIED", "M = \\begin{bmatrix}", "K = \\begin{bmatrix}",
             "\\det(K - \\lambda M) =", "## 3. Mode shapes and modal participation",
             "Sum of the effective modal masses: $8350$ kg; total mass $8350$ kg",
             "**Mode 1**", "**Mode 2**", "**mass 1**", "**mass 2**",
             "**spring 1 (support to mass 1)**", "**spring 2 (mass 1 to mass 2)**",
             "peak support reaction", "## 7. Independent checks",
             "independent integration of the full system", render.CAUTION]
    positions = [md.index(text) for text in order]
    assert positions == sorted(positions)


def test_outputs_are_written_by_the_common_renderer():
    contents = render.render_outputs(derivation(), ["md", "json", "csv"], STEM)
    assert set(contents) == {f"{STEM}.md", f"{STEM}-masses.svg", f"{STEM}.json", f"{STEM}.csv"}
    header, first = contents[f"{STEM}.csv"].splitlines()[:2]
    assert header == "t [s],x1 [m],x2 [m]"
    assert first == "0,0,0"


@pytest.mark.skipif(render.latex_command() is None, reason="pdflatex not on PATH")
def test_pdf_compiles():
    pdf = render.render_outputs(derivation(), ["pdf"], STEM)[f"{STEM}.pdf"]
    assert pdf.startswith(b"%PDF")


def update_golden() -> None:
    GOLDEN.mkdir(parents=True, exist_ok=True)
    for suffix, text in sheets().items():
        (GOLDEN / f"{STEM}.{suffix}").write_text(text, encoding="utf-8")
    print(f"wrote {GOLDEN.relative_to(ROOT)}/{STEM}.md and .tex")


if __name__ == "__main__":
    if sys.argv[1:] == ["--update-golden"]:
        update_golden()
