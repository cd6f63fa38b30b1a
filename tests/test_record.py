"""Calculation records (kit.record): execution, the HTML record, determinism, new folders.

The kernel-starting tests share two recordings made once per module (about 15 s in all); they
carry the ``slow`` marker. Fixture workbooks are in tests/fixtures/record/.
"""

import hashlib
import json
import re
from pathlib import Path

import nbformat
import pytest

from kit.cli import main as cli_main
from kit.errors import DesignError, RecordError
from kit.fileio import write_atomic as atomic_write
from kit.record import execute as ex
from kit.record.latex import latex_output_to_html, protect_math, restore_math, tex_to_mathml
from kit.record.offline import external_references
from kit.record.render import (
    list_workbooks,
    new_folder,
    record_design,
    select_workbooks,
)

ROOT = Path(__file__).resolve().parents[1]
FIXTURES = ROOT / "tests" / "fixtures" / "record"
DESIGN = ROOT / "data" / "designs" / "survey_quad.toml"
BAD_DESIGN = ROOT / "tests" / "bad_designs" / "negative_thrust.toml"
XSS = "<script>alert(1)</script>"

kernel = pytest.mark.slow  # starts a Jupyter kernel


def _without_date(text: str) -> str:
    return "\n".join(line for line in text.splitlines() if "Date (UTC)" not in line)


def _body(page: str) -> str:
    """The page after its head (the inline BokehJS mentions <body> in its code)."""
    return page[page.rindex("</head>"):]


@pytest.fixture(scope="module")
def recorded(tmp_path_factory):
    out = tmp_path_factory.mktemp("records")
    result = record_design(DESIGN, out_dir=out, template_dir=FIXTURES, timeout=120)
    return result, out


@pytest.fixture(scope="module")
def demo_html(recorded):
    return (recorded[1] / "record_demo.html").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def fail_html(recorded):
    return (recorded[1] / "record_fail.html").read_text(encoding="utf-8")


# -- without a kernel -----------------------------------------------------------------------------


def test_workbook_names_with_or_without_extension():
    available = list_workbooks(FIXTURES)
    assert list(available) == ["record_demo", "record_fail"]
    assert list(select_workbooks(["record_demo.ipynb", "record_fail"], available)) == \
        ["record_demo", "record_fail"]
    assert select_workbooks(None, available) == available


def test_unknown_workbook_names_the_allowed_ones(tmp_path):
    with pytest.raises(RecordError, match="record_demo, record_fail") as info:
        record_design(DESIGN, workbooks=["hover"], out_dir=tmp_path, template_dir=FIXTURES)
    assert "'hover'" in str(info.value)
    assert not any(tmp_path.iterdir())


def test_invalid_design_raises_before_anything_runs(tmp_path):
    out = tmp_path / "out"
    with pytest.raises(DesignError):
        record_design(BAD_DESIGN, out_dir=out, template_dir=FIXTURES)
    assert not out.exists()


def test_cli_record_invalid_design_exits_2(capsys, tmp_path):
    assert cli_main(["record", str(BAD_DESIGN), "--out", str(tmp_path / "r")]) == 2
    assert "max_thrust_n" in capsys.readouterr().err


def test_kernel_that_is_not_installed_is_an_error(tmp_path):
    with pytest.raises(RecordError, match="not installed"):
        record_design(DESIGN, out_dir=tmp_path / "r", template_dir=FIXTURES,
                      kernel_name="no-such-kernel-rotorbook")
    assert not (tmp_path / "r").exists()


def test_template_without_parameters_cell_is_an_error(tmp_path):
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell("x = 1")])
    nbformat.write(nb, tmp_path / "plain.ipynb")
    with pytest.raises(RecordError, match="parameters"):
        record_design(DESIGN, out_dir=tmp_path / "r", template_dir=tmp_path)


def test_injected_cell_follows_the_parameters_cell():
    nb = nbformat.read(FIXTURES / "record_demo.ipynb", as_version=4)
    i = ex.parameters_index(nb)
    out = ex.inject_parameters(nb, Path("/abs/design \"q\".toml"))
    cell = out.cells[i + 1]
    assert cell.metadata.tags == ["injected-parameters"]
    assert 'DESIGN_PATH = "/abs/design \\"q\\".toml"' in cell.source
    assert len(out.cells) == len(nb.cells) + 1
    # injecting twice keeps one injected cell
    assert len(ex.inject_parameters(out, Path("/x.toml")).cells) == len(out.cells)


def test_atomic_write_leaves_no_temporary_file(tmp_path):
    target = tmp_path / "a.html"
    atomic_write(target, "one")
    atomic_write(target, "two")
    assert target.read_text() == "two"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.html"]


def test_id_normalisation_is_by_order_of_appearance():
    ids = ex.IdMap()
    a, b = "0f3a5b1e-1c2d-4e5f-8a9b-0c1d2e3f4a5b", "9e8d7c6b-5a49-4837-8261-504f3e2d1c0b"
    assert ids(f"{b} {a} {b}") == ids.__class__()(f"{a} {b} {a}")
    assert a not in ids(a)
    sha = "ab" * 32
    assert ids(sha) == sha  # a SHA-256 is not a model id
    assert ids("<object at 0x7f3a2b1c0d9e>") == "<object at 0x...>"


# -- LaTeX to MathML ------------------------------------------------------------------------------


def test_markdown_math_becomes_mathml_and_code_is_left_alone():
    text, pieces = protect_math(r"Hover $T = m g$, price \$5, `$a$`, and $$\frac{a}{b}$$.")
    assert len(pieces) == 2
    assert "`$a$`" in text and r"\$5" in text
    html = restore_math(text, pieces)
    assert html.count("<math") == 2 and 'display="block"' in html


def test_latex_output_and_fallback():
    out = latex_output_to_html(
        r"$\displaystyle \left[\begin{matrix}1 & 2\\3 & 4\end{matrix}\right]$")
    assert "<mtable>" in out and "displaystyle" not in out
    fallback = tex_to_mathml(r"\frac{<b>}{")
    assert fallback.startswith('<code class="rb-tex"') and "<b>" not in fallback
    aligned = tex_to_mathml(r"\begin{aligned}a &= b\\ c &= d\end{aligned}", display=True)
    assert "<mtable" in aligned and "<mi>&</mi>" not in aligned


# -- records (a kernel runs) ----------------------------------------------------------------------


@kernel
def test_record_files_and_result(recorded):
    result, out = recorded
    assert not result.ok  # record_fail raises
    names = sorted(p.name for p in out.iterdir())
    assert names == [".rotorbook-set.json", "index.html", "record_demo.html",
                     "record_demo.ipynb", "record_fail.html", "record_fail.ipynb"]
    lines = result.lines()
    assert lines[0].startswith("record_demo: done, 1/2 checks met")
    assert lines[1].startswith(
        "record_fail: FAILED (ValueError: rotor data out of range in cell 5)")
    assert lines[-1] == f"index: {out / 'index.html'}"


@kernel
def test_verdict_and_matrix_first_then_header_then_table_once_and_cautions_last(demo_html):
    body = _body(demo_html)
    sha = hashlib.sha256(DESIGN.read_bytes()).hexdigest()  # the design file's own bytes
    for text in ("Demo survey quad", "<td>A</td>", sha, "rotorbook 0.1.0",
                 "demo author", "demo checker", "Invented example: H-frame survey quad"):
        assert text in body
    assert re.search(r"<th>Date \(UTC\)</th><td>\d{4}-\d\d-\d\d</td>", body)
    verdict, matrix, meta, table, first_cell, cautions = (
        body.index("Verdict: FAIL"), body.index('class="rb-matrix"'),
        body.index('class="rb-meta"'), body.index('class="rb-all-checks"'),
        body.index('class="rb-cell'), body.index("<h2>Cautions</h2>"))
    assert verdict < matrix < meta < table < first_cell < cautions
    assert body.rindex('class="rb-cell') < cautions
    assert "tethered" in body[cautions:] and "kill switch" in body[cautions:]
    assert "not a flight clearance" in body[cautions:]
    # the matrix: the failing case first and marked governing; each value coloured by status
    m = body[matrix:body.index("</table>", matrix)]
    assert m.index("rotor 1 failed") < m.index(">design<")
    assert m.index("governing") < m.index(">design<")
    assert 'class="rb-fail"' in m and 'class="rb-pass"' in m
    # the full table once (folded), the body points to the top instead of repeating it
    assert body.count("hover thrust fraction</td>") == 1
    assert "are at the top of this record" in body[first_cell:]
    assert body.count("<h2>Cautions</h2>") + body.count("<h3>Cautions</h3>") == 1


@kernel
def test_equations_are_mathml(demo_html):
    body = _body(demo_html)
    assert body.count("<math ") >= 3
    assert "$T = m g$" not in body and "\\frac" not in body.replace("\\frac{T}{k}", "")
    assert "<code>$not math$</code>" in body
    assert "MathJax" not in demo_html.split("BEGIN bokeh.min.js")[0]


@kernel
def test_bokeh_inlined_once_and_widgets_shown_static(demo_html):
    head = demo_html[:demo_html.rindex("</head>")]
    assert head.count("/* BEGIN bokeh.min.js */") == 1
    assert demo_html.count("/* BEGIN bokeh.min.js */") == 1
    assert "embed_items_notebook" in _body(demo_html)
    assert "cdn.bokeh.org" not in demo_html  # the notebook's BokehJS loader output is dropped
    assert '<p class="snapshot">static panel snapshot</p>' in demo_html


@kernel
def test_no_bokeh_no_bokehjs(fail_html):
    assert "bokeh.min.js" not in fail_html


@kernel
def test_records_load_nothing_from_the_network(recorded):
    _, out = recorded
    for page in out.glob("*.html"):
        assert external_references(page.read_text(encoding="utf-8")) == [], page.name


@kernel
def test_failed_workbook_gets_a_failed_banner_at_the_top(fail_html, recorded):
    body = _body(fail_html)
    assert '<meta name="rotorbook-status" content="FAILED">' in fail_html
    assert body.index('class="rb-banner"') < body.index("rb-sheet-head")
    banner = body[body.index('class="rb-banner"'):body.index("</div>")]
    assert "FAILED" in banner and "ValueError: rotor data out of range" in banner
    assert "in cell 5" in banner
    assert "not run: the workbook stopped at cell 5" in body
    assert "carries no verdict" in banner.replace("\n", " ")
    assert "Verdict:" not in body and 'content="FAILED"' in fail_html
    index = (recorded[1] / "index.html").read_text(encoding="utf-8")
    assert "FAILED" in index and 'href="record_fail.html"' in index


@kernel
def test_existing_record_is_not_overwritten_without_force(recorded):
    _, out = recorded
    before = (out / "record_demo.html").stat().st_mtime_ns
    with pytest.raises(RecordError, match="--force"):
        record_design(DESIGN, workbooks=["record_demo"], out_dir=out, template_dir=FIXTURES)
    assert (out / "record_demo.html").stat().st_mtime_ns == before


@kernel
def test_same_inputs_same_record_apart_from_the_date(recorded, demo_html, tmp_path):
    _, out = recorded
    again = record_design(DESIGN, workbooks=["record_demo"], out_dir=tmp_path,
                          template_dir=FIXTURES, timeout=120)
    assert again.ok
    assert _without_date((tmp_path / "record_demo.html").read_text(encoding="utf-8")) == \
        _without_date(demo_html)
    assert (tmp_path / "record_demo.ipynb").read_text() == (out / "record_demo.ipynb").read_text()
    nb = json.loads((tmp_path / "record_demo.ipynb").read_text())
    assert all("execution" not in c["metadata"] for c in nb["cells"])


@kernel
def test_design_strings_are_escaped(tmp_path):
    text = DESIGN.read_text(encoding="utf-8")
    text = text.replace('name = "Demo survey quad"', f'name = "{XSS}"', 1)
    text = re.sub(r'(?m)^(prepared_by|checked_by) = .*\n', "", text)
    design = tmp_path / "xss.toml"
    design.write_text(text, encoding="utf-8")
    out = tmp_path / "r"
    result = record_design(design, workbooks=["record_fail"], out_dir=out, template_dir=FIXTURES,
                           timeout=120)
    assert not result.ok
    for page in ("record_fail.html", "index.html"):
        html = (out / page).read_text(encoding="utf-8")
        assert XSS not in html and "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    html = (out / "record_fail.html").read_text(encoding="utf-8")
    assert html.count('<span class="rb-sign"></span>') == 2  # blank lines to sign


# -- new folder -----------------------------------------------------------------------------------


def test_new_folder_points_the_workbooks_at_the_copied_design(tmp_path):
    folder = new_folder(tmp_path / "quad", DESIGN, template_dir=FIXTURES)
    assert sorted(p.name for p in folder.iterdir()) == \
        ["record_demo.ipynb", "record_fail.ipynb", "survey_quad.toml"]
    assert (folder / "survey_quad.toml").read_bytes() == DESIGN.read_bytes()
    for name in ("record_demo", "record_fail"):
        made = nbformat.read(folder / f"{name}.ipynb", as_version=4)
        template = nbformat.read(FIXTURES / f"{name}.ipynb", as_version=4)
        i = ex.parameters_index(made)
        assert 'DESIGN_PATH = "survey_quad.toml"' in made.cells[i].source
        assert "data/designs" not in made.cells[i].source
        assert [c.source for j, c in enumerate(made.cells) if j != i] == \
            [c.source for j, c in enumerate(template.cells) if j != i]


def test_new_folder_refuses_a_non_empty_folder_and_a_bad_design(tmp_path):
    (tmp_path / "full").mkdir()
    (tmp_path / "full" / "x.txt").write_text("x")
    with pytest.raises(RecordError, match="not empty"):
        new_folder(tmp_path / "full", DESIGN, template_dir=FIXTURES)
    (tmp_path / "empty").mkdir()
    assert new_folder(tmp_path / "empty", DESIGN, template_dir=FIXTURES) == tmp_path / "empty"
    with pytest.raises(DesignError):
        new_folder(tmp_path / "bad", BAD_DESIGN, template_dir=FIXTURES)
    assert not (tmp_path / "bad").exists()


# -- a record holds only what its own run computed ------------------------------------------------

#: Numbers stored in the stale template below; none may reach a record (invented values).
STALE_NUMBERS = ("1.245", "46 of 47", "8675309", "31.4159", "0.4242")


def _cannot_hover(folder: Path) -> Path:
    """The demo survey quad with its rotors weakened to thrust-to-weight of about 0.75."""
    text = DESIGN.read_text(encoding="utf-8").replace("max_thrust_n = 8.0", "max_thrust_n = 2.4")
    path = folder / "cannot_hover.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _stale_template(folder: Path) -> Path:
    """A template whose stored outputs come from another run, failing in its third cell."""
    from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook, new_output

    folder.mkdir()
    stale_checks = [{"name": "thrust-to-weight", "value": 31.4159, "limit": 2.0, "passed": True,
                     "unit": "", "case": "", "relation": ">="}]
    params = new_code_cell('DESIGN_PATH = "x.toml"', metadata={"tags": ["parameters"]},
                           outputs=[new_output("stream", name="stdout", text="mass 1.245 kg\n")])
    third = new_code_cell(
        "from kit.analysis.report import analyze_file\n"
        "report = analyze_file(DESIGN_PATH)\n"
        "tw = report.hover.thrust_to_weight\n"
        "assert tw >= 1, f'thrust-to-weight {tw:.2f}: the design cannot hover'",
        execution_count=3,
        outputs=[new_output("display_data", data={"text/html": "<b>46 of 47 met</b>",
                                                  "text/plain": "46 of 47"})])
    fourth = new_code_cell(
        "from kit import workbook as wb\nwb.Checks(report.checks)", execution_count=4,
        outputs=[new_output("display_data", data={
            "application/vnd.rotorbook.checks+json": stale_checks,
            "text/html": "<p>checks 8675309</p>", "text/plain": "46 of 47 checks passed"})])
    fifth = new_code_cell("print(round(0.2121 * 2, 4))", execution_count=5,
                          outputs=[new_output("stream", name="stdout", text="0.4242\n")])
    nb = new_notebook(cells=[new_markdown_cell("# Stale fixture"), params, third, fourth, fifth])
    path = folder / "stale.ipynb"
    nbformat.write(nb, path)
    return folder


@kernel
def test_stale_outputs_never_reach_a_failed_record(tmp_path):
    design = _cannot_hover(tmp_path)
    templates = _stale_template(tmp_path / "templates")
    out = tmp_path / "r"
    result = record_design(design, out_dir=out, template_dir=templates, timeout=120)
    assert not result.ok
    assert result.records[0].failure.ename == "AssertionError"
    assert "cannot hover" in result.records[0].failure.evalue
    for page in ("stale.html", "index.html"):
        html = (out / page).read_text(encoding="utf-8")
        body = _body(html)
        for stale in STALE_NUMBERS:
            assert stale not in body, (page, stale)
        assert "FAILED" in body[:body.index("rb-sheet-head")]
    nb = json.loads((out / "stale.ipynb").read_text(encoding="utf-8"))
    text = json.dumps(nb)
    for stale in STALE_NUMBERS:
        assert stale not in text
    # the template itself keeps its stored outputs (the record cleared a copy)
    assert "8675309" in (templates / "stale.ipynb").read_text(encoding="utf-8")


def test_clear_outputs_leaves_sources_and_template_alone():
    nb = nbformat.read(FIXTURES / "record_demo.ipynb", as_version=4)
    nb.cells[2].outputs = [nbformat.v4.new_output("stream", name="stdout", text="1.245\n")]
    nb.cells[2].execution_count = 7
    cleared = ex.clear_outputs(nb)
    assert all(c.get("outputs", []) == [] for c in cleared.cells)
    assert all(c.get("execution_count") is None for c in cleared.cells if c.cell_type == "code")
    assert [c.source for c in cleared.cells] == [c.source for c in nb.cells]
    assert nb.cells[2].outputs  # a copy was cleared


def test_new_folder_writes_workbooks_without_outputs(tmp_path):
    templates = tmp_path / "t"
    templates.mkdir()
    nb = nbformat.read(FIXTURES / "record_demo.ipynb", as_version=4)
    nb.cells[2].outputs = [nbformat.v4.new_output("stream", name="stdout", text="1.245 kg\n")]
    nbformat.write(nb, templates / "demo.ipynb")
    folder = new_folder(tmp_path / "quad", DESIGN, template_dir=templates)
    made = nbformat.read(folder / "demo.ipynb", as_version=4)
    assert all(c.get("outputs", []) == [] for c in made.cells)
    assert "1.245" not in (folder / "demo.ipynb").read_text(encoding="utf-8")
