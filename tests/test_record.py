"""Calculation records (kit.record): execution, the HTML record, determinism, new folders.

The kernel-starting tests share two recordings made once per module (about 15 s in all); they
carry the ``slow`` marker. Fixture workbooks are in tests/fixtures/record/.
"""

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
def test_header_then_checks_first_and_cautions_last(demo_html):
    body = _body(demo_html)
    for text in ("Demo survey quad", "<td>A</td>", "dcf5aa1c062744d5", "rotorbook 0.1.0",
                 "demo author", "demo checker"):
        assert text in body
    assert re.search(r"<th>Date \(UTC\)</th><td>\d{4}-\d\d-\d\d</td>", body)
    checks, first_cell, cautions = (body.index("Design checks: 1 of 2 met"),
                                    body.index('class="rb-cell'), body.index("<h2>Cautions</h2>"))
    assert checks < first_cell < cautions
    assert body.rindex('class="rb-cell') < cautions
    assert "tethered" in body[cautions:] and "kill switch" in body[cautions:]
    assert "not a flight clearance" in body[cautions:]
    top = body[checks:first_cell]
    assert "hover thrust fraction" in top and "rotor 1 failed" in top and "FAIL" in top


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
    assert "no design checks in this workbook" in body
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
