"""The revision history of a design folder (the folder ``rotorbook new`` makes).

The folder holds its design file (``DIR/<design>.toml``, the one its workbooks read) and, in
``DIR/revisions/``, a copy of every revision in order: ``01-<revision>.toml``,
``02-<revision>.toml``, ... with the JSON of each one's analysis beside it
(``NN-<revision>.analysis.json``, reused while the design file's SHA-256 matches). Adding a
revision copies the new file in as the next number and makes it the folder's design file; the
folder's ``compare_revisions`` workbook is pointed at the revision before it.

:func:`write_history` then writes ``DIR/revisions/index.html``: the revisions in order with
each one's verdict, and a comparison record (:mod:`kit.record.compare_page`) between every
two consecutive revisions, linked from the index.
"""

from __future__ import annotations

import html
import json
import re
import shutil
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import kit
from kit.errors import DesignWarning, RecordError
from kit.fileio import write_atomic
from kit.record.render import cautions_section, html_page, sheet_header, utc_date

REVISIONS = "revisions"
_NUMBERED = re.compile(r"^(\d{2,})-.*\.toml$")

e = html.escape


@dataclass(frozen=True)
class HistoryEntry:
    """One revision of the folder: its number, file, design and analysis JSON."""

    number: int
    path: Path
    design: object
    analysis: dict

    @property
    def verdict(self) -> str:
        from kit.compare import Revision

        return Revision(str(self.path), self.design.sha256, "design", self.analysis,
                        self.design).verdict


@dataclass(frozen=True)
class HistoryResult:
    """What :func:`write_history` wrote."""

    index_path: Path
    entries: tuple[HistoryEntry, ...]
    comparisons: tuple[tuple[Path, str], ...] = ()
    messages: tuple[str, ...] = field(default=())

    def lines(self) -> list[str]:
        out = list(self.messages)
        for en in self.entries:
            out.append(f"revision {en.number:02d} ({en.design.revision}): {en.verdict}  "
                       f"{en.path.name}")
        for page, verdict in self.comparisons:
            out.append(f"  {page.name}: {verdict}")
        out.append(f"history: {self.index_path}")
        return out


def _safe(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9.-]+", "_", text).strip("_")[:40] or "rev"


def _load(path: Path):
    from kit.design import load

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DesignWarning)
        return load(path)


def folder_design(folder: Path) -> Path:
    """The folder's own design file: the one ``*.toml`` at its top level."""
    found = sorted(folder.glob("*.toml"))
    if not folder.is_dir() or len(found) != 1:
        raise RecordError(f"{folder}: not a design folder (expected exactly one design .toml at "
                          "its top; make one with `rotorbook new DIR --from DESIGN`)")
    return found[0]


def revision_files(folder: Path) -> list[tuple[int, Path]]:
    """The numbered revision files of a folder, in order."""
    rdir = Path(folder) / REVISIONS
    out = []
    for p in rdir.glob("*.toml") if rdir.is_dir() else []:
        m = _NUMBERED.match(p.name)
        if m:
            out.append((int(m.group(1)), p))
    return sorted(out)


def point_compare_workbook(folder: Path, previous: Path) -> bool:
    """Set ``PREVIOUS_PATH`` of the folder's ``compare_revisions.ipynb`` (when it has one) to
    ``previous``, relative to the folder; its stored outputs of that cell are cleared."""
    import nbformat

    from kit.record import execute as _ex

    path = folder / "compare_revisions.ipynb"
    if not path.is_file():
        return False
    nb = nbformat.read(path, as_version=4)
    cell = nb.cells[_ex.parameters_index(nb)]
    rel = previous.relative_to(folder).as_posix()
    line = f"PREVIOUS_PATH = {json.dumps(rel)}"
    src, n = re.subn(r"(?m)^PREVIOUS_PATH\s*=.*$", lambda _m: line, cell.source)
    if not n:
        return False
    cell.source = src
    if cell.cell_type == "code":
        cell.outputs = []
        cell.execution_count = None
    write_atomic(path, nbformat.writes(nb) + "\n")
    return True


def seed(folder: str | Path) -> Path | None:
    """Start the history of a folder with its design file as revision 01 (once)."""
    folder = Path(folder)
    if revision_files(folder):
        return None
    design_file = folder_design(folder)
    d = _load(design_file)
    target = folder / REVISIONS / f"01-{_safe(d.revision)}.toml"
    target.parent.mkdir(parents=True, exist_ok=True)
    shutil.copy2(design_file, target)
    point_compare_workbook(folder, target)
    return target


def add_revision(folder: str | Path, design_path: str | Path, force: bool = False) -> str:
    """Copy a design file in as the folder's next revision and make it the folder's design.

    Parameters
    ----------
    folder : str or Path
        A folder made by ``rotorbook new``.
    design_path : str or Path
        The new revision's design file (validated first).
    force : bool
        Accept a design whose name differs from the folder's.

    Returns
    -------
    str
        A line saying what was done.
    """
    folder = Path(folder)
    src = Path(design_path)
    d = _load(src)  # DesignError for an invalid file
    seed(folder)
    current = folder_design(folder)
    known = revision_files(folder)
    last_no, last = known[-1]
    last_d = _load(last)
    if d.sha256 == last_d.sha256:
        return f"{src}: same file as revision {last_no:02d}, not added"
    if d.name != last_d.name and not force:
        raise RecordError(f"{src}: design name {d.name!r} differs from the folder's "
                          f"{last_d.name!r} -> add a revision of the same design, or --force")
    target = folder / REVISIONS / f"{last_no + 1:02d}-{_safe(d.revision)}.toml"
    shutil.copyfile(src, target)
    if src.resolve() != current.resolve():
        shutil.copyfile(src, current)
    point_compare_workbook(folder, last)
    return f"{src}: added as revision {last_no + 1:02d}"


def _cache_matches(data, design) -> bool:
    """Whether a cached analysis is this file's, by this kit, and readable as a whole (a
    cache that is not is computed again)."""
    from kit.compare import analysis_problems

    return (isinstance(data, dict) and isinstance(data.get("design"), dict)
            and data["design"].get("sha256") == design.sha256
            and data.get("kit_version") == kit.__version__
            and isinstance(data.get("checks"), list) and isinstance(data.get("cases"), list)
            and not analysis_problems(data))


def _analysis(path: Path, design) -> dict:
    """The revision's analysis JSON, from its cache file while the SHA-256 matches."""
    cache = path.with_name(path.stem + ".analysis.json")
    if cache.exists():
        try:
            data = json.loads(cache.read_text(encoding="utf-8"))
            if _cache_matches(data, design):
                return data
        except (OSError, ValueError):  # unreadable or not JSON: computed again below
            pass
    from kit.analysis.report import analyze

    data = analyze(design).to_dict()
    write_atomic(cache, json.dumps(data, indent=1) + "\n")
    return data


def write_history(folder: str | Path, add=(), force: bool = False,
                  date: str | None = None) -> HistoryResult:
    """Add revisions (optional), then write the history index and consecutive comparisons.

    Parameters
    ----------
    folder : str or Path
        A folder made by ``rotorbook new``.
    add : sequence of str or Path
        Design files to add, in order, as the next revisions.
    force : bool
        Accept designs whose name differs from the folder's.
    date : str or None
        ISO date shown on the pages (default: today, UTC).
    """
    from kit.compare import compare, revision_from_design
    from kit.record.compare_page import write_comparison

    folder = Path(folder)
    folder_design(folder)
    messages = [add_revision(folder, p, force=force) for p in add]
    seed(folder)
    date = utc_date() if date is None else date
    entries = []
    for number, path in revision_files(folder):
        d = _load(path)
        entries.append(HistoryEntry(number, path, d, _analysis(path, d)))
    comparisons = []
    revs = [revision_from_design(en.design, en.analysis, source=str(en.path))
            for en in entries]
    for k in range(1, len(entries)):
        cmp = compare(revs[k - 1], revs[k])
        page = folder / REVISIONS / (f"compare_{entries[k - 1].number:02d}_to_"
                                     f"{entries[k].number:02d}.html")
        write_comparison(cmp, page, force=True, date=date)
        comparisons.append((page, cmp.verdict_text()))
    index = folder / REVISIONS / "index.html"
    write_atomic(index, render_history(entries, comparisons, date))
    return HistoryResult(index, tuple(entries), tuple(comparisons), tuple(messages))


def render_history(entries, comparisons, date: str) -> str:
    """``revisions/index.html``: every revision in order, its verdict and the comparisons."""
    rows = []
    for k, en in enumerate(entries):
        checks = [c for c in en.analysis.get("checks") or [] if isinstance(c, dict)]
        passed = sum(c.get("passed") is True for c in checks)
        verdict = en.verdict
        vcls = "rb-pass" if verdict == "PASS" else "rb-fail"
        link = "\u2013"
        if k > 0:
            page, text = comparisons[k - 1]
            link = f'<a href="{e(page.name)}">from revision {entries[k - 1].number:02d}</a>: ' \
                   f"{e(text)}"
        rows.append(f"<tr><td>{en.number:02d}</td><td>{e(en.design.revision)}</td>"
                    f'<td><a href="{e(en.path.name)}">{e(en.path.name)}</a></td>'
                    f'<td class="rb-mono">{e(en.design.sha256[:16])}</td>'
                    f'<td><span class="{vcls}">{e(verdict)}</span> ({passed} of {len(checks)} '
                    f"checks met)</td><td>{link}</td></tr>")
    name = entries[-1].design.name if entries else ""
    head = sheet_header("Rotorbook revision history", e(name),
                        [("Revisions", str(len(entries))),
                         ("Latest", e(entries[-1].design.revision) if entries else ""),
                         ("Kit", f"rotorbook {e(kit.__version__)}"), ("Date (UTC)", e(date))])
    return html_page(f"Revisions \u2014 {name}", f"""{head}
<table class="rb-checks">
<thead><tr><th>#</th><th>Revision</th><th>Design file</th><th>SHA-256 (first 16)</th>
<th>Verdict</th><th>Comparison with the one before</th></tr></thead>
<tbody>
{"".join(rows)}
</tbody>
</table>
{cautions_section()}""")
