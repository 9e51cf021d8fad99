"""The writer registry and the recipe for a new output format (DEVELOPERS.md, "Adding an
output format"): a throwaway plain-text format, defined and registered here only, is written
by derive's output path and by the appendix without any module being edited."""

from __future__ import annotations

import re
import textwrap
from pathlib import Path

import pytest

from closedform import appendix, batch, render
from closedform.errors import ClosedformError
from closedform.render import writers

STEP = """
title = "Step on a spring-mass"
reference = "PT-1"
[system]
model = "spring-mass-damper"
mass = "1 kg"
stiffness = "4 N/m"
damping_ratio = 0.05
[[load]]
shape = "step"
amplitude = "1 N"
[report]
until = "3 s"
"""


def plain_text(markdown: str) -> str:
    """The Markdown sheet as plain text: no heading marks, emphasis or math delimiters."""
    text = re.sub(r"^#+ ", "", markdown, flags=re.M)
    return text.replace("**", "").replace("$$", "").replace("$", "")


def write_text(document: render.Document) -> dict[str, str]:
    """The throwaway format: one .txt file from the document's Markdown text."""
    return {f"{document.name}.txt": plain_text(document.text(render.MARKDOWN))}


TEXT = render.Writer("txt", write_text, render.MARKDOWN, description="plain text")


@pytest.fixture
def registry(monkeypatch):
    """The registry with the throwaway format in it, for one test only."""
    monkeypatch.setattr(writers, "WRITERS", dict(writers.WRITERS))
    render.register_writer(TEXT)
    return writers.WRITERS


@pytest.fixture
def case_file(tmp_path) -> Path:
    path = tmp_path / "cases" / "step.toml"
    path.parent.mkdir()
    path.write_text(textwrap.dedent(STEP), encoding="utf-8")
    return path


def test_a_registered_format_is_written_by_derives_output_path(registry, case_file, tmp_path):
    [outcome] = batch.run_cases([batch.CaseTask(str(case_file), None,
                                                batch.SheetFiles(("txt", "md")))],
                                jobs=1, memory_budget=None)
    assert outcome.exit_code == 0, outcome.message
    assert set(outcome.contents) == {"step.txt", "step.md", "step-load.svg", "step-response.svg"}
    text = outcome.contents["step.txt"]
    # the same sheet as the md format's, rendered once and shared by both writers
    assert text == plain_text(outcome.contents["step.md"])
    assert text.startswith("Step on a spring-mass\n")
    assert "$" not in text and "**" not in text
    written = batch.run_case(batch.CaseTask(str(case_file), None,
                                            batch.SheetFiles(("txt",)))).contents
    assert set(written) == {"step.txt"}      # the format alone brings only its own file


def test_a_registered_format_is_written_by_the_appendix(registry, case_file):
    contents, entries, unusable = appendix.build_appendix(case_file.parent, ["txt"], jobs=1)
    assert not unusable and [e.status for e in entries] == ["verified"]
    assert set(contents) == {"appendix.txt"}
    assert "1. Step on a spring-mass" in contents["appendix.txt"]


def test_the_registration_stays_in_its_test():
    assert "txt" not in writers.WRITERS
    assert writers.FORMATS == ("md", "tex", "pdf", "json", "csv", "svg")
    with pytest.raises(ValueError, match="unknown output format 'txt'"):
        render.writer_for("txt")


def test_a_name_is_registered_once(registry):
    with pytest.raises(ValueError, match="registered already"):
        render.register_writer(TEXT)
    assert render.register_writer(TEXT, replace=True) is TEXT


def test_a_missing_tool_stops_every_format_before_any_work(monkeypatch, registry):
    rendered = []

    def needs_tool():
        raise ClosedformError("this format needs a tool that is not installed")

    def write(document):
        rendered.append(document.name)
        return {}
    render.register_writer(render.Writer("tool", write, requires=needs_tool))
    document = render.Document("nothing")
    with pytest.raises(ClosedformError, match="not installed"):
        render.write_files(document, ["txt", "tool"])
    assert rendered == []


def test_formats_are_gathered_in_the_registrys_order_whatever_order_they_are_asked_in():
    calls = []

    class Probe(render.Document):
        def render_text(self, flavour):
            calls.append(flavour.name)
            return f"{flavour.name} text"

        def json(self):
            return "{}\n"

    files = render.write_files(Probe("probe"), ["json", "tex", "md"])
    assert list(files) == ["probe.md", "probe.tex", "probe.json"]
    assert files["probe.md"] == "md text" and files["probe.tex"] == "tex text"
    assert calls == ["md", "tex"]
    with pytest.raises(ClosedformError, match="no CSV output"):
        render.write_files(Probe("probe"), ["csv"])
    assert [f.name for f in render.flavours_of(["pdf", "json", "tex"])] == ["tex"]


@pytest.mark.parametrize("name", sorted(render.FLAVOURS))
def test_every_flavour_has_a_template_for_every_document(name):
    flavour = render.flavour(name)
    templates = Path(render.__file__).parent.parent / "templates"
    for document in ("sheet", "appendix", "audit", "audit_claims", "inversion",
                     *([flavour.document] if flavour.document else [])):
        assert (templates / flavour.template(document)).is_file(), flavour.template(document)
    assert flavour.figure_suffix in ("svg", "pdf")


def test_an_unknown_flavour_is_named():
    with pytest.raises(ValueError, match="unknown template target 'html'"):
        render.flavour("html")
