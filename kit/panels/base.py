"""What every panel shares: controls, readouts, one Bokeh layout, live and static output.

A panel keeps a pure ``view`` function (analysis results in, a plain dataclass out) apart from
the widgets. :meth:`Panel.refresh` calls it and puts its figure data into the sources
(replacing ``source.data``). The figures are built once and shown live by jupyter_bokeh's
``BokehModel`` widget, which keeps the panel's Bokeh document in sync with the page: a change
sends only the changed properties and data (one ``PATCH-DOC`` message per refresh, see
:class:`LiveFigure`), never a new embed, so the panel keeps its size and its axes while it
updates. An error from the analysis shows as a message in the panel, not a traceback.

Controls: every slider updates on release (``continuous_update=False``; a keyboard step is one
update), so a drag costs one refresh, not one per mouse move; buttons are disabled while their
work runs.

A panel built from a design file compares the file's SHA-256 with the one it was loaded with
at every refresh and says so in the panel when the file changed (the workbook must be run
again from the top to use it).

``_repr_mimebundle_`` gives the widget view for a live kernel and, beside it, ``text/html``
with the control values, the readouts and the current figures (a static embed, see
:class:`kit.plots.Embedder`), so an executed workbook and a record show the same content
without a kernel.
"""

from __future__ import annotations

import hashlib
import html
import json
import time
from pathlib import Path

from kit import plots

#: CSS of the static snapshot and the readouts (class names prefixed ``rb-``).
CSS = """<style>
.rb-panel {font-family: Helvetica, Arial, sans-serif; font-size: 12px; color: #222;}
.rb-panel h4 {margin: 6px 0 4px 0; font-size: 13px;}
.rb-panel table.rb-kv {border-collapse: collapse; margin: 4px 12px 6px 0; display: inline-table;
  vertical-align: top;}
.rb-panel table.rb-kv caption {text-align: left; font-weight: bold; padding: 2px 0;}
.rb-panel table.rb-kv th, .rb-panel table.rb-kv td {padding: 1px 8px; border-bottom: 1px solid
  #E4E4E0; text-align: left; font-weight: normal;}
.rb-panel table.rb-kv td.rb-num {text-align: right; font-variant-numeric: tabular-nums;}
.rb-panel .rb-msg {border-left: 4px solid #D55E00; background: #FBEFE6; padding: 4px 8px;
  margin: 4px 0;}
.rb-panel .rb-note {color: #555; margin: 2px 0;}
.rb-panel .rb-pass {color: #007A5A; font-weight: bold;}
.rb-panel .rb-fail {color: #B04600; font-weight: bold;}
</style>"""


def kv_table(rows, caption: str = "") -> str:
    """A two-column table of (label, value) rows; both escaped (values are preformatted text)."""
    cap = f"<caption>{html.escape(caption)}</caption>" if caption else ""
    body = "".join(f"<tr><th>{html.escape(str(k))}</th><td class='rb-num'>"
                   f"{html.escape(str(v))}</td></tr>" for k, v in rows)
    return f'<table class="rb-kv">{cap}<tbody>{body}</tbody></table>'


def message_html(text: str) -> str:
    return f'<div class="rb-msg">{html.escape(text)}</div>' if text else ""


class Panel:
    """Base of the five panels.

    Subclasses set ``title``, build ``self.controls`` (name -> widget), ``self.layout`` (a
    Bokeh model in its own Document) and implement :meth:`update` (compute the view and fill
    the sources, returning the readout HTML) and :meth:`control_values`.
    """

    title = "panel"

    #: Whether the panel shows its Bokeh layout (a wheel panel of a design without a wheel
    #: does not).
    show_figure = True

    def __init__(self) -> None:
        import ipywidgets as w

        self.message = ""
        self.stale_message = ""
        self.readout_html = ""
        self.last_update_s = 0.0
        self.refresh_count = 0
        self._readout = w.HTML()
        self._msg = w.HTML()
        self.figure_widget = None
        self._holding = False

    # -- to implement ----------------------------------------------------------------------

    def update(self) -> str:  # pragma: no cover - abstract
        raise NotImplementedError

    def control_values(self) -> list[tuple[str, str]]:  # pragma: no cover - abstract
        raise NotImplementedError

    # -- shared ----------------------------------------------------------------------------

    def _build_widget(self, control_rows) -> None:
        import ipywidgets as w

        head = w.HTML(f"{CSS}<div class='rb-panel'><h4>{html.escape(self.title)}</h4></div>")
        children = [head, *control_rows, self._msg]
        if self.show_figure:
            self.figure_widget = LiveFigure.of(self.layout)
            children.append(self.figure_widget)
        children.append(self._readout)
        self.widget = w.VBox(children, layout=w.Layout(width="100%"))
        # figures whose ranges follow their data (kit.plots.fit_axes), set by refit()
        self._fitted = [m for m in self.layout.references() if getattr(m, "_rb_fit", None)]

    def refit(self) -> None:
        """Fit the ranges of the panel's figures to their data (no event when unchanged)."""
        for fig in getattr(self, "_fitted", ()):
            plots.refit(fig)

    def _observe(self, *widgets) -> None:
        for wd in widgets:
            wd.observe(self._on_change, names="value")

    def _on_change(self, _change=None) -> None:
        if not self._holding:
            self.refresh()

    def hold(self):
        """Context manager: set several controls, refresh once at the end."""
        panel = self

        class _Hold:
            def __enter__(self):
                panel._holding = True
                return panel

            def __exit__(self, *exc):
                panel._holding = False
                panel.refresh()

        return _Hold()

    def refresh(self) -> None:
        """Recompute the view from the controls, update the figures and the readouts.

        The figure changes of one refresh, data and ranges together, reach the page as one
        message (see :class:`LiveFigure`), sent before the readouts change;
        ``last_update_s`` is the kernel's share of the wait.
        """
        t0 = time.perf_counter()
        fw = self.figure_widget
        if fw is not None:
            fw.hold()
        try:
            try:
                self.message = ""
                self.readout_html = self.update()
            except Exception as exc:  # noqa: BLE001 - shown in the panel, never a traceback
                self.message = str(exc) if isinstance(exc, ValueError) else (
                    f"{type(exc).__name__}: {exc}")
                self.readout_html = ""
            self.refit()
            self.stale_message = design_file_changed(getattr(self, "vehicle", None))
        finally:
            if fw is not None:
                fw.flush()
        self._show_text()
        self.refresh_count += 1
        self.last_update_s = time.perf_counter() - t0

    def _show_text(self) -> None:
        """Put the message (and a stale-file notice) and the readouts into their widgets."""
        msg = f"<div class='rb-panel'>{message_html(self.stale_message)}" \
              f"{message_html(self.message)}</div>"
        if self._msg.value != msg:
            self._msg.value = msg
        out = f"<div class='rb-panel'>{self.readout_html}</div>"
        if self._readout.value != out:
            self._readout.value = out

    def figure_html(self) -> str:
        """The figures as static HTML (a record, or an executed workbook without a kernel)."""
        if not self.show_figure:
            return ""
        if getattr(self, "_embedder", None) is None:
            self._embedder = plots.Embedder(self.layout)
        return self._embedder.html()

    # -- static snapshot -------------------------------------------------------------------

    def summary_text(self) -> str:
        lines = [self.title]
        lines += [f"  {k}: {v}" for k, v in self.control_values()]
        if self.stale_message:
            lines.append(f"  note: {self.stale_message}")
        if self.message:
            lines.append(f"  message: {self.message}")
        return "\n".join(lines)

    def snapshot_html(self) -> str:
        """Control values, message, readouts and the current figures, as one HTML fragment."""
        return (f"{CSS}<div class='rb-panel rb-snapshot'><h4>{html.escape(self.title)}</h4>"
                f"{kv_table(self.control_values(), 'Controls')}"
                f"{message_html(self.stale_message)}{message_html(self.message)}"
                f"{self.readout_html}</div>\n{self.figure_html()}")

    def _repr_html_(self) -> str:
        return self.snapshot_html()

    def _repr_mimebundle_(self, include=None, exclude=None):
        if self.figure_widget is not None:
            # the page builds its view from this bundle: the figures as they are now (patches
            # sent before a view existed reached no view)
            self.figure_widget.update_from_model(self.layout)
        data = dict(self.widget._repr_mimebundle_(include=include, exclude=exclude) or {})
        data["text/plain"] = self.summary_text()
        data["text/html"] = self.snapshot_html()
        return data


def design_file_changed(veh) -> str:
    """A notice when the vehicle's design file changed since it was loaded ('' otherwise).

    Compares the SHA-256 of the file's bytes now with the one recorded at load
    (``Design.sha256``); a design that did not come from a readable file gives ''.
    """
    d = getattr(veh, "design", None)
    src, sha = getattr(d, "source", ""), getattr(d, "sha256", "")
    if not src or not sha:
        return ""
    path = Path(src)
    try:
        now = hashlib.sha256(path.read_bytes()).hexdigest()
    except OSError:
        return ""
    if now == sha:
        return ""
    return (f"the design file {path.name} changed since it was loaded (SHA-256 {sha[:12]}... "
            f"then, {now[:12]}... now): this panel still shows the loaded design; run the "
            "workbook again from the top to use the file as it is now")


def _live_figure_base():
    from jupyter_bokeh import BokehModel

    return BokehModel


class LiveFigure:
    """Factory of the live figure widget: jupyter_bokeh's ``BokehModel`` with batching.

    ``BokehModel`` sends every document change as its own ``PATCH-DOC`` message. Between
    :meth:`hold` and :meth:`flush` the changes are kept and then sent as one message, so the
    page applies a panel's whole update at once and repaints once.
    """

    _cls = None

    #: Properties the page may change and the kernel takes (a selection made on a figure).
    #: Every other change from the page is an echo: jupyter_bokeh's view sends back each
    #: change it applied from a patch (the data just sent, the ranges BokehJS fitted), and
    #: taking it would cost the kernel a decode per patch and, arriving after a newer
    #: update, would put stale values into the kernel's document.
    FROM_PAGE = frozenset({"indices", "line_indices", "multiline_indices", "image_indices"})

    @classmethod
    def of(cls, layout):
        if cls._cls is None:
            cls._cls = _make_live_figure_class()
        return cls._cls(layout)


def _make_live_figure_class():
    from bokeh.protocol import Protocol

    base = _live_figure_base()

    class _LiveFigure(base):
        def __init__(self, model, **kwargs) -> None:
            self._held = None
            super().__init__(model, **kwargs)

        def hold(self) -> None:
            if self._held is None:
                self._held = []

        def flush(self) -> None:
            events, self._held = self._held, None
            if events:
                self._send_events(events)

        def _document_patched(self, event) -> None:
            if event.setter is self:
                return
            if self._held is not None:
                self._held.append(event)
                return
            self._send_events([event])

        def _sync_model(self, model, content, buffers) -> None:
            if (content.get("event") == "jsevent" and content.get("kind") == "ModelChanged"
                    and content.get("attr") not in LiveFigure.FROM_PAGE):
                return
            super()._sync_model(model, content, buffers)

        def _send_events(self, events) -> None:
            # the message layout of jupyter_bokeh.BokehModel._document_patched, for a list
            msg = Protocol().create("PATCH-DOC", events)
            self.send({"msg": "patch", "payload": msg.header_json})
            self.send({"msg": "patch", "payload": msg.metadata_json})
            self.send({"msg": "patch", "payload": msg.content_json})
            for buffer in msg.buffers:
                self.send({"msg": "patch", "payload": json.dumps(buffer.ref)})
                self.send({"msg": "patch"}, [buffer.to_bytes()])

    _LiveFigure.__name__ = _LiveFigure.__qualname__ = "LiveFigure"
    return _LiveFigure


def as_vehicle(obj):
    """A :class:`~kit.analysis.vehicle.Vehicle` from a Design, a Vehicle or a DesignReport."""
    from kit.analysis.report import DesignReport
    from kit.analysis.vehicle import Vehicle
    from kit.design import Design

    if isinstance(obj, Vehicle):
        return obj
    if isinstance(obj, DesignReport):
        return obj.vehicle
    if isinstance(obj, Design):
        return Vehicle.from_design(obj)
    raise TypeError(f"a panel needs a Design, Vehicle or DesignReport, not {type(obj).__name__}")
