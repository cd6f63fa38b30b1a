"""The comparison record: two revisions of a design side by side, as one offline HTML page.

:func:`render_comparison` turns a :class:`kit.compare.Comparison` into a self-contained page
with the conventions of the other records (:mod:`kit.record.render`): a header with both files'
SHA-256, the verdict first (checks that turned to fail at the top, then eroding ones), the
notes that qualify the comparison, the tables of input, mass-property, hover, per-case and
wheel changes, overlay figures of the two revisions (BokehJS inlined once from the local
installation), and the cautions at the end. Every string from a design file is escaped.

:func:`write_comparison` writes it atomically; :func:`add_to_index` adds a link to it to the
``index.html`` of a record folder (``rotorbook record DESIGN --previous OLD``).
"""

from __future__ import annotations

import html
import math
import re
from pathlib import Path

import kit
from kit.analysis.htmltable import num
from kit.compare import Comparison
from kit.errors import RecordError
from kit.fileio import write_atomic
from kit.record.render import (
    bokeh_head,
    cautions_section,
    git_commit,
    html_page,
    sheet_header,
    utc_date,
)

e = html.escape

#: Extra CSS of the comparison page (the record's stylesheet comes first).
CSS = """
.rb-verdict { border: 2px solid var(--rb-pass); padding: .6rem 1rem; margin: 0 0 1rem;
  font-family: "Trebuchet MS", "DejaVu Sans", Verdana, sans-serif; font-size: 1.1rem; }
.rb-verdict.rb-worse { border-color: var(--rb-fail); background: var(--rb-fail-bg); }
.rb-verdict strong { letter-spacing: .04em; }
table.rb-checks td.rb-old { color: var(--rb-muted); }
table.rb-checks td.rb-val { text-align: right; font-variant-numeric: tabular-nums;
  overflow-wrap: anywhere; }
tr.rb-changed td { background: #fff7e0; }
tr.rb-worse td { background: var(--rb-fail-bg); }
.rb-tag { font-size: .78rem; padding: 0 .3rem; border: 1px solid var(--rb-rule); border-radius: 3px;
  white-space: nowrap; }
.rb-notes li { margin: .15rem 0; }
.rb-fig { margin: .6rem 0; overflow-x: auto; }
details > summary { cursor: pointer; font-family: "Trebuchet MS", "DejaVu Sans", Verdana,
  sans-serif; margin: .4rem 0; }
"""


def _v(x, sig: int = 5) -> str:
    """A value for a table cell, escaped: numbers by :func:`num`, lists and dicts spelled out."""
    if x is None:
        return "\u2013"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int | float):
        return e(num(x, sig))
    if isinstance(x, list | tuple):
        return "[" + ", ".join(_v(v, sig) for v in x) + "]"
    if isinstance(x, dict):
        return "{" + ", ".join(f"{e(str(k))} {_v(v, sig)}" for k, v in x.items()) + "}"
    return e(str(x))


def _rel(r) -> str:
    v = r.get("relative_change")
    return "\u2013" if v is None else e(f"{100 * v:+.3g} %")


def _table(headers, rows_html: list[str], caption: str = "") -> str:
    cap = f"<caption>{e(caption)}</caption>" if caption else ""
    head = "".join(f"<th>{e(h)}</th>" for h in headers)
    return (f'<table class="rb-checks">{cap}<thead><tr>{head}</tr></thead><tbody>'
            + "\n".join(rows_html) + "</tbody></table>")


def _quantity_rows(rows: list[dict], only_changed: bool = False) -> list[str]:
    out = []
    for r in rows:
        if only_changed and not r["changed"]:
            continue
        cls = ' class="rb-changed"' if r["changed"] else ""
        out.append(f"<tr{cls}><td>{e(r['quantity'])}</td><td>{e(r['unit'])}</td>"
                   f'<td class="rb-num rb-old">{_v(r["old"])}</td>'
                   f'<td class="rb-num">{_v(r["new"])}</td>'
                   f'<td class="rb-num">{_v(r["change"], 4)}</td>'
                   f'<td class="rb-num">{_rel(r)}</td></tr>')
    return out


QHEAD = ["quantity", "unit", "old", "new", "change", "relative change"]


def _check_rows(entries: list[dict], eroding: bool = False) -> list[str]:
    out = []
    for c in entries:
        cls = ' class="rb-worse"' if c.get("worse") else ""
        limit = f"{e(c.get('relation') or '')} {_v(c.get('limit'))}".strip()
        if eroding:
            lost = f"{100 * c['shrink_fraction']:.0f} %"
            tail = (f'<td class="rb-num">{_v(c["old_margin"], 4)}</td>'
                    f'<td class="rb-num">{_v(c["new_margin"], 4)}</td>'
                    f'<td class="rb-num">{e(lost)}</td>')
        else:
            if c.get("worse"):
                mark = f'<span class="rb-fail">&#10007; {e(c["change"])}</span>'
            elif c["change"] == "fail -> pass":
                mark = f'<span class="rb-pass">&#10003; {e(c["change"])}</span>'
            else:
                mark = f'<span class="rb-tag">{e(c["change"])}</span>'
            tail = f"<td>{mark}</td>"
        out.append(f"<tr{cls}><td>{e(c['name'])}</td><td>{e(c['case'] or 'design')}</td>"
                   f'<td class="rb-num rb-old">{_v(c["old_value"])}</td>'
                   f'<td class="rb-num">{_v(c["new_value"])}</td><td class="rb-num">{limit}</td>'
                   f"<td>{e(c.get('unit') or '')}</td>{tail}</tr>")
    return out


def _figures(cmp: Comparison) -> str:
    """The overlay figures as one embedded Bokeh layout per section (empty without Bokeh)."""
    from bokeh.layouts import column, row

    from kit import plots
    from kit.panels import compare as cp

    parts = []
    fig, src = cp.layout_overlay_figure(cp.layout_extent(cmp))
    for k, d in cp.layout_overlay_data(cmp).items():
        plots.set_data(src[k], d)
    parts.append(("Both layouts", "Rotor hubs, part centres (when design files were given) and "
                  "the centre of mass of each revision, in the design frame.",
                  plots.embed_html(plots.in_document(fig))))
    rows = []
    names = cp.rotor_union(cmp)
    for c in cmp.cases:
        tf, ts = cp.thrust_overlay_figure(names, f"Thrust per rotor: {c['case']}")
        for k, d in cp.thrust_overlay_data(cmp, c["case"]).items():
            plots.set_data(ts[k], d)
        pf, ps = cp.poles_overlay_figure(f"Closed-loop poles: {c['case']}")
        for k, d in cp.poles_overlay_data(cmp, c["case"]).items():
            plots.set_data(ps[k], d)
        rows.append(row(tf, pf))
    if rows:
        parts.append(("Thrusts and closed-loop poles per case", "Old revision in sky blue, new "
                      "in vermillion; a case found in one revision only shows one set.",
                      plots.embed_html(plots.in_document(column(*rows)))))
    if cp.has_wheel_curves(cmp):
        wf, ws = cp.wheel_overlay_figure()
        for k, d in cp.wheel_overlay_data(cmp).items():
            plots.set_data(ws[k], d)
        parts.append(("Wheel trade curves", "The no-failure case's H2 ratio against wheel "
                      "momentum, LQR redesigned per momentum.",
                      plots.embed_html(plots.in_document(wf))))
    return "".join(f'<h3>{e(t)}</h3><p>{e(note)}</p><div class="rb-fig">{body}</div>'
                   for t, note, body in parts)


def render_comparison(cmp: Comparison, date: str | None = None, commit: str | None = None,
                      figures: bool = True) -> str:
    """The comparison record of two revisions, as one self-contained HTML page.

    Parameters
    ----------
    cmp : Comparison
        The two revisions compared.
    date : str or None
        ISO date shown in the header (default: today, UTC).
    commit : str or None
        The kit's git commit (default: looked up).
    figures : bool
        Embed the overlay figures (BokehJS inlined).
    """
    date = utc_date() if date is None else date
    commit = git_commit() if commit is None else commit
    o, n = cmp.old, cmp.new
    status = "worse" if cmp.worse else ("unchanged" if cmp.unchanged else "not-worse")
    figs = _figures(cmp) if figures else ""
    head_js = bokeh_head({"bokeh": True}) if figs else ""

    def side(label, rev):
        verdict = ('<span class="rb-pass">PASS</span>' if rev.verdict == "PASS"
                   else '<span class="rb-fail">FAIL</span>')
        return [(label, f"{e(rev.name)}, revision {e(rev.revision)} &#8212; "
                        f"{e(Path(rev.source).name)} ({e(rev.kind)}); verdict {verdict}"),
                (f"{label} file SHA-256", e(rev.file_sha256), "rb-mono")]

    verdict_cls = "rb-verdict rb-worse" if cmp.worse else "rb-verdict"
    sections = [f'<div class="{verdict_cls}" role="status"><strong>{e(cmp.verdict_text())}'
                f"</strong><br>{e(cmp.counts_text())}<br>exit status of "
                f"<code>rotorbook compare</code>: "
                f"{cmp.exit_status}{' (strict)' if cmp.strict else ''}</div>"]
    sections.append(f"<h2>Design checks whose verdict changed ({len(cmp.checks_changed)})</h2>")
    sections.append(_table(["check", "case", "old value", "new value", "limit", "unit",
                            "change"], _check_rows(cmp.checks_changed))
                    if cmp.checks_changed else '<p class="rb-none">none</p>')
    sections.append(f"<h2>Checks eroding while passing ({len(cmp.checks_eroding)})</h2>"
                    f"<p>Margin to the limit shrank by more than {e(f'{100 * cmp.erosion:g}')} "
                    "% of its old value.</p>")
    sections.append(_table(["check", "case", "old value", "new value", "limit", "unit",
                            "old margin", "new margin", "margin lost"],
                           _check_rows(cmp.checks_eroding, eroding=True))
                    if cmp.checks_eroding else '<p class="rb-none">none</p>')
    notes = [f"Two numbers count as the same when they differ by less than a relative "
             f"{e(num(1e-9))} or an absolute {e(num(1e-12))}.",
             "Parts and rotors are matched by name, cases by their failed rotors' names, "
             "checks by name and case; the order in the files plays no part.",
             "Relative change is (new \u2212 old) / |old|; a dash where old is zero or absent."]
    notes += [e(x) for x in ([cmp.inputs_note] if cmp.inputs_note else []) + list(cmp.notes)]
    sections.append('<h2>Notes</h2><ul class="rb-notes">'
                    + "".join(f"<li>{x}</li>" for x in notes) + "</ul>")
    # inputs
    irows = []
    for r in cmp.inputs:
        irows.append(f'<tr class="rb-changed"><td>{e(r["item"])}</td><td>{e(r["field"])}</td>'
                     f'<td><span class="rb-tag">{e(r["change"])}</span></td>'
                     f'<td class="rb-val rb-old">{_v(r["old"], 6)}</td>'
                     f'<td class="rb-val">{_v(r["new"], 6)}</td>'
                     f'<td class="rb-num">{_v(r["delta"], 4)}</td><td>{e(r["unit"])}</td></tr>')
    sections.append(f"<h2>Input changes ({len(cmp.inputs)})</h2>")
    sections.append(_table(["item", "field", "change", "old", "new", "difference", "unit"], irows)
                    if irows else '<p class="rb-none">none</p>')
    # mass properties, hover
    shift = cmp.com_shift_m
    shift_txt = ("" if shift is None else
                 f"<p>Centre-of-mass shift (new \u2212 old, design frame): {_v(shift, 6)} m, "
                 f"{e(num(math.sqrt(sum(s * s for s in shift)), 4))} m in all.</p>")
    sections.append("<h2>Mass properties</h2>" + shift_txt
                    + _table(QHEAD, _quantity_rows(cmp.mass_properties)))
    sections.append("<h2>Hover</h2>" + _table(QHEAD, _quantity_rows(cmp.hover)))
    # cases
    crows = []
    for c in cmp.cases:
        n_changed = sum(r["changed"] for r in c["rows"])
        tag = {"both": f"{n_changed} quantit{'y' if n_changed == 1 else 'ies'} changed",
               "appeared": "appeared in the new revision",
               "disappeared": "disappeared in the new revision"}[c["status"]]
        cls = ' class="rb-changed"' if c["changed"] else ""
        crows.append(f"<tr{cls}><td>{e(c['case'])}</td><td>{e(tag)}</td></tr>")
    sections.append("<h2>Cases</h2>" + _table(["case", "status"], crows))
    for c in cmp.cases:
        label = c["case"] + ("" if c["status"] == "both" else f" ({c['status']})")
        sections.append(f"<details{' open' if c['changed'] else ''}><summary>{e(label)}</summary>"
                        + _table(QHEAD, _quantity_rows(c["rows"])) + "</details>")
    if cmp.wheel:
        sections.append("<h2>Momentum wheel</h2>" + _table(QHEAD, _quantity_rows(cmp.wheel)))
    if figs:
        sections.append("<h2>Figures: old against new</h2>" + figs)
    title = f"{o.name} rev. {o.revision} \u2192 {n.name} rev. {n.revision}"
    kit_line = f"rotorbook {e(kit.__version__)}" + (
        f', commit <span class="rb-mono">{e(commit)}</span>' if commit else "")
    head = sheet_header("Rotorbook revision comparison", e(title),
                        side("Old", o) + side("New", n)
                        + [("Kit", kit_line), ("Date (UTC)", e(date))])
    foot = ('<p class="rb-foot">Made by rotorbook ' + e(kit.__version__) + " from two analyses. "
            "This page is self-contained: it loads nothing from the network.</p>")
    return html_page(f"Comparison \u2014 {title}",
                     f'{head}\n{"".join(sections)}\n{cautions_section(foot)}',
                     meta=[("rotorbook-comparison", status)], css=CSS, head_js=head_js)


def comparison_file_name(cmp: Comparison) -> str:
    """``compare_<old rev>_to_<new rev>.html`` with anything but letters, digits, '.', '-'
    replaced by '_'."""
    def safe(s: str) -> str:
        return re.sub(r"[^A-Za-z0-9.-]+", "_", s).strip("_")[:40] or "rev"

    return f"compare_{safe(cmp.old.revision)}_to_{safe(cmp.new.revision)}.html"


def write_comparison(cmp: Comparison, path: str | Path, force: bool = False,
                     date: str | None = None) -> Path:
    """Write the comparison record atomically; an existing file only with ``force``.

    Parameters
    ----------
    cmp : Comparison
        The two revisions compared.
    path : str or Path
        The HTML file to write.
    force : bool
        Replace an existing file.
    date : str or None
        ISO date of the header (default: today, UTC).
    """
    p = Path(path)
    if p.exists() and not force:
        raise RecordError(f"record exists: {p} -> use --force (force=True) to replace it")
    write_atomic(p, render_comparison(cmp, date=date))
    return p


def comparisons_section(links: list[tuple[str, str, str]]) -> str:
    """An index section linking comparison pages: (href, title, verdict text) each."""
    rows = "".join(f'<tr><td><a href="{e(href)}">{e(title)}</a></td><td>{e(verdict)}</td></tr>'
                   for href, title, verdict in links)
    return ('<section class="rb-comparisons"><h2>Comparison with the previous revision</h2>'
            '<table class="rb-checks"><thead><tr><th>Comparison</th><th>Verdict</th></tr>'
            f"</thead><tbody>{rows}</tbody></table></section>\n")


def add_to_index(index_path: str | Path, links: list[tuple[str, str, str]]) -> None:
    """Insert a comparisons section into a record folder's ``index.html``, before the cautions.

    Parameters
    ----------
    index_path : str or Path
        The index written by :func:`kit.record.render.record_design`.
    links : list of (href, title, verdict text)
        The comparison pages to link.
    """
    p = Path(index_path)
    text = p.read_text(encoding="utf-8")
    text = re.sub(r'<section class="rb-comparisons">.*?</section>\n', "", text, flags=re.S)
    marker = '<section class="rb-cautions">'
    if marker not in text:
        raise RecordError(f"{p}: not a rotorbook index (no cautions section)")
    write_atomic(p, text.replace(marker, comparisons_section(links) + marker, 1))


def record_previous(cmp: Comparison, out_dir: str | Path, force: bool = True) -> Path:
    """Write the comparison page into a record folder and link it from its index.

    Parameters
    ----------
    cmp : Comparison
        The previous revision (old) against the recorded one (new).
    out_dir : str or Path
        The record folder holding ``index.html``.
    force : bool
        Replace an existing comparison page of the same two revisions.
    """
    out = Path(out_dir)
    page = write_comparison(cmp, out / comparison_file_name(cmp), force=force)
    title = (f"{cmp.old.name} rev. {cmp.old.revision} \u2192 {cmp.new.name} rev. "
             f"{cmp.new.revision}")
    index = out / "index.html"
    if index.exists():
        add_to_index(index, [(page.name, title, cmp.verdict_text())])
    return page
