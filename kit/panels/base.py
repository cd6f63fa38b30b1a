"""What every panel shares: controls, readouts, one Bokeh layout, live and static output.

A panel keeps a pure ``view`` function (analysis results in, a plain dataclass out) apart from
the widgets. :meth:`Panel.refresh` calls it, puts its figure data into the sources (replacing
``source.data``) and rewrites the panel's ``Output`` with one ``display_data`` output (the
equivalent of ``Output.append_display_data`` after clearing, never ``print`` inside
``with out:``). An error from the analysis shows as a message in the panel, not a traceback.

``_repr_mimebundle_`` gives the widget view for a live kernel and, beside it, ``text/html``
with the control values, the readouts and the current figures, so an executed workbook shows
the same content without a kernel.
"""

from __future__ import annotations

import html
import time

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

    def __init__(self) -> None:
        import ipywidgets as w

        self.message = ""
        self.readout_html = ""
        self.last_update_s = 0.0
        self._readout = w.HTML()
        self._msg = w.HTML()
        self.out = w.Output()
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
        self.widget = w.VBox([head, *control_rows, self._msg, self._readout, self.out],
                             layout=w.Layout(width="100%"))

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
        """Recompute the view from the controls, update the figures and the readouts."""
        t0 = time.perf_counter()
        try:
            self.message = ""
            self.readout_html = self.update()
        except Exception as exc:  # noqa: BLE001 - shown in the panel, never as a traceback
            self.message = str(exc) if isinstance(exc, ValueError) else (
                f"{type(exc).__name__}: {exc}")
            self.readout_html = ""
        self._msg.value = f"<div class='rb-panel'>{message_html(self.message)}</div>"
        self._readout.value = f"<div class='rb-panel'>{self.readout_html}</div>"
        self.render()
        self.last_update_s = time.perf_counter() - t0

    def figure_html(self) -> str:
        if getattr(self, "_embedder", None) is None:
            self._embedder = plots.Embedder(self.layout)
        return self._embedder.html()

    def render(self) -> None:
        """Rewrite the Output with the current figures (one display_data output)."""
        self.out.outputs = ({"output_type": "display_data",
                             "data": {"text/html": self.figure_html(),
                                      "text/plain": f"<{self.title}: figures>"},
                             "metadata": {}},)

    # -- static snapshot -------------------------------------------------------------------

    def summary_text(self) -> str:
        lines = [self.title]
        lines += [f"  {k}: {v}" for k, v in self.control_values()]
        if self.message:
            lines.append(f"  message: {self.message}")
        return "\n".join(lines)

    def snapshot_html(self) -> str:
        """Control values, message, readouts and the current figures, as one HTML fragment."""
        return (f"{CSS}<div class='rb-panel rb-snapshot'><h4>{html.escape(self.title)}</h4>"
                f"{kv_table(self.control_values(), 'Controls')}"
                f"{message_html(self.message)}{self.readout_html}</div>\n{self.figure_html()}")

    def _repr_html_(self) -> str:
        return self.snapshot_html()

    def _repr_mimebundle_(self, include=None, exclude=None):
        data = dict(self.widget._repr_mimebundle_(include=include, exclude=exclude) or {})
        data["text/plain"] = self.summary_text()
        data["text/html"] = self.snapshot_html()
        return data


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
