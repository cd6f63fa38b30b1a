"""Bokeh figures of the panels: our palette and look, figure builders, and static embedding.

Every figure is built once around named :class:`~bokeh.models.ColumnDataSource` objects; a panel
updates it by replacing ``source.data`` with a dict from one of the ``*_data`` functions here
(pure: analysis result in, plain lists out, numbers rounded to :data:`SIG` significant figures
so stored outputs do not carry float noise). :func:`embed_html` writes a layout as one HTML
fragment (a ``div`` and a ``script`` calling ``Bokeh.embed.embed_items``) that works the same
live in JupyterLab (inside an ``ipywidgets.Output``) and in a static record, where the record
template embeds BokehJS once. Element and document ids are numbered per process (``rb-fig-N``,
``rb-doc-N``) and Bokeh's model ids are its simple ids, so the same workbook run gives the same
text. Nothing here computes physics.

Colours: the categorical palette of Okabe & Ito, "Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people" (2008), and the sequential
"iridescent" scheme of P. Tol, "Colour Schemes", SRON technical note SRON/EPS/TN/09-002
(issue 3.2, 2021) for maps, with Tol's grey for missing data.
"""

from __future__ import annotations

import html
import itertools
import json
import math

import numpy as np

from kit.analysis.htmltable import num

#: Okabe-Ito colours (Okabe & Ito 2008), by name.
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7",
}
#: Paul Tol's sequential "iridescent" scheme (SRON/EPS/TN/09-002, fig. 20), light to dark.
TOL_IRIDESCENT = (
    "#FEFBE9", "#FCF7D5", "#F5F3C1", "#EAF0B5", "#DDECBF", "#D0E7CA", "#C2E3D2", "#B5DDD8",
    "#A8D8DC", "#9BD2E1", "#8DCBE4", "#81C4E7", "#7BBCE7", "#7EB2E4", "#88A5DD", "#9398D2",
    "#9B8AC4", "#9D7DB2", "#9A709E", "#906388", "#805770", "#684957", "#46353A",
)
#: Tol's colour for missing data (no equilibrium, no stabilising loop).
MISSING = "#999999"

#: Roles of the colours in every panel, so one meaning keeps one colour.
COLOURS = {
    "ccw": OKABE_ITO["blue"], "cw": OKABE_ITO["vermillion"], "failed": MISSING,
    "limit": OKABE_ITO["black"], "threshold": OKABE_ITO["orange"], "com": OKABE_ITO["black"],
    "wheel": OKABE_ITO["purple"], "closed_loop": OKABE_ITO["blue"],
    "open_loop": OKABE_ITO["vermillion"], "marker": OKABE_ITO["vermillion"],
    "flag": OKABE_ITO["orange"], "fixed_gain": OKABE_ITO["sky_blue"],
    "axes": (OKABE_ITO["orange"], OKABE_ITO["green"], OKABE_ITO["purple"]),
    "series": (OKABE_ITO["blue"], OKABE_ITO["vermillion"], OKABE_ITO["green"],
               OKABE_ITO["orange"], OKABE_ITO["purple"], OKABE_ITO["sky_blue"],
               OKABE_ITO["yellow"], OKABE_ITO["black"]),
}
#: Significant figures of the numbers written into figure data.
SIG = 6
#: Font of titles and axis labels.
FONT = "Helvetica, Arial, sans-serif"
TOOLS = "pan,wheel_zoom,box_zoom,reset,save"

_IDS = itertools.count(1)


# --- numbers --------------------------------------------------------------------------------


def rounded(values, sig: int = SIG) -> list[float]:
    """``values`` as a list of floats with ``sig`` significant figures (nan kept)."""
    a = np.asarray(values, float).ravel()
    out = []
    for v in a.tolist():
        if v == 0 or not math.isfinite(v):
            out.append(v)
        else:
            out.append(float(f"{v:.{sig}g}"))
    return out


def fmt(x, sig: int = 3, unit: str = "") -> str:
    """A readout: ``sig`` significant figures, the unit after a space; a dash for None/nan."""
    s = num(x, sig)
    finite = x is not None and not isinstance(x, bool | np.bool_) and math.isfinite(float(x))
    return f"{s} {unit}" if unit and finite else s


# --- look -----------------------------------------------------------------------------------


def new_figure(title: str, x_label: str, y_label: str, width: int = 360, height: int = 300,
               **kw):
    """A figure in our look: light grid, no outline, titles left-aligned in our font."""
    from bokeh.plotting import figure

    p = figure(title=title, width=width, height=height, tools=TOOLS,
               toolbar_location="right", **kw)
    p.toolbar.logo = None
    p.title.text_font = FONT
    p.title.text_font_size = "12px"
    p.title.text_font_style = "bold"
    p.title.text_color = "#222222"
    p.outline_line_color = None
    p.background_fill_color = "#FCFCFA"
    p.border_fill_color = "#FFFFFF"
    p.min_border_left = 50
    for ax in (p.xaxis, p.yaxis):
        ax.axis_label_text_font = FONT
        ax.axis_label_text_font_style = "normal"
        ax.axis_label_text_font_size = "11px"
        ax.major_label_text_font_size = "10px"
        ax.axis_line_color = "#555555"
        ax.major_tick_line_color = "#555555"
        ax.minor_tick_line_color = None
    p.xaxis.axis_label = x_label
    p.yaxis.axis_label = y_label
    p.grid.grid_line_color = "#E4E4E0"
    p.grid.grid_line_dash = [2, 3]
    return p


def _legend_style(p, location="top_right") -> None:
    if p.legend:
        p.legend.location = location
        p.legend.label_text_font = FONT
        p.legend.label_text_font_size = "10px"
        p.legend.background_fill_alpha = 0.8
        p.legend.border_line_color = None
        p.legend.padding = 4
        p.legend.spacing = 0


def _legend_below(p) -> None:
    """The legend outside the plot area, below it, in one row, so it never hides data."""
    _legend_style(p)
    if p.legend:
        p.legend.orientation = "horizontal"
        p.add_layout(p.legend[0], "below")


def _legend_right(p) -> None:
    """The legend outside the plot area, on its right, so it never hides data."""
    _legend_style(p)
    if p.legend:
        p.add_layout(p.legend[0], "right")


def _anchor(p, s: dict, x: str = "re", y: str = "im") -> None:
    """An invisible point at the origin, so an empty figure keeps its axes (ranges)."""
    s["anchor"] = _source(**{x: [0.0], y: [0.0]})
    p.scatter(x=x, y=y, source=s["anchor"], size=1, alpha=0.0)


def add_notice(p):
    """A message box over a figure's plot area (empty, hidden until :func:`set_notice`)."""
    from bokeh.models import Label

    label = Label(x=12, y=12, x_units="screen", y_units="screen", text="", visible=False,
                  text_font=FONT, text_font_size="12px", text_color="#222222",
                  background_fill_color="#FBEFE6", background_fill_alpha=0.95,
                  border_line_color=COLOURS["cw"], border_line_width=1, padding=6)
    p.add_layout(label)
    return label


def set_notice(label, text: str) -> None:
    """Show ``text`` over the figure (an empty text hides the box); no event when unchanged."""
    text = str(text or "")
    if label.text != text:
        label.text = text
    if label.visible != bool(text):
        label.visible = bool(text)


def show_legend_item(p, label: str, shown: bool) -> None:
    """Show a legend entry only while what it names is drawn."""
    for leg in p.legend:
        for item in leg.items:
            lab = item.label
            name = lab.get("value") if isinstance(lab, dict) else getattr(lab, "value", lab)
            if name == label and item.visible != shown:
                item.visible = shown


def nice_step(span: float, ticks: int = 5) -> float:
    """A step of 1, 2, 2.5 or 5 times a power of ten, near ``span / ticks``."""
    raw = abs(float(span)) / max(ticks, 1)
    if not math.isfinite(raw) or raw <= 0:
        return 1.0
    mag = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 2.5, 5.0, 10.0):
        if m * mag >= raw:
            return m * mag
    return 10.0 * mag


def nice_bounds(values, pad: float = 0.05, start: float | None = None,
                symmetric: bool = False) -> tuple[float, float] | None:
    """Bounds of a range holding every finite value, padded and rounded out to a nice step.

    Rounding out to the step of :func:`nice_step` keeps the range (and the axis) unchanged
    while the data move within it, so a figure is not laid out again for small changes.
    ``start`` fixes the lower bound (a bar chart from 0); ``symmetric`` centres the range on 0.
    None when there is no finite value (the caller keeps the range it has).
    """
    a = np.asarray([v for v in values if v is not None], float).ravel()
    a = a[np.isfinite(a)]
    if start is not None:
        a = np.append(a, float(start))
    if not a.size:
        return None
    lo, hi = float(a.min()), float(a.max())
    if symmetric:
        hi = max(abs(lo), abs(hi))
        lo = -hi
    span = hi - lo
    if span <= 0:
        span = abs(hi) * 0.2 or 1.0
        lo, hi = lo - 0.5 * span, hi + 0.5 * span
    step = nice_step(span * (1 + 2 * pad))
    out_lo = float(start) if start is not None else math.floor((lo - pad * span) / step) * step
    out_hi = math.ceil((hi + pad * span) / step) * step
    if out_hi <= out_lo:
        out_hi = out_lo + step
    return float(f"{out_lo:.{SIG}g}"), float(f"{out_hi:.{SIG}g}")


def fit_axes(fig, axis: str, columns, pad: float = 0.05, start: float | None = None,
             symmetric: bool = False) -> None:
    """Let ``fig``'s ``axis`` ("x", "y", or "xy" for one range shared by both axes of a
    square frame) follow the data of ``columns``, a list of (source, column name) pairs.

    The range is a ``Range1d`` set in the kernel by :func:`refit` in the same document change
    as the data (one message, one repaint), instead of a ``DataRange1d`` that the page would
    recompute after drawing (a second layout and repaint, and a message back to the kernel).
    """
    spec = dict(getattr(fig, "_rb_fit", None) or {})
    spec[axis] = (list(columns), pad, start, symmetric)
    fig._rb_fit = spec


def refit(fig) -> None:
    """Set the ranges declared by :func:`fit_axes` from the sources' current data.

    Nothing changes where the rounded bounds are the same (no event, no new layout), nor
    where there is no finite value (an empty figure keeps its axes).
    """
    for axis, (columns, pad, start, symmetric) in (getattr(fig, "_rb_fit", None) or {}).items():
        values: list = []
        for src, col in columns:
            for v in src.data.get(col, ()):
                if isinstance(v, list | tuple | np.ndarray):
                    values.extend(np.asarray(v, float).ravel().tolist())
                else:
                    values.append(v)
        b = nice_bounds(values, pad, start, symmetric)
        if b is None:
            continue
        for rng in ((fig.x_range, fig.y_range) if axis == "xy" else
                    (fig.x_range if axis == "x" else fig.y_range,)):
            if (rng.start, rng.end) != b:
                rng.update(start=b[0], end=b[1])


def _source(**cols):
    from bokeh.models import ColumnDataSource

    return ColumnDataSource(data={k: list(v) for k, v in cols.items()})


# --- embedding ------------------------------------------------------------------------------


def _js_json(obj) -> str:
    """JSON safe to place inside a ``<script>`` (no ``</script>``, no HTML entities)."""
    text = json.dumps(obj, separators=(",", ":"), allow_nan=False)
    return (text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))


def bokehjs_url_path() -> str:
    """Path (under the Jupyter server's base URL) where :mod:`kit.panels.serve` serves BokehJS."""
    import bokeh

    return f"rotorbook/bokehjs/{bokeh.__version__}/bokeh.min.js"


#: JavaScript: in a Jupyter page, stop BokehJS documents from passing the changes they applied
#: from the kernel (``sync: false``) to their change listeners. jupyter_bokeh's view sends every
#: change it hears back to the kernel, so without this each figure patch comes back as one
#: message per changed property (the whole data again), each also a busy/idle pair of kernel
#: status messages; Bokeh's own server session drops these changes the same way. A listener
#: with ``rb_all_events = true`` (the latency harness of the browser tests) still hears them.
QUIET_PATCHES_JS = (
    "function rbQuietPatches() {"
    "const B = window.Bokeh; if (B === undefined || !B.require) return;"
    "let D; try {D = B.require('document').Document;} catch (e) {return;}"
    "if (D.prototype.rbQuiet) return;"
    "const trigger = D.prototype._trigger_on_change;"
    "D.prototype._trigger_on_change = function (event) {"
    "const inner = event && Array.isArray(event.events) ? event.events : [event];"
    "if (!inner.length || !inner.every((e) => e && e.sync === false))"
    " return trigger.call(this, event);"
    "const all = this._callbacks; if (!(all instanceof Map)) return trigger.call(this, event);"
    "this._callbacks = new Map(Array.from(all).filter(([cb]) => cb.rb_all_events));"
    "try {return trigger.call(this, event);} finally {this._callbacks = all;}};"
    "D.prototype.rbQuiet = true;}"
)


def loader_js() -> str:
    """JavaScript that loads BokehJS once from the local installation through the Jupyter server.

    It does nothing when BokehJS is already there (a record embeds it) or when the page is not
    a Jupyter page (no ``jupyter-config-data``), so it never fetches anything in a record. In a
    Jupyter page it also installs :data:`QUIET_PATCHES_JS` once BokehJS is there.
    """
    path = json.dumps(bokehjs_url_path())
    return (
        f"{QUIET_PATCHES_JS}"
        "if (document.getElementById('jupyter-config-data')) rbQuietPatches();"
        "if (window.Bokeh === undefined && !window.rbBokehLoading) {"
        "const cfg = document.getElementById('jupyter-config-data');"
        "if (cfg) {window.rbBokehLoading = true;"
        "let base = '/'; try {base = JSON.parse(cfg.textContent).baseUrl || '/';} catch (e) {}"
        "const s = document.createElement('script');"
        f"s.src = base.replace(/\\/?$/, '/') + {path};"
        "s.onload = rbQuietPatches;"
        "s.onerror = function () {window.rbBokehLoading = false;"
        "console.warn('rotorbook: BokehJS is not served by this Jupyter server');};"
        "document.head.appendChild(s);}}"
    )


class Embedder:
    """Static HTML of one Bokeh layout, serialising the document once.

    Bokeh's full serialisation costs tens of milliseconds per figure; after the first one only
    the data of sources that changed is encoded again and put into the stored document JSON.
    A change to any other property (a title, a colour range) makes the next call serialise the
    whole document again. Changes are followed through ``Document.on_change``.
    """

    def __init__(self, model) -> None:
        from bokeh.document import Document

        if model.document is None:
            Document().add_root(model)
        self.model = model
        self._json: dict | None = None
        self._sources: dict = {}
        self._dirty: set = set()
        model.document.on_change(self._on_change)

    def _on_change(self, event) -> None:
        from bokeh.models import ColumnDataSource

        m = getattr(event, "model", None)
        if isinstance(m, ColumnDataSource) and getattr(event, "attr", "data") == "data":
            self._dirty.add(m.id)
        else:
            self._json = None

    def doc_json(self) -> dict:
        from bokeh.core.serialization import Serializer

        doc = self.model.document
        if self._json is None:
            self._json = doc.to_json(deferred=False)
            self._sources = {}
            _index_sources(self._json, self._sources)
            self._dirty.clear()
        elif self._dirty:
            ser = Serializer(deferred=False)
            for mid in self._dirty:
                src = doc.get_model_by_id(mid)
                if src is None or mid not in self._sources:
                    self._json = None
                    return self.doc_json()
                self._sources[mid]["data"] = ser.encode(src.data)
            self._dirty.clear()
        return self._json

    def html(self) -> str:
        return embed_html(self.model, self.doc_json())


def _index_sources(obj, out: dict) -> None:
    """Map ColumnDataSource ids to their ``attributes`` dicts inside a document's JSON."""
    if isinstance(obj, dict):
        if obj.get("name") == "ColumnDataSource" and "attributes" in obj:
            out[obj["id"]] = obj["attributes"]
        for v in obj.values():
            _index_sources(v, out)
    elif isinstance(obj, list):
        for v in obj:
            _index_sources(v, out)


#: Shown in place of a stored figure until its script runs: JupyterLab runs the scripts of
#: stored outputs only in a trusted notebook.
UNTRUSTED_NOTICE = ("This figure is drawn by a script, and JupyterLab runs the scripts of stored "
                    "outputs only in a trusted notebook: run the workbook (Run > Run All Cells) "
                    "or trust it (command palette: Trust Notebook, or `jupyter trust` on the file) "
                    "to see it.")


def embed_html(model, doc_json: dict | None = None) -> str:
    """One HTML fragment rendering ``model`` (a figure or layout).

    ``doc_json`` is the document's JSON when the caller has it (:class:`Embedder`). The
    document JSON sits on its own line (``const docs_json = ...;``) so a notebook sanitiser can
    replace it whole. The figure waits up to 15 s for BokehJS, then says it is missing.
    """
    from bokeh.document import Document

    if doc_json is None:
        doc = model.document
        if doc is None:
            doc = Document()
            doc.add_root(model)
        doc_json = doc.to_json(deferred=False)
    n = next(_IDS)
    docid, elid = f"rb-doc-{n}", f"rb-fig-{n}"
    docs_json = {docid: doc_json}
    items = [{"docid": docid, "roots": {model.id: elid}, "root_ids": [model.id]}]
    missing = html.escape("This figure needs BokehJS: open the workbook in JupyterLab started "
                          "with `make lab` (it serves BokehJS from the local installation).")
    return (
        f'<div id="{elid}-untrusted" class="rb-untrusted" style="border-left: 4px solid '
        '#D55E00; background: #FBEFE6; padding: 4px 8px; margin: 4px 0; font-family: '
        f'Helvetica, Arial, sans-serif; font-size: 12px;">{html.escape(UNTRUSTED_NOTICE)}</div>\n'
        f'<div id="{elid}" class="rb-figure" data-root-id="{model.id}" '
        'style="display: contents;"></div>\n'
        '<script type="text/javascript">\n(function () {\n'
        f"const note = document.getElementById({json.dumps(elid + '-untrusted')});\n"
        "if (note) note.remove();\n"
        f"const docs_json = {_js_json(docs_json)};\n"
        f"const render_items = {_js_json(items)};\n"
        f"{loader_js()}\n"
        f"{_TEARDOWN_JS}\n"
        f"function embed_once() {{ rbEmbed({json.dumps(elid)}, docs_json, render_items); }}\n"
        "let tries = 0;\n"
        "(function wait() {\n"
        "  if (window.Bokeh !== undefined && window.Bokeh.embed !== undefined) {\n"
        "    embed_once(); return; }\n"
        "  if (++tries > 300) {\n"
        f"    const el = document.getElementById({json.dumps(elid)});\n"
        f"    if (el) {{ el.textContent = {json.dumps(missing)}; el.style.display = 'block'; }}\n"
        "    return; }\n"
        "  setTimeout(wait, 50);\n"
        "})();\n})();\n</script>"
    )


#: Page-side bookkeeping: a panel redraw replaces its figures' elements, so before embedding,
#: the documents and views of figures whose element has left the page are torn down (BokehJS
#: keeps every embedded document in ``Bokeh.documents`` otherwise). Guarded: a BokehJS without
#: these members just skips the clean-up.
_TEARDOWN_JS = """\
function rbEmbed(elid, docs_json, render_items) {
  const B = window.Bokeh;
  const reg = (window.__rotorbookFigures = window.__rotorbookFigures || {});
  for (const id of Object.keys(reg)) {
    if (document.getElementById(id)) continue;
    const rec = reg[id];
    try {
      for (const vm of rec.views || []) {
        const roots = vm && vm.roots ? Array.from(vm.roots) : [];
        for (const v of roots) { if (v && typeof v.remove === "function") v.remove(); }
      }
    } catch (e) { /* older BokehJS: leave the views */ }
    try {
      const i = B.documents.indexOf(rec.doc);
      if (i >= 0) B.documents.splice(i, 1);
    } catch (e) { /* no documents list */ }
    delete reg[id];
  }
  const rootId = render_items[0].root_ids[0];
  Promise.resolve(window.Bokeh.embed.embed_items(docs_json, render_items)).then((views) => {
    let doc;
    try {
      doc = B.documents.find((d) => d.get_model_by_id && d.get_model_by_id(rootId));
    } catch (e) { doc = undefined; }
    reg[elid] = {doc: doc, views: Array.isArray(views) ? views : [views]};
    window.__rotorbookEmbeds = (window.__rotorbookEmbeds || 0) + 1;  // redraw counter
  });
}"""


def in_document(model):
    """Put ``model`` in a Document of its own (once, at build time) and return it."""
    from bokeh.document import Document

    if model.document is None:
        Document().add_root(model)
    return model


def set_data(source, data: dict) -> None:
    """Replace a source's data with a new dict (one change event, as STYLE.md asks).

    Nothing is sent when the data is the same as before (no redraw for no change).
    """
    new = dict(data)
    old = source.data
    if set(old) == set(new) and all(_same_column(old[k], v) for k, v in new.items()):
        return
    source.data = new


def _same_column(a, b) -> bool:
    """Whether two data columns hold the same values (nan equal to nan)."""
    a, b = list(a), list(b)
    if len(a) != len(b):
        return False
    for x, y in zip(a, b, strict=True):
        if x != y and not (isinstance(x, float) and isinstance(y, float)
                           and math.isnan(x) and math.isnan(y)):
            return False
    return True


# --- overview: top view ---------------------------------------------------------------------


def top_view_figure(extent_m: float, wheel: bool = True):
    """Top view of the layout: forward (x_B) up the page, right (-y_B) to the right, in m.

    Plot coordinates are ``(-y_B, x_B)``, a proper rotation, so counter-clockwise about +z_B
    (seen from above) is counter-clockwise on the page.
    """
    from bokeh.core.properties import value
    from bokeh.models import LabelSet, Range1d

    e = float(extent_m)
    p = new_figure("Layout seen from above", "right, \u2212y_B (m)", "forward, x_B (m)",
                   width=520, height=380, match_aspect=True,
                   x_range=Range1d(-e, e), y_range=Range1d(-e, e))
    s = {
        "rotors": _source(sx=[], sy=[], r=[], name=[], colour=[], spin=[], label_sy=[]),
        "arrows": _source(sx=[], sy=[], r=[], start=[], end=[], colour=[]),
        "heads": _source(sx=[], sy=[], angle=[], colour=[]),
        "com": _source(sx=[], sy=[]),
        "axes": _source(xs=[], ys=[], colour=[], name=[]),
        "wheel": _source(sx=[], sy=[], r=[]),
    }
    p.circle(x="sx", y="sy", radius="r", source=s["rotors"], fill_color="colour",
             fill_alpha=0.12, line_color="colour", line_width=1.5, legend_field="spin")
    p.arc(x="sx", y="sy", radius="r", start_angle="start", end_angle="end", source=s["arrows"],
          line_color="colour", line_width=2)
    p.scatter(x="sx", y="sy", angle="angle", source=s["heads"], marker="triangle", size=9,
              fill_color="colour", line_color="colour")
    # text_font is a data spec on a LabelSet: a bare string would name a column
    p.add_layout(LabelSet(x="sx", y="label_sy", text="name", source=s["rotors"],
                          text_font_size=value("10px"), text_align="center",
                          text_font=value(FONT)))
    p.multi_line(xs="xs", ys="ys", source=s["axes"], line_color="colour", line_width=2,
                 legend_field="name")
    if wheel:  # drawn (and in the legend) only for a design with a wheel
        p.circle(x="sx", y="sy", radius="r", source=s["wheel"], fill_color=COLOURS["wheel"],
                 fill_alpha=0.35, line_color=COLOURS["wheel"], legend_label="wheel")
    p.scatter(x="sx", y="sy", source=s["com"], marker="circle_cross", size=14,
              fill_color="white", line_color=COLOURS["com"], line_width=2,
              legend_label="centre of mass")
    _legend_style(p, "bottom_left")
    # outside the plot area, so that it never hides a rotor; a square frame keeps discs round
    p.add_layout(p.legend[0], "right")
    p.frame_width = p.frame_height = 330
    return p, s


def top_view_data(design, mp) -> dict[str, dict]:
    """Source data of :func:`top_view_figure` from a design and its mass properties.

    Positions are about the centre of mass (as the analysis uses them), in m; the principal
    axes are drawn by their projection on the x-y plane.
    """
    pos = mp.rotor_positions_m
    sx, sy = -pos[:, 1], pos[:, 0]
    span = float(np.max(np.linalg.norm(pos[:, :2], axis=1))) if len(pos) else 0.1
    r_disc = np.array([0.5 * (r.diameter_m if r.diameter_m else 0.3 * span)
                       for r in design.rotors])
    colour = [COLOURS["ccw"] if r.spin > 0 else COLOURS["cw"] for r in design.rotors]
    spin = ["ccw (+z)" if r.spin > 0 else "cw (\u2212z)" for r in design.rotors]
    r_arrow = 0.6 * r_disc
    a0, a1 = math.radians(30.0), math.radians(300.0)
    hx, hy, ang = [], [], []
    for x0, y0, ra, r in zip(sx, sy, r_arrow, design.rotors, strict=True):
        tip = a1 if r.spin > 0 else a0
        hx.append(x0 + ra * math.cos(tip))
        hy.append(y0 + ra * math.sin(tip))
        # the triangle points up at angle 0; turn it along the direction of rotation
        ang.append(tip if r.spin > 0 else tip - math.pi)
    L = 0.8 * span
    axes_x, axes_y = [], []
    for k in range(3):
        a = mp.principal_axes[:, k]
        axes_x.append(rounded([L * a[1], -L * a[1]]))
        axes_y.append(rounded([-L * a[0], L * a[0]]))
    names = [f"{n} axis, {fmt(m, 3)} kg m\u00b2" for n, m in
             zip(("minor", "intermediate", "major"), mp.principal_moments_kg_m2, strict=True)]
    wheel: dict[str, list] = {"sx": [], "sy": [], "r": []}
    if mp.wheel_position_m is not None:
        wheel = {"sx": rounded([-mp.wheel_position_m[1]]), "sy": rounded([mp.wheel_position_m[0]]),
                 "r": rounded([0.15 * span])}
    return {
        "rotors": {"sx": rounded(sx), "sy": rounded(sy), "r": rounded(r_disc),
                   "name": list(design.rotor_names), "colour": colour, "spin": spin,
                   "label_sy": rounded(sy + r_disc + 0.04 * span)},
        "arrows": {"sx": rounded(sx), "sy": rounded(sy), "r": rounded(r_arrow),
                   "start": [a0] * len(sx), "end": [a1] * len(sx), "colour": colour},
        "heads": {"sx": rounded(hx), "sy": rounded(hy), "angle": rounded(ang), "colour": colour},
        "com": {"sx": [0.0], "sy": [0.0]},
        "axes": {"xs": axes_x, "ys": axes_y, "colour": list(COLOURS["axes"]), "name": names},
        "wheel": wheel,
    }


def extent_of(mp, design=None) -> float:
    """Half-width of a square view holding every rotor disc and its label, in m.

    Parameters
    ----------
    mp : MassProperties
        Hub positions about the CoM.
    design : Design or None
        For the rotor diameters (discs drawn at 0.3 of the largest hub distance without one).
    """
    pos = mp.rotor_positions_m
    span = float(np.max(np.abs(pos[:, :2]))) if len(pos) else 0.1
    if design is None:
        return 1.45 * span
    radii = np.array([0.5 * (r.diameter_m if r.diameter_m else 0.3 * span)
                      for r in design.rotors])
    reach = np.abs(pos[:, :2]).max(axis=1) + radii
    return float(1.12 * reach.max() + 0.06 * span)


# --- thrust bars (hover and failure) --------------------------------------------------------


def thrust_figure(names, title: str = "Thrust per rotor against its limit",
                  threshold: bool = True):
    """Bars of thrust per rotor, the limit as a black tick, a threshold as an orange tick.

    ``threshold=False`` leaves the threshold tick (and its legend entry) out.
    """
    from bokeh.models import Range1d

    p = new_figure(title, "rotor", "thrust (N)", width=340, height=330,
                   x_range=list(names), y_range=Range1d(0, 1))
    s = {"bars": _source(name=[], thrust=[], colour=[], limit=[], threshold=[], label=[])}
    p.vbar(x="name", top="thrust", width=0.6, source=s["bars"], fill_color="colour",
           line_color=None, legend_field="label")
    p.scatter(x="name", y="limit", source=s["bars"], marker="dash", size=34, line_width=3,
              line_color=COLOURS["limit"], legend_label="limit")
    if threshold:
        p.scatter(x="name", y="threshold", source=s["bars"], marker="dash", size=34,
                  line_width=2, line_color=COLOURS["threshold"], legend_label="review threshold")
    fit_axes(p, "y", [(s["bars"], "thrust"), (s["bars"], "limit"), (s["bars"], "threshold")],
             start=0.0)
    _legend_style(p, "top_left")
    # below the plot, so that it never hides a bar
    p.legend.orientation = "horizontal"
    p.add_layout(p.legend[0], "below")
    return p, s


def thrust_data(names, thrust_n, max_thrust_n, working=None, spin=None,
                threshold_fraction: float | None = None) -> dict[str, dict]:
    """Source data of :func:`thrust_figure`: thrusts and limits in N; failed rotors in grey."""
    n = len(names)
    working = np.ones(n, bool) if working is None else np.asarray(working, bool)
    spin = np.ones(n) if spin is None else np.asarray(spin)
    colour, label = [], []
    for w, s in zip(working, spin, strict=True):
        if not w:
            colour.append(COLOURS["failed"])
            label.append("failed")
        else:
            colour.append(COLOURS["ccw"] if s > 0 else COLOURS["cw"])
            label.append("ccw rotor" if s > 0 else "cw rotor")
    fmax = np.asarray(max_thrust_n, float)
    thr = (fmax * threshold_fraction) if threshold_fraction is not None else np.full(n, np.nan)
    return {"bars": {"name": list(names), "thrust": rounded(np.nan_to_num(thrust_n)),
                     "colour": colour, "limit": rounded(fmax), "threshold": rounded(thr),
                     "label": label}}


def torque_figure():
    """Torque authority about each body axis while holding the weight, in N m."""
    from bokeh.models import Range1d

    p = new_figure("Torque authority in hover", "body axis", "torque (N m)", width=320,
                   height=300, x_range=["roll x", "pitch y", "yaw z"], y_range=Range1d(-1, 1))
    s = {"bars": _source(axis=[], top=[], bottom=[], margin=[])}
    fit_axes(p, "y", [(s["bars"], "top"), (s["bars"], "bottom"), (s["bars"], "margin")])
    p.vbar(x="axis", top="top", bottom="bottom", width=0.5, source=s["bars"],
           fill_color=COLOURS["fixed_gain"], line_color=None, legend_label="min .. max")
    p.scatter(x="axis", y="margin", source=s["bars"], marker="dash", size=28, line_width=3,
              line_color=COLOURS["limit"], legend_label="margin (smaller side)")
    _legend_below(p)
    return p, s


def torque_data(torque_max_n_m, torque_min_n_m, margin_n_m) -> dict[str, dict]:
    """Source data of the torque-authority bars (largest and smallest torque per axis, N m)."""
    return {"bars": {"axis": ["roll x", "pitch y", "yaw z"], "top": rounded(torque_max_n_m),
                     "bottom": rounded(torque_min_n_m), "margin": rounded(margin_n_m)}}


# --- failure: poles, CoM circle, time response ----------------------------------------------


def poles_figure():
    """Open- and closed-loop poles of the reduced model, in 1/s."""
    from bokeh.models import Range1d, Span

    p = new_figure("Poles of the reduced model", "real part (1/s)", "imaginary part (1/s)",
                   width=300, height=300, x_range=Range1d(-1, 1), y_range=Range1d(-1, 1))
    s = {"closed": _source(re=[], im=[]), "open": _source(re=[], im=[])}
    p.add_layout(Span(location=0, dimension="height", line_color="#888888", line_width=1))
    p.add_layout(Span(location=0, dimension="width", line_color="#888888", line_width=1))
    p.scatter(x="re", y="im", source=s["open"], marker="x", size=11, line_width=2,
              line_color=COLOURS["open_loop"], legend_label="open loop")
    p.scatter(x="re", y="im", source=s["closed"], marker="circle", size=9,
              fill_color=COLOURS["closed_loop"], line_color=COLOURS["closed_loop"],
              legend_label="closed loop (LQR)")
    _anchor(p, s)
    fit_axes(p, "x", [(s[k], "re") for k in ("closed", "open", "anchor")], pad=0.1)
    fit_axes(p, "y", [(s[k], "im") for k in ("closed", "open", "anchor")], pad=0.1,
             symmetric=True)
    _legend_below(p)
    return p, s


def poles_data(closed_loop, open_loop) -> dict[str, dict]:
    """Source data of the pole map: real and imaginary parts (1/s) of both pole sets."""
    def split(z):
        if z is None:
            return {"re": [], "im": []}
        z = np.asarray(z, complex)
        ok = np.isfinite(z)
        return {"re": rounded(z[ok].real), "im": rounded(z[ok].imag)}

    return {"closed": split(closed_loop), "open": split(open_loop)}


def circle_figure():
    """The centre of mass's circle in the world's horizontal plane, in mm."""
    from bokeh.models import Range1d

    # one padded range on both axes of a square frame, so the circle is round and whole
    p = new_figure("Centre-of-mass path (from above)", "east (mm)", "north (mm)",
                   width=270, height=330, x_range=Range1d(-1, 1), y_range=Range1d(-1, 1))
    p.frame_width = p.frame_height = 190
    p.xaxis.ticker.desired_num_ticks = 4
    p.yaxis.ticker.desired_num_ticks = 4
    s = {"path": _source(x=[], y=[]), "centre": _source(x=[], y=[])}
    p.line(x="x", y="y", source=s["path"], line_color=COLOURS["closed_loop"], line_width=2,
           legend_label="equilibrium circle")
    p.scatter(x="x", y="y", source=s["centre"], marker="cross", size=12,
              line_color=COLOURS["com"], line_width=2, legend_label="circle centre")
    _anchor(p, s, "x", "y")
    fit_axes(p, "xy", [(s[k], c) for k in ("path", "anchor") for c in ("x", "y")], pad=0.1,
             symmetric=True)
    _legend_below(p)
    return p, s


def circle_data(radius_m: float, n: int = 121) -> dict[str, dict]:
    """A circle of the given radius (m) about the origin, in mm (empty when there is none)."""
    if radius_m is None or not math.isfinite(radius_m):
        return {"path": {"x": [], "y": []}, "centre": {"x": [], "y": []}}
    a = np.linspace(0.0, 2 * math.pi, n)
    r_mm = 1e3 * radius_m
    return {"path": {"x": rounded(r_mm * np.cos(a)), "y": rounded(r_mm * np.sin(a))},
            "centre": {"x": [0.0], "y": [0.0]}}


def response_figures(names, max_thrust_n=None):
    """Time response after the failure: body rates and spin rate (rad/s); thrusts (N).

    ``max_thrust_n`` (N, per rotor) draws each distinct thrust limit as a dashed line.
    """
    from bokeh.models import Range1d, Span

    rates = new_figure("Body rates after the failure", "time (s)", "rate (rad/s)",
                       width=380, height=260, x_range=Range1d(0, 1), y_range=Range1d(-1, 1))
    thrust = new_figure("Rotor thrusts after the failure", "time (s)", "thrust (N)",
                        width=380, height=260, x_range=rates.x_range, y_range=Range1d(-1, 1))
    cols = {"t": []}
    for k in ("p", "q", "r", "spin", "alt"):
        cols[k] = []
    for i in range(len(names)):
        cols[f"f{i}"] = []
    s = {"series": _source(**cols), "marks": _source(t=[], label=[])}
    labels = {"p": "p", "q": "q", "r": "r", "spin": "spin about up (\u03c9\u00b7n)"}
    for (k, lab), c in zip(labels.items(), COLOURS["series"], strict=False):
        rates.line(x="t", y=k, source=s["series"], line_color=c, line_width=1.8,
                   legend_label=lab, line_dash="dashed" if k == "spin" else "solid")
    for i, name in enumerate(names):
        c = COLOURS["series"][i % len(COLOURS["series"])]
        thrust.line(x="t", y=f"f{i}", source=s["series"], line_color=c, line_width=1.8,
                    legend_label=name)
    if max_thrust_n is not None:
        from bokeh.models import Label

        for fmax in sorted({float(f) for f in np.asarray(max_thrust_n, float).ravel()}):
            thrust.add_layout(Span(location=fmax, dimension="width",
                                   line_color=COLOURS["limit"], line_dash="dashed",
                                   line_width=1.5))
            thrust.add_layout(Label(x=0, y=fmax, x_units="screen", text=f"max thrust "
                                    f"{fmt(fmax, 3, 'N')}", text_font=FONT,
                                    text_font_size="10px", x_offset=4, y_offset=2,
                                    text_color=COLOURS["limit"]))
    s["anchor"] = _source(t=[0.0], y=[0.0])
    for p in (rates, thrust):
        p.scatter(x="t", y="y", source=s["anchor"], size=1, alpha=0.0)
        p.add_layout(Span(location=0, dimension="width", line_color="#888888", line_width=1))
        _legend_right(p)
    # the shared time axis is fitted once, on the rates figure
    fit_axes(rates, "x", [(s["series"], "t"), (s["anchor"], "t")], pad=0.0)
    fit_axes(rates, "y", [(s["series"], k) for k in ("p", "q", "r", "spin")]
             + [(s["anchor"], "y")])
    limits = [] if max_thrust_n is None else [float(f) for f in
                                              np.asarray(max_thrust_n, float).ravel()]
    s["limits"] = _source(y=limits)
    fit_axes(thrust, "y", [(s["series"], f"f{i}") for i in range(len(names))]
             + [(s["anchor"], "y"), (s["limits"], "y")])
    return rates, thrust, s


def response_data(sim, n_rotors: int, max_points: int = 400) -> dict[str, dict]:
    """Source data of :func:`response_figures` from a SimulationResult (None: empty)."""
    cols: dict[str, list] = {"t": [], "p": [], "q": [], "r": [], "spin": [], "alt": []}
    for i in range(n_rotors):
        cols[f"f{i}"] = []
    if sim is None:
        return {"series": cols, "marks": {"t": [], "label": []}}
    ser = sim.series(max_points=max_points)
    w = np.asarray(ser["omega_rad_s"])
    cols.update({"t": rounded(ser["t_s"]), "p": rounded(w[:, 0]), "q": rounded(w[:, 1]),
                 "r": rounded(w[:, 2]), "spin": rounded(ser["spin_rate_rad_s"]),
                 "alt": rounded(ser["altitude_m"])})
    for i, name in enumerate(sim.names):
        cols[f"f{i}"] = rounded(ser["thrust_n"][name])
    marks = [(t, lab) for t, lab in ((sim.t_fail_s, "failure"), (sim.t_switch_s, "switch"))
             if math.isfinite(t)]
    return {"series": cols, "marks": {"t": [m[0] for m in marks], "label": [m[1] for m in marks]}}


# --- wheel ----------------------------------------------------------------------------------


def wheel_figure():
    """H2 ratio against wheel momentum, the chosen momentum as a marker, flags in orange."""
    from bokeh.models import Range1d, Span

    p = new_figure("Disturbance sensitivity against wheel momentum", "wheel momentum h (N m s)",
                   "H2 ratio to h = 0 (1)", width=460, height=320, x_range=Range1d(-1, 1),
                   y_range=Range1d(0, 2))
    s = {"curve": _source(h=[], ratio=[], fixed=[]), "flags": _source(h=[], ratio=[], text=[]),
         "marker": _source(h=[], ratio=[])}
    # the ratio 1 (h = 0) is always in view; this source only feeds the range
    s["one"] = _source(y=[1.0])
    fit_axes(p, "x", [(s["curve"], "h"), (s["marker"], "h")], pad=0.02)
    fit_axes(p, "y", [(s[k], c) for k, c in (("curve", "ratio"), ("curve", "fixed"),
                                             ("marker", "ratio"))] + [(s["one"], "y")])
    p.add_layout(Span(location=1.0, dimension="width", line_color="#888888", line_dash="dotted"))
    p.line(x="h", y="ratio", source=s["curve"], line_color=COLOURS["closed_loop"], line_width=2,
           legend_label="LQR redesigned per h")
    p.scatter(x="h", y="ratio", source=s["curve"], size=4, fill_color=COLOURS["closed_loop"],
              line_color=None)
    p.line(x="h", y="fixed", source=s["curve"], line_color=COLOURS["fixed_gain"], line_width=2,
           line_dash="dashed", legend_label="h = 0 gain kept")
    p.scatter(x="h", y="ratio", source=s["flags"], marker="triangle", size=11,
              fill_color=COLOURS["flag"], line_color="#000000", legend_label="flagged")
    p.scatter(x="h", y="ratio", source=s["marker"], marker="diamond", size=15,
              fill_color=COLOURS["marker"], line_color="#000000", legend_label="chosen h")
    _legend_below(p)
    return p, s


def wheel_curve_data(curve, flagged_h) -> dict[str, dict]:
    """Source data of the curve and its flagged points (h in N m s)."""
    h = np.asarray(curve.h_n_m_s, float)
    ratio = np.asarray(curve.h2_ratio, float)
    idx = [int(np.argmin(np.abs(h - fh))) for fh in flagged_h]
    return {"curve": {"h": rounded(h), "ratio": rounded(ratio),
                      "fixed": rounded(curve.h2_ratio_fixed_gain)},
            "flags": {"h": rounded(h[idx]) if idx else [],
                      "ratio": rounded(np.nan_to_num(ratio[idx], nan=1.0)) if idx else [],
                      "text": [str(i) for i in idx]}}


def marker_data(h: float, ratio: float) -> dict[str, dict]:
    """Source data of the wheel-curve marker: momentum h (N m s) and its H2 ratio."""
    return {"marker": {"h": rounded([h]), "ratio": rounded([ratio])}}


# --- placement map --------------------------------------------------------------------------


def map_figure(extent_m: float, quantity_label: str):
    """A quantity over the placement grid (cells), rotor hubs and the part's base position.

    Also drawn: failed hubs (a cross), the threshold contour of the quantity (a dashed line,
    from :func:`contour_lines`), and a tap tool whose selection a panel reads out. Returns
    the figure, its sources, the colour mapper, the colour bar and the contour renderer.
    """
    from bokeh.models import ColorBar, LinearColorMapper, Range1d, TapTool

    mapper = LinearColorMapper(palette=list(TOL_IRIDESCENT), nan_color=MISSING, low=0, high=1)
    e = float(extent_m)
    p = new_figure(quantity_label, "right, \u2212y_B (m)", "forward, x_B (m)", width=470,
                   height=420, match_aspect=True, x_range=Range1d(-e, e), y_range=Range1d(-e, e))
    s = {"cells": _source(sx=[], sy=[], w=[], h=[], value=[], text=[]),
         "hubs": _source(sx=[], sy=[], name=[]), "base": _source(sx=[], sy=[]),
         "failed": _source(sx=[], sy=[], name=[])}
    cells = p.rect(x="sx", y="sy", width="w", height="h", source=s["cells"],
                   fill_color={"field": "value", "transform": mapper}, line_color=None,
                   selection_line_color="#000000", selection_line_width=2,
                   nonselection_fill_alpha=1.0)
    p.add_tools(TapTool(renderers=[cells]))
    contour = p.contour(x=[0.0, 1.0], y=[0.0, 1.0], z=[[0.0, 0.0], [0.0, 0.0]], levels=[0.5],
                        line_color=COLOURS["threshold"], line_width=2.5, line_dash="dashed")
    p.scatter(x="sx", y="sy", source=s["hubs"], marker="circle", size=10, fill_color="white",
              line_color=COLOURS["limit"], legend_label="rotor hub")
    p.scatter(x="sx", y="sy", source=s["failed"], marker="x", size=14, line_width=3,
              line_color=COLOURS["cw"], legend_label="failed rotor")
    p.scatter(x="sx", y="sy", source=s["base"], marker="square_x", size=13, fill_color="white",
              line_color=COLOURS["marker"], line_width=2, legend_label="part as designed")
    from bokeh.models import LegendItem

    p.legend[0].items.append(LegendItem(label="threshold", renderers=[contour.line_renderer],
                                        visible=False))
    bar = ColorBar(color_mapper=mapper, width=10, title=quantity_label, title_text_font=FONT,
                   title_text_font_size="10px", title_text_font_style="normal",
                   major_label_text_font_size="10px")
    p.add_layout(bar, "right")
    _legend_below(p)
    return p, s, mapper, bar, contour


def contour_lines(xs_m, ys_m, values, level):
    """The ``level`` contour of a placement map, in plot coordinates (-y_B, x_B), m.

    Returns bokeh's ``ContourData`` (lines only) for ``ContourRenderer.set_data``; no line
    when ``level`` is None or not crossed. Contours from contourpy through bokeh.
    """
    from bokeh.plotting.contour import contour_data

    xs = np.asarray(xs_m, float)
    ys = np.asarray(ys_m, float)
    v = np.asarray(values, float)
    finite = v[np.isfinite(v)]
    if (level is None or not finite.size or not finite.min() < level < finite.max()
            or xs.size < 2 or ys.size < 2 or v.shape != (ys.size, xs.size)):
        # a degenerate grid that draws no line at the level
        return contour_data([0.0, 1.0], [0.0, 1.0], [[0.0, 0.0], [0.0, 0.0]], [0.5],
                            want_fill=False)
    # plot x is -y_B (ys reversed so it increases), plot y is x_B; z[row = x_B, col = -y_B]
    px, py = -ys[::-1], xs
    z = v[::-1, :].T
    return contour_data(px, py, np.ma.masked_invalid(z), [float(level)], want_fill=False)


def map_data(xs_m, ys_m, values, base_xy, hubs_xy, hub_names,
             failed=()) -> tuple[dict, float, float]:
    """Cells of a ``(ny, nx)`` map in body x, y (m) with their values; also the colour range.

    ``xs_m``, ``ys_m`` are the part's absolute x and y positions of the grid, in m; ``failed``
    names the hubs marked as failed.
    """
    xs = np.asarray(xs_m, float)
    ys = np.asarray(ys_m, float)
    v = np.asarray(values, float)
    X, Y = np.meshgrid(xs, ys)
    dx = float(np.min(np.diff(xs))) if xs.size > 1 else 0.05
    dy = float(np.min(np.diff(ys))) if ys.size > 1 else 0.05
    finite = v[np.isfinite(v)]
    lo = float(finite.min()) if finite.size else 0.0
    hi = float(finite.max()) if finite.size else 1.0
    if hi <= lo:
        hi = lo + (abs(lo) * 1e-3 or 1.0)
    hubs = np.asarray(hubs_xy, float).reshape(-1, 2)
    data = {
        "cells": {"sx": rounded(-Y), "sy": rounded(X), "w": [dy] * X.size, "h": [dx] * X.size,
                  "value": rounded(v), "text": [fmt(val) for val in v.ravel()]},
        "hubs": {"sx": rounded(-hubs[:, 1]), "sy": rounded(hubs[:, 0]), "name": list(hub_names)},
        "base": {"sx": rounded([-base_xy[1]]), "sy": rounded([base_xy[0]])},
        "failed": {"sx": [v for v, n in zip(rounded(-hubs[:, 1]), hub_names, strict=True)
                          if n in failed],
                   "sy": [v for v, n in zip(rounded(hubs[:, 0]), hub_names, strict=True)
                          if n in failed],
                   "name": [n for n in hub_names if n in failed]},
    }
    return data, lo, hi


def html_escape(text: str) -> str:
    """HTML-escape a string (for readouts built outside the table helpers)."""
    return html.escape(str(text))
