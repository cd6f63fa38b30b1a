"""Progress of long work: a text bar for the CLI, an ipywidgets bar for the notebook.

Both are callables ``progress(done, total)``, the signature that
:func:`kit.analysis.sweep.placement_sweep` calls. Importing this module imports no widget
library (the CLI uses :class:`TextProgress` without ipywidgets).
"""

from __future__ import annotations

import sys
import time


class TextProgress:
    """``label [#########.........]  12/40  3.1 s`` on one line of a text stream.

    Parameters
    ----------
    label : str
        What is being computed.
    stream : file-like or None
        Where to write (default: standard error).
    width : int
        Characters of the bar.
    """

    def __init__(self, label: str = "", stream=None, width: int = 30) -> None:
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self._t0 = time.perf_counter()
        self._last = ""

    def line(self, done: int, total: int) -> str:
        total = max(int(total), 1)
        done = min(max(int(done), 0), total)
        filled = round(self.width * done / total)
        bar = "#" * filled + "." * (self.width - filled)
        el = time.perf_counter() - self._t0
        return f"{self.label} [{bar}] {done:>{len(str(total))}}/{total}  {el:.1f} s".lstrip()

    def __call__(self, done: int, total: int) -> None:
        text = self.line(done, total)
        if text == self._last:
            return
        self._last = text
        end = "\n" if done >= total else ""
        self.stream.write("\r" + text + end)
        self.stream.flush()


class WidgetProgress:
    """An ``ipywidgets.IntProgress`` with a label; ``.widget`` is what to show."""

    def __init__(self, label: str = "") -> None:
        import ipywidgets as w

        self.label = label
        self.bar = w.IntProgress(value=0, min=0, max=1, description="")
        self.text = w.HTML("")
        self.widget = w.HBox([self.bar, self.text])
        self._t0 = time.perf_counter()

    def reset(self) -> None:
        self._t0 = time.perf_counter()
        self.bar.value = 0
        self.text.value = ""

    def __call__(self, done: int, total: int) -> None:
        total = max(int(total), 1)
        self.bar.max = total
        self.bar.value = min(max(int(done), 0), total)
        el = time.perf_counter() - self._t0
        self.text.value = f"{self.label} {self.bar.value}/{total} points, {el:.1f} s"
