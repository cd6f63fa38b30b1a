"""Calculation records: execute the workbooks for one design and write self-contained HTML.

:func:`record_design` validates the design, runs each workbook template headless with the design
path injected (see :mod:`kit.record.execute`), and writes per workbook the executed notebook and
one HTML record, plus ``index.html``. :func:`new_folder` makes a per-design folder of workbooks.

A record (DESIGN.md, "Results and records") opens with a header (design name, revision, the
design file's SHA-256, kit version and commit, date, prepared/checked fields) and the pass/fail
table of the design checks, and closes with the cautions. It loads nothing from the network:
equations are MathML made at record time (:mod:`kit.record.latex`), BokehJS is inlined from the
local installation when a plot needs it, and widgets show their static ``text/html`` snapshot.
A workbook that fails still gives a record, marked FAILED at the very top. Writes are atomic and
an existing record is replaced only with ``force=True``.
"""

from __future__ import annotations

import datetime as _dt
import html
import json
import math
import shutil
import subprocess
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import nbformat

import kit
from kit.errors import RecordError
from kit.fileio import write_atomic
from kit.record import execute as _ex
from kit.record.offline import external_references
from kit.record.staging import RecordFolder

#: Display mime type of the design checks a workbook emits: a JSON list of
#: {"name", "value", "limit", "passed", "unit"?, "case"?}.
CHECKS_MIME = "application/vnd.rotorbook.checks+json"
BOKEH_EXEC_MIME = "application/vnd.bokehjs_exec.v0+json"
BOKEH_LOAD_MIME = "application/vnd.bokehjs_load.v0+json"
WIDGET_VIEW_MIME = "application/vnd.jupyter.widget-view+json"

#: Output mime types in the order a record prefers them. The widget view is absent on purpose:
#: a panel's static ``text/html`` snapshot is shown instead.
DISPLAY_PRIORITY = [
    "text/html", CHECKS_MIME, "image/svg+xml", "image/png", "image/jpeg", "text/markdown",
    "text/latex", "application/javascript", "text/plain",
]

CAUTIONS = (
    "An analysis made with this kit is not a flight clearance. It rests on stated models (rigid "
    "body, rotor thrust following its command with the first-order lag the design states, or "
    "at once when it states none, a simple drag-torque law) that a real vehicle departs from.",
    "Flight with failed rotors can hurt people. Flight-test failure cases tethered or in a net, "
    "with a kill switch, away from people.",
    "Follow your local aviation rules and licensed practice.",
)

TEMPLATE_DIR = Path(__file__).parent / "templates"
TEMPLATE_NAME = "rotorbook"


def default_workbooks_dir() -> Path:
    """The ``workbooks/`` folder of the repository the installed kit lives in."""
    return Path(kit.__file__).resolve().parent.parent / "workbooks"


# -- results --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class WorkbookRecord:
    """One recorded workbook: where its files are, whether it ran, and its design checks."""

    name: str
    html_path: Path
    notebook_path: Path
    failure: _ex.CellFailure | None
    checks_total: int
    checks_failed: int
    external: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        """True when every cell ran (design checks that are not met do not make it False)."""
        return self.failure is None

    def line(self) -> str:
        if self.failure is not None:
            f = self.failure
            where = f" in cell {f.cell}" if f.cell else ""
            return f"{self.name}: FAILED ({f.ename}: {f.evalue}{where}) -> {self.html_path}"
        checks = (f"{self.checks_total - self.checks_failed}/{self.checks_total} checks met"
                  if self.checks_total else "no design checks")
        text = f"{self.name}: done, {checks} -> {self.html_path}"
        if self.external:
            text += f" (warning: the page loads {', '.join(self.external)})"
        return text


@dataclass(frozen=True)
class RecordResult:
    """What :func:`record_design` wrote. ``ok`` is False when any workbook failed to run."""

    design_name: str
    out_dir: Path
    index_path: Path
    records: tuple[WorkbookRecord, ...] = field(default=())
    notes: tuple[str, ...] = ()

    @property
    def ok(self) -> bool:
        return all(r.ok for r in self.records)

    def lines(self) -> list[str]:
        """One line per workbook, then the index path (what ``rotorbook record`` prints)."""
        out = [f"note: {n}" for n in self.notes] + [r.line() for r in self.records]
        failed = sum(not r.ok for r in self.records)
        if failed:
            out.append(f"{failed} of {len(self.records)} workbook(s) FAILED")
        out.append(f"index: {self.index_path}")
        return out


# -- templates ------------------------------------------------------------------------------------


def list_workbooks(template_dir: str | Path | None = None) -> dict[str, Path]:
    """The workbook templates, name (file stem) -> path, sorted by name."""
    folder = Path(template_dir) if template_dir is not None else default_workbooks_dir()
    if not folder.is_dir():
        raise RecordError(f"workbook folder {str(folder)!r} does not exist")
    found = {p.stem: p for p in sorted(folder.glob("*.ipynb")) if not p.name.startswith(".")}
    if not found:
        raise RecordError(f"no workbook templates (*.ipynb) in {str(folder)!r}")
    return found


def select_workbooks(names: Iterable[str] | None, available: dict[str, Path]) -> dict[str, Path]:
    """The templates asked for, by name with or without ``.ipynb``; all when ``names`` is None."""
    if names is None:
        return dict(available)
    chosen: dict[str, Path] = {}
    unknown = []
    for name in names:
        stem = name[:-len(".ipynb")] if name.endswith(".ipynb") else name
        if stem in available:
            chosen[stem] = available[stem]
        else:
            unknown.append(name)
    if unknown:
        raise RecordError(f"unknown workbook(s) {', '.join(repr(u) for u in unknown)} -> one of: "
                          f"{', '.join(available)}")
    if not chosen:
        raise RecordError(f"no workbook named -> name one or more of: {', '.join(available)}")
    return chosen


# -- writing --------------------------------------------------------------------------------------


def git_commit(repo: Path | None = None) -> str:
    """``git rev-parse HEAD`` of the kit's repository, or "" when there is none."""
    repo = repo or Path(kit.__file__).resolve().parent.parent
    try:
        out = subprocess.run(["git", "-C", str(repo), "rev-parse", "HEAD"], capture_output=True,
                             text=True, timeout=10, check=False)
    except (OSError, subprocess.SubprocessError):
        return ""
    sha = out.stdout.strip()
    return sha if out.returncode == 0 and len(sha) in (40, 64) else ""


def utc_date() -> str:
    """Today's date in UTC, ISO 8601."""
    return _dt.datetime.now(_dt.UTC).date().isoformat()


# -- preparing an executed notebook for HTML ------------------------------------------------------


def _fmt(x) -> str:
    if x is None:
        return ""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        return f"{x:.4g}" if math.isfinite(x) else str(x)
    if isinstance(x, (list, tuple)):
        return "[" + ", ".join(_fmt(v) for v in x) + "]"
    return str(x)


def format_checks(raw) -> list[dict]:
    """Design checks from the checks mime bundle as display strings; tolerant of odd entries."""
    if isinstance(raw, str):
        try:
            raw = json.loads(raw)
        except ValueError:
            return []
    if isinstance(raw, dict):
        raw = raw.get("checks", [raw])
    rows = []
    for c in raw if isinstance(raw, list) else []:
        if not isinstance(c, dict):
            continue
        rows.append({
            "name": _fmt(c.get("name", "")), "case": _fmt(c.get("case")),
            "value": _fmt(c.get("value")),
            "limit": (_fmt(c.get("relation")) + " " if c.get("relation") else "")
            + _fmt(c.get("limit")),
            "unit": _fmt(c.get("unit")), "passed": c.get("passed") is True,
        })
    return rows


def raw_checks(nb) -> list[dict]:
    """Every design check emitted by the notebook's outputs, as emitted, in workbook order."""
    found: list[dict] = []
    for cell in nb.cells:
        for out in cell.get("outputs", []):
            raw = out.get("data", {}).get(CHECKS_MIME)
            if isinstance(raw, str):
                try:
                    raw = json.loads(raw)
                except ValueError:
                    continue
            if isinstance(raw, dict):
                raw = raw.get("checks", [raw])
            if isinstance(raw, list):
                found += [c for c in raw if isinstance(c, dict)]
    return found


def collect_checks(nb) -> list[dict]:
    """Every design check emitted by the notebook's outputs, as display strings."""
    rows = format_checks(raw_checks(nb))
    # failed checks first (a reviewer reads those first), otherwise in workbook order
    return sorted(rows, key=lambda c: c["passed"])


def _is_bokeh(data: dict) -> bool:
    return BOKEH_EXEC_MIME in data or "Bokeh.embed" in str(data.get("text/html", ""))


#: What a record shows in the body where a workbook displayed its design checks: the verdict,
#: the matrix and the table are at the top of the record, once.
CHECKS_POINTER = ('<p class="rb-none">Design checks: the verdict, the cases x checks matrix and '
                  'the full table are at the top of this record.</p>')


def prepare_outputs(nb, lift_checks: bool = False) -> dict:
    """Make the outputs of an executed notebook safe for an offline record, in place.

    Drops the BokehJS loader outputs (they point at a CDN; the record inlines BokehJS once in
    its head instead), any JavaScript that is not a Bokeh plot's embed script, and the
    cautions output (the record closes with the cautions, once; its cell is hidden). With
    ``lift_checks`` a design-checks output is replaced by a pointer to the top of the record,
    where its verdict, matrix and table are shown. Returns what the page head needs:
    ``{"bokeh": bool, "bokeh_mathjax": bool}``.
    """
    info = {"bokeh": False, "bokeh_mathjax": False}
    for cell in nb.cells:
        kept = []
        for out in cell.get("outputs", []):
            data = out.get("data")
            if data is None:
                kept.append(out)
                continue
            if BOKEH_LOAD_MIME in data:
                continue
            if 'data-rb-cautions="1"' in str(data.get("text/html", "")):
                cell.metadata["rb_hidden"] = True
                continue
            if lift_checks and CHECKS_MIME in data:
                out["data"] = {"text/html": CHECKS_POINTER}
                kept.append(out)
                continue
            if _is_bokeh(data):
                info["bokeh"] = True
                text = json.dumps(data)
                if '\\"name\\":\\"TeX\\"' in text or '\\"name\\":\\"MathML\\"' in text \
                        or '"name":"TeX"' in text:
                    info["bokeh_mathjax"] = True
            elif "application/javascript" in data:
                data.pop("application/javascript")
                if not data:
                    continue
            kept.append(out)
        if cell.cell_type == "code":
            cell.outputs = kept
    return info


def bokeh_head(info: dict) -> str:
    """BokehJS from the local installation, inline, when the record holds a Bokeh plot."""
    if not info.get("bokeh"):
        return ""
    from bokeh.resources import Resources

    components = ["bokeh", "bokeh-gl", "bokeh-widgets", "bokeh-tables"]
    if info.get("bokeh_mathjax"):
        components.append("bokeh-mathjax")
    return Resources(mode="inline", components=components).render_js()


# -- HTML -----------------------------------------------------------------------------------------


def _markdown(source: str) -> str:
    from nbconvert.filters.markdown_mistune import markdown2html_mistune

    from kit.record.latex import protect_math, restore_math

    text, pieces = protect_math(source)
    return restore_math(markdown2html_mistune(text), pieces)


def _latex(source: str) -> str:
    from kit.record.latex import latex_output_to_html

    return latex_output_to_html(source)


def _script(js: str) -> str:
    return js.replace("</script", "<\\/script").replace("</SCRIPT", "<\\/SCRIPT")


def _exporter():
    from nbconvert.exporters import TemplateExporter
    from traitlets.config import Config

    class RecordExporter(TemplateExporter):
        """nbconvert exporter for the ``rotorbook`` template (extends nbconvert's ``base``)."""

        export_from_notebook = None
        output_mimetype = "text/html"

        def _file_extension_default(self):
            return ".html"

        def _template_name_default(self):
            return TEMPLATE_NAME

    config = Config({
        "NbConvertBase": {"display_data_priority": DISPLAY_PRIORITY},
        "TemplateExporter": {"exclude_input_prompt": True, "exclude_output_prompt": True},
    })
    exp = RecordExporter(config=config, extra_template_basedirs=[str(TEMPLATE_DIR)])
    exp.register_filter("rb_markdown", _markdown)
    exp.register_filter("rb_latex", _latex)
    exp.register_filter("rb_script", _script)
    exp.register_filter("rb_checks", format_checks)
    return exp


def render_record(nb, *, design, workbook: str, date: str, failure: _ex.CellFailure | None,
                  commit: str = "") -> tuple[str, list[dict]]:
    """The HTML record of an executed (and normalised) notebook; also its design checks."""
    from kit.workbook import check_rows, checks_table_html, matrix_html, verdict_html

    nb = nbformat.from_dict(json.loads(json.dumps(nb)))
    checks = collect_checks(nb)
    rows = check_rows(raw_checks(nb))
    info = prepare_outputs(nb, lift_checks=failure is None)
    context = {
        "workbook": workbook,
        "design": {
            "name": design.name, "revision": design.revision, "sha256": design.sha256,
            "file": Path(design.source).name if design.source else "",
            "prepared_by": design.prepared_by or "", "checked_by": design.checked_by or "",
            "notes": getattr(design, "notes", "") or "",
            # measured rotor data the coefficients were fitted from (file name, SHA-256)
            "stand_files": sorted({(f.file, f.sha256)
                                   for f in getattr(design, "rotor_fits", ())}),
        },
        # built by kit.workbook from this run's outputs, every string escaped there
        "verdict_html": verdict_html(rows) if failure is None else "",
        "matrix_html": matrix_html(rows) if failure is None else "",
        "table_html": checks_table_html(rows) if failure is None else "",
        "verdict": ("FAILED" if failure is not None else "none" if not rows
                    else "fail" if any(not r["passed"] for r in rows) else "pass"),
        "kit_version": kit.__version__,
        "git_commit": commit,
        "date": date,
        "failure": failure,
        "checks": checks,
        "checks_passed": sum(c["passed"] for c in checks),
        "cautions": CAUTIONS,
        "head_js": bokeh_head(info),
    }
    body, _ = _exporter().from_notebook_node(nb, resources={"rotorbook": context})
    return body, checks


def record_css(extra: str = "") -> str:
    """The records' stylesheet (``record.css`` of the template), with ``extra`` rules after."""
    return (TEMPLATE_DIR / TEMPLATE_NAME / "record.css").read_text(encoding="utf-8") + extra


def html_page(title: str, body: str, *, meta: Sequence[tuple[str, str]] = (), css: str = "",
              head_js: str = "") -> str:
    """One self-contained page in the records' look: the head every page of the kit shares
    (charset, viewport, generator, ``meta`` name/content pairs, title, the records'
    stylesheet plus ``css``, ``head_js``) and ``body`` inside ``<main>``.

    ``title`` is plain text (escaped here); ``body``, ``css`` and ``head_js`` are HTML, CSS and
    script the caller has escaped. Used by the index, the comparison record and the revision
    history (the notebook records share the stylesheet through their nbconvert template).
    """
    e = html.escape
    metas = "".join(f'<meta name="{e(k)}" content="{e(v)}">\n' for k, v in meta)
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="rotorbook {e(kit.__version__)}">
{metas}<title>{e(title)}</title>
<style>
{record_css(css)}
</style>
{head_js}
</head>
<body>
<main>
{body}
</main>
</body>
</html>
"""


def sheet_header(kicker: str, title_html: str, rows: Sequence[tuple[str, ...]],
                 after_title: str = "") -> str:
    """The header block of a page: kicker, title, ``after_title`` (e.g. the verdict), then a
    table of (label, HTML value) or (label, HTML value, cell class) rows. ``kicker`` and the
    labels are plain text."""
    e = html.escape
    body = "\n".join(f"<tr><th>{e(r[0])}</th><td"
                     + (f' class="{e(r[2])}"' if len(r) > 2 else "") + f">{r[1]}</td></tr>"
                     for r in rows)
    return (f'<header class="rb-sheet-head">\n<div class="rb-kicker">{e(kicker)}</div>\n'
            f"<h1>{title_html}</h1>\n{after_title}"
            f'<table class="rb-meta">\n{body}\n</table>\n</header>')


def cautions_section(foot_html: str = "") -> str:
    """The cautions every page closes with, and an optional footnote (HTML)."""
    items = "".join(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)
    return f'<section class="rb-cautions"><h2>Cautions</h2><ul>\n{items}\n</ul>{foot_html}' \
           "</section>"


def render_index(out_dir: Path, design, date: str, current: Sequence[WorkbookRecord]) -> str:
    """``index.html``: the records of this run, with their run status and design checks.

    Built from this run's results only (never from pages left in ``out_dir`` by another run).
    """
    rows = []
    for r in current:
        if not r.ok:
            status, checks = "FAILED", "not evaluated: the workbook failed"
        elif not r.checks_total:
            status, checks = "done", "no design checks"
        else:
            met = r.checks_total - r.checks_failed
            status = "done"
            checks = (f"PASS: all {r.checks_total} met" if not r.checks_failed
                      else f"FAIL: {r.checks_failed} of {r.checks_total} not met ({met} met)")
        rows.append((r.name, r.html_path.name, status, checks, r.checks_failed > 0 and r.ok))
    rows.sort(key=lambda r: r[0])
    e = html.escape
    from kit.analysis.htmltable import FAIL_COLOURS, PASS_COLOURS

    def style(bad: bool) -> str:
        fg, bg = FAIL_COLOURS if bad else PASS_COLOURS
        return f' style="color:{fg};background:{bg}"'

    body = "\n".join(
        f'<tr><td><a href="{e(href)}">{e(name)}</a></td>'
        f'<td><a href="{e(name)}.ipynb">{e(name)}.ipynb</a></td>'
        f'<td class="{"rb-fail" if status == "FAILED" else "rb-pass"}"'
        f'{style(status == "FAILED")}>'
        f'{"&#10007; FAILED" if status == "FAILED" else "&#10003; ran"}</td>'
        f'<td class="{"rb-fail" if bad else "rb-pass"}"{style(bad or status == "FAILED")}>'
        f"{e(checks)}</td></tr>"
        for name, href, status, checks, bad in rows
    )
    all_ok = all(r[2] != "FAILED" for r in rows)
    any_fail = any(r[4] for r in rows)
    if not all_ok:
        n = sum(r[2] == "FAILED" for r in rows)
        verdict = (f'<div class="rb-banner" role="alert"><strong>FAILED</strong> &#8212; {n} of '
                   f"{len(rows)} workbook(s) did not run to the end; their design checks are not "
                   "evaluated.</div>")
    elif any_fail:
        verdict = (f'<div class="rb-verdict"{style(True)}><b>&#10007; Verdict: FAIL</b> &#8212; '
                   "design checks not met in: " + ", ".join(e(r[0]) for r in rows if r[4])
                   + ".</div>")
    elif any(r[3] != "no design checks" for r in rows):
        verdict = (f'<div class="rb-verdict"{style(False)}><b>&#10003; Verdict: PASS</b> '
                   "&#8212; every design check met in every record.</div>")
    else:
        verdict = ""
    notes = getattr(design, "notes", "") or ""
    meta_rows = [("Revision", e(design.revision)),
                 ("Design file SHA-256", e(design.sha256), "rb-mono")]
    meta_rows += [("Notes", e(notes))] if notes else []
    meta_rows += [("Kit", f"rotorbook {e(kit.__version__)}"), ("Date (UTC)", e(date))]
    head = sheet_header("Rotorbook calculation records",
                        f'{e(design.name)} <span class="rb-rev">rev. {e(design.revision)}</span>',
                        meta_rows, after_title=f"{verdict}\n" if all_ok and verdict else "")
    page = f"""{verdict if not all_ok else ""}
{head}
<table class="rb-checks">
<thead><tr><th>Record</th><th>Executed notebook</th><th>Run</th><th>Design checks</th></tr></thead>
<tbody>
{body}
</tbody>
</table>
{cautions_section()}"""
    return html_page(f"Records \u2014 {design.name} rev. {design.revision}", page,
                     meta=[("rotorbook-status", "passed" if all_ok else "FAILED")])


def _record_meta(path: Path) -> tuple[str, str] | None:
    """(status, checks) from the meta tags of an existing record; None when it is not one."""
    import re

    try:
        head = path.read_text(encoding="utf-8", errors="replace")[:4000]
    except OSError:
        return None
    st = re.search(r'<meta name="rotorbook-status" content="(\w+)">', head)
    ck = re.search(r'<meta name="rotorbook-checks" content="(\d+)/(\d+)">', head)
    if not st:
        return None
    checks = f"{ck.group(1)} of {ck.group(2)} met" if ck and ck.group(2) != "0" else "none"
    return st.group(1), checks


# -- the two entry points -------------------------------------------------------------------------


def record_design(design, workbooks: Sequence[str] | None = None, out_dir: str | Path = "records",
                  force: bool = False, kernel_name: str | None = None, timeout: int = 600,
                  template_dir: str | Path | None = None, wait: bool = False) -> RecordResult:
    """Execute workbooks for one design and write their calculation records.

    Parameters
    ----------
    design : str or Path
        The TOML design file. It is validated first; a :class:`~kit.errors.DesignError` is
        raised before anything runs or is written.
    workbooks : list of str, optional
        Workbook names, with or without ``.ipynb``; default every template.
    out_dir : str or Path
        Folder for ``<workbook>.ipynb``, ``<workbook>.html`` and ``index.html``.
    force : bool
        Replace existing records; without it an existing one raises RecordError.
    kernel_name : str, optional
        An installed kernelspec; default a kernelspec for this interpreter.
    timeout : int
        Longest time one cell may run, in s.
    template_dir : str or Path, optional
        Folder of workbook templates; default ``workbooks/`` beside the kit.
    wait : bool
        Wait for another run writing into ``out_dir`` instead of failing at once (see
        :mod:`kit.record.staging`: one writer per folder, sets swapped in whole).

    Returns
    -------
    RecordResult
        ``ok`` is False when a workbook failed (its record is then marked FAILED).

    Raises
    ------
    DesignError
        The design file is invalid.
    RecordError
        Unknown workbook, a template without a ``parameters`` cell, an existing record without
        ``force``, a folder holding another design's records without ``force``, a folder
        another run is writing, a write failure (disk full, permission), or a kernelspec that
        is not installed.
    """
    from kit.design import load

    design_path = Path(design).resolve()
    d = load(design_path)
    chosen = select_workbooks(workbooks, list_workbooks(template_dir))
    out = Path(out_dir)
    templates = {}
    for name, path in chosen.items():
        nb = nbformat.read(path, as_version=4)
        try:
            _ex.parameters_index(nb)
        except RecordError as exc:
            raise RecordError(f"workbook {name!r}: {exc}") from None
        templates[name] = (path, nb)
    # one writer per folder; the set is written into a staging folder and swapped in whole
    with _ex.sigterm_unwinds(), RecordFolder(out, wait=wait) as folder:
        stage = folder.prepare(d, chosen, force)
        records = _record_set(stage, out, d, design_path, templates, kernel_name, timeout)
        folder.commit(d)
    return RecordResult(design_name=d.name, out_dir=out, index_path=out / "index.html",
                        records=tuple(records), notes=tuple(folder.notes))


def _record_set(stage: Path, out: Path, d, design_path: Path, templates: dict,
                kernel_name: str | None, timeout: int) -> list[WorkbookRecord]:
    """Execute and render each workbook, writing into ``stage`` (reported as under ``out``),
    then the index."""
    kernel = _ex.Kernel(kernel_name)  # RecordError for a kernelspec that is not installed
    date = utc_date()
    commit = git_commit()
    keep = _ex.design_ids(design_path)  # ids from the design file, kept by the normaliser
    records = []
    with kernel:
        for name, (path, template) in templates.items():
            nb = _ex.inject_parameters(template, design_path)
            failure = _ex.execute(nb, kernel, cwd=path.parent, timeout=timeout)
            _ex.normalise(nb, keep=keep)
            page, checks = render_record(nb, design=d, workbook=name, date=date,
                                         failure=failure, commit=commit)
            nb_path, html_path = out / f"{name}.ipynb", out / f"{name}.html"
            write_atomic(stage / nb_path.name, nbformat.writes(nb) + "\n")
            write_atomic(stage / html_path.name, page)
            records.append(WorkbookRecord(
                name=name, html_path=html_path, notebook_path=nb_path, failure=failure,
                checks_total=len(checks), checks_failed=sum(not c["passed"] for c in checks),
                external=tuple(external_references(page))))
    write_atomic(stage / "index.html", render_index(stage, d, date, records))
    return records


def new_folder(dir: str | Path, design_path: str | Path,
               template_dir: str | Path | None = None) -> Path:
    """Make a per-design folder: the design file and every workbook pointed at it.

    The workbooks are written without outputs (a template's stored outputs belong to its demo
    design) and signed as trusted, so that their figures draw when they are run.

    Parameters
    ----------
    dir : str or Path
        The folder to create; it may exist only if empty.
    design_path : str or Path
        The TOML design file, validated first and copied into the folder.
    template_dir : str or Path, optional
        Folder of workbook templates; default ``workbooks/`` beside the kit.

    Returns
    -------
    Path
        The folder.

    Raises
    ------
    DesignError
        The design file is invalid.
    RecordError
        The folder exists and is not empty, or a template has no ``parameters`` cell.
    """
    from kit.design import load

    src = Path(design_path)
    load(src)
    folder = Path(dir)
    if folder.exists() and (not folder.is_dir() or any(folder.iterdir())):
        raise RecordError(f"folder {str(folder)!r} exists and is not empty -> give a new or "
                          "empty folder")
    templates = list_workbooks(template_dir)
    notebooks = {}
    for name, path in templates.items():
        nb = nbformat.read(path, as_version=4)
        try:
            notebooks[name] = _ex.rewrite_parameters(nb, src.name)
        except RecordError as exc:
            raise RecordError(f"workbook {name!r}: {exc}") from None
    folder.mkdir(parents=True, exist_ok=True)
    shutil.copy2(src, folder / src.name)
    for name, nb in notebooks.items():
        write_atomic(folder / f"{name}.ipynb", nbformat.writes(nb) + "\n")
        _sign(nb)
    return folder


def _sign(nb) -> None:
    """Mark a workbook trusted in Jupyter's signature store, so that what it displays when run
    (figures, widgets) is shown at once; a store that cannot be written is left alone."""
    import sqlite3

    from nbformat.sign import NotebookNotary

    try:
        notary = NotebookNotary()
        notary.sign(nb)
        notary.store.close()
    except (OSError, sqlite3.Error, ValueError):  # pragma: no cover - read-only home and the like
        pass
