"""Helpers of the real-browser tests: a private JupyterLab server, Chromium, offline routing.

JupyterLab runs on 127.0.0.1 with a random port and token, over a temporary folder holding a
copy of ``workbooks/*.ipynb`` and ``data/designs``, with its own runtime, config, data and
IPython folders (nothing of the user's is read), and with :mod:`kit.panels.serve` enabled so
figures draw live. Chromium is Debian's; every request to another host is aborted and noted.
"""

from __future__ import annotations

import json
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import urlsplit

ROOT = Path(__file__).resolve().parents[1]
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox", "--disable-gpu", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-dev-shm-usage",
]
LOCAL_HOSTS = {"127.0.0.1", "localhost"}
ARTIFACTS = ROOT / "artifacts" / "browser"
#: Longest wait for JupyterLab to answer /api/status, s.
LAB_START_S = 60.0


def cache_dir() -> str:
    """ROTORBOOK_CACHE_DIR as the Makefile sets it, unless the caller set it."""
    return os.environ.get("ROTORBOOK_CACHE_DIR", str(ROOT / ".cache" / "rotorbook"))


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def make_root(tmp: Path) -> Path:
    """``tmp/workbooks/*.ipynb`` and ``tmp/data/designs``, so ``../data/designs/...`` resolves."""
    (tmp / "workbooks").mkdir(parents=True)
    for nb in sorted((ROOT / "workbooks").glob("*.ipynb")):
        shutil.copy2(nb, tmp / "workbooks" / nb.name)
    shutil.copytree(ROOT / "data" / "designs", tmp / "data" / "designs")
    return tmp


@dataclass
class LabServer:
    """A running JupyterLab: its URL, token and process."""

    url: str
    token: str
    proc: subprocess.Popen
    log_path: Path

    def log_tail(self, n: int = 40) -> str:
        try:
            lines = self.log_path.read_text(errors="replace").splitlines()
        except OSError:
            return ""
        return "\n".join(lines[-n:])

    def stop(self) -> None:
        """Terminate the server (and its kernels, in its process group); kill if it hangs."""
        if self.proc.poll() is not None:
            return
        try:
            os.killpg(self.proc.pid, signal.SIGTERM)
        except ProcessLookupError:
            return
        try:
            self.proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            os.killpg(self.proc.pid, signal.SIGKILL)
            self.proc.wait(timeout=10)


def start_lab(tmp: Path) -> LabServer:
    """Start JupyterLab over ``make_root(tmp / "root")`` and wait until it answers."""
    root = make_root(tmp / "root")
    home = tmp / "jupyter"
    env = dict(os.environ)
    env.update({
        "JUPYTER_RUNTIME_DIR": str(home / "runtime"),
        "JUPYTER_CONFIG_DIR": str(home / "config"),
        "JUPYTER_DATA_DIR": str(home / "data"),
        "JUPYTERLAB_SETTINGS_DIR": str(home / "config" / "lab" / "user-settings"),
        "JUPYTERLAB_WORKSPACES_DIR": str(home / "config" / "lab" / "workspaces"),
        "IPYTHONDIR": str(home / "ipython"),
        "JUPYTER_PLATFORM_DIRS": "1",
        "ROTORBOOK_CACHE_DIR": cache_dir(),
    })
    for d in ("runtime", "config", "data", "ipython"):
        (home / d).mkdir(parents=True, exist_ok=True)
    # no news and no update check (both would reach the internet), no toast asking about them
    settings = Path(env["JUPYTERLAB_SETTINGS_DIR"]) / "@jupyterlab" / "apputils-extension"
    settings.mkdir(parents=True)
    (settings / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False}))
    port = free_port()
    token = secrets.token_hex(24)
    cmd = [
        sys.executable, "-m", "jupyterlab", "--no-browser",
        "--ServerApp.ip=127.0.0.1", f"--ServerApp.port={port}",
        "--ServerApp.port_retries=0", f"--IdentityProvider.token={token}",
        f"--ServerApp.root_dir={root}",
        "--ServerApp.jpserver_extensions={'kit.panels.serve': True}",
        "--LabApp.expose_app_in_browser=True",
        # no PyPI query for updates, no news: the server itself must not go online either
        "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
        "--LabApp.news_url=None",
        "--LabApp.extension_manager=readonly",
        "--ServerApp.open_browser=False",
    ]
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        cmd.append("--allow-root")  # CI and `make test` run as root
    log_path = tmp / "lab.log"
    log = open(log_path, "wb")  # the child keeps its own copy of the descriptor
    proc = subprocess.Popen(cmd, cwd=root, env=env, stdout=log, stderr=subprocess.STDOUT,
                            start_new_session=True)
    log.close()
    server = LabServer(f"http://127.0.0.1:{port}", token, proc, log_path)
    deadline = time.monotonic() + LAB_START_S
    last = ""
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError(f"JupyterLab exited with {proc.returncode}:\n{server.log_tail()}")
        try:
            with urllib.request.urlopen(f"{server.url}/api/status?token={token}",
                                        timeout=2) as r:
                json.load(r)
                return server
        except (urllib.error.URLError, OSError, ValueError) as exc:
            last = str(exc)
        time.sleep(0.25)
    server.stop()
    raise RuntimeError(f"JupyterLab did not answer /api/status within {LAB_START_S:.0f} s "
                       f"({last}):\n{server.log_tail()}")


@dataclass
class Offline:
    """Route handler: let local requests through, abort and note every other one."""

    allow_file: bool = False
    aborted: list[str] = field(default_factory=list)

    def allowed(self, url: str) -> bool:
        parts = urlsplit(url)
        scheme = parts.scheme.lower()
        if scheme in ("data", "blob", "about"):
            return True
        if scheme == "file":
            return self.allow_file
        if scheme in ("http", "https", "ws", "wss"):
            return not self.allow_file and parts.hostname in LOCAL_HOSTS
        return False

    def __call__(self, route) -> None:
        url = route.request.url
        if self.allowed(url):
            route.continue_()
        else:
            self.aborted.append(url)
            route.abort("blockedbyclient")


#: JavaScript: every canvas inside the element (piercing open shadow roots), with its size.
CANVASES_JS = """(el) => {
  const found = [];
  const walk = (node) => {
    if (!node) return;
    if (node.tagName === 'CANVAS') {
      const r = node.getBoundingClientRect();
      found.push({w: node.width, h: node.height, cw: r.width, ch: r.height});
    }
    if (node.shadowRoot) walk(node.shadowRoot);
    for (const c of node.children || []) walk(c);
  };
  walk(el);
  return found;
}"""

#: JavaScript: the data of the newest ColumnDataSource holding a column ``col``, in any Bokeh
#: document of the page, with the number of documents and of figure embeds so far (a redraw
#: counter kept by kit.plots; null when there is no BokehJS).
SOURCE_DATA_JS = """(col) => {
  const B = window.Bokeh;
  if (!B || !B.documents) return null;
  const plain = (v) => (v && typeof v.length === 'number' && typeof v !== 'string')
      ? Array.from(v, plain) : v;
  for (let i = B.documents.length - 1; i >= 0; i--) {
    const doc = B.documents[i];
    const models = doc.all_models ? Array.from(doc.all_models)
        : Array.from(doc._all_models.values());
    for (const m of models) {
      if (m.constructor.__name__ !== 'ColumnDataSource' && m.type !== 'ColumnDataSource')
        continue;
      const d = m.data instanceof Map ? Object.fromEntries(m.data) : m.data;
      if (d && col in d) {
        const out = {};
        for (const k of Object.keys(d).sort()) out[k] = plain(d[k]);
        return {ndocs: B.documents.length, embeds: window.__rotorbookEmbeds || 0, index: i,
                data: out};
      }
    }
  }
  return {ndocs: B.documents.length, embeds: window.__rotorbookEmbeds || 0, index: -1,
          data: null};
}"""


def wait_until(predicate, timeout_s: float, what: str, interval_s: float = 0.25):
    """Poll ``predicate`` until it returns something truthy; fail naming ``what``."""
    deadline = time.monotonic() + timeout_s
    last = None
    while time.monotonic() < deadline:
        last = predicate()
        if last:
            return last
        time.sleep(interval_s)
    raise AssertionError(f"timed out after {timeout_s:.0f} s waiting for {what} (last: {last!r})")


#: JavaScript: every live Bokeh document of the page (from ``Bokeh.documents`` and the root
#: views in ``Bokeh.index``; a document shown by a widget is only in the latter), as a count.
DOC_COUNT_JS = """() => {
  const B = window.Bokeh;
  if (!B) return -1;
  const docs = new Set(B.documents || []);
  try {
    for (const v of (B.index && B.index.roots) || []) {
      if (v && v.model && v.model.document) docs.add(v.model.document);
    }
  } catch (e) { /* an older BokehJS has no index */ }
  return docs.size;
}"""

#: JavaScript installed once per page: times from an input event to the first animation frame
#: after the last change of a figure. A change is a change event of any live Bokeh document
#: (data pushed in place), a new embed (the ``__rotorbookEmbeds`` redraw counter of a
#: re-embedding panel) or a change of the watched panel's DOM outside the figures (its
#: readouts); every figure drawn in a frame is painted before the next frame's
#: callbacks run, so the frame after the one that saw the change is the repaint. It also keeps
#: the smallest and largest height of a watched element between ``arm`` and the next ``arm``.
LATENCY_HARNESS_JS = """() => {
  if (window.__rbLatency) return true;
  const H = window.__rbLatency = {armed: false, t0: null, paints: [], el: null,
                                  hmin: Infinity, hmax: 0, docs: new Set(), pending: 0};
  for (const type of ['pointerdown', 'mousedown', 'keydown', 'click', 'input', 'change']) {
    document.addEventListener(type, (e) => {
      if (H.armed && H.t0 === null) H.t0 = e.timeStamp;
    }, true);
  }
  // text changes of the panel's readouts count too (a control may change only a table)
  H.observer = new MutationObserver(() => { H.pending += 1; });
  H.arm = (el) => { H.armed = true; H.t0 = null; H.paints = []; H.el = el || null;
                    H.hmin = Infinity; H.hmax = 0; H.observer.disconnect();
                    if (el) H.observer.observe(el, {subtree: true, childList: true,
                                                    characterData: true}); };
  let embeds = window.__rotorbookEmbeds || 0;
  let seen = 0;
  const hook = () => {
    const B = window.Bokeh;
    if (!B) return;
    const all = new Set(B.documents || []);
    try {
      for (const v of (B.index && B.index.roots) || []) {
        if (v && v.model && v.model.document) all.add(v.model.document);
      }
    } catch (e) { /* no index */ }
    for (const d of all) {
      if (H.docs.has(d)) continue;
      H.docs.add(d);
      // also the changes a document applies from the kernel (see kit.plots.QUIET_PATCHES_JS)
      const heard = () => { H.pending += 1; };
      heard.rb_all_events = true;
      d.on_change(heard);
    }
  };
  const frame = () => {
    hook();
    const now = performance.now();
    const e = window.__rotorbookEmbeds || 0;
    if (e !== embeds) { embeds = e; H.pending += 1; }
    if (seen > 0 && H.armed) H.paints.push(now);
    seen = H.pending; H.pending = 0;
    if (H.el && H.armed) {
      const h = H.el.getBoundingClientRect().height;
      if (h < H.hmin) H.hmin = h;
      if (h > H.hmax) H.hmax = h;
    }
    requestAnimationFrame(frame);
  };
  requestAnimationFrame(frame);
  return true;
}"""

#: JavaScript: the state of the harness (input time, repaint times after it, heights).
LATENCY_STATE_JS = """() => {
  const H = window.__rbLatency;
  return {t0: H.t0, paints: H.paints.filter((t) => H.t0 !== null && t >= H.t0),
          now: performance.now(), hmin: H.hmin, hmax: H.hmax};
}"""

#: JavaScript: run Python in the notebook's kernel and return its printed output.
KERNEL_EXEC_JS = """async (code) => {
  const k = window.jupyterapp.shell.currentWidget.sessionContext.session.kernel;
  const f = k.requestExecute({code: code, silent: false, store_history: false});
  let out = '';
  f.onIOPub = (m) => {
    if (m.header.msg_type === 'stream') out += m.content.text;
    if (m.header.msg_type === 'error') out += m.content.ename + ': ' + m.content.evalue;
  };
  await f.done;
  return out;
}"""


def open_and_run(page, url: str, timeout_s: float = 180.0) -> None:
    """Open a notebook in JupyterLab, wait for an idle kernel, run all cells, wait for the end."""
    page.goto(url, timeout=60_000)
    page.wait_for_function(
        "() => window.jupyterapp && window.jupyterapp.shell.currentWidget"
        " && window.jupyterapp.shell.currentWidget.sessionContext"
        " && window.jupyterapp.shell.currentWidget.sessionContext.session"
        " && window.jupyterapp.shell.currentWidget.sessionContext.session.kernel"
        " && window.jupyterapp.shell.currentWidget.sessionContext.session.kernel.status"
        " === 'idle'", timeout=60_000)
    page.evaluate("() => { window.rbRunAllDone = undefined; window.jupyterapp.commands"
                  ".execute('notebook:run-all-cells').then(ok => { window.rbRunAllDone ="
                  " String(ok); }, err => { window.rbRunAllDone = 'error: ' + err; }); }")
    page.wait_for_function("() => window.rbRunAllDone !== undefined",
                           timeout=timeout_s * 1000)
    done = page.evaluate("() => window.rbRunAllDone")
    if done != "true":
        errors = page.locator(".jp-OutputArea-output[data-mime-type="
                              "'application/vnd.jupyter.stderr']").all_inner_texts()
        raise AssertionError(f"run all cells did not succeed ({done}): {errors[:2]}")


def panel_locator(page, title: str):
    """The output area holding the live widget of the panel whose title starts with ``title``."""
    return (page.locator(".jp-OutputArea-output")
            .filter(has=page.locator(".widget-vbox"))
            .filter(has_text=title))


def measure(page, panel, act, settle_s: float = 0.6, timeout_s: float = 20.0) -> dict:
    """Arm the harness on ``panel``, call ``act()``, wait until the figures settle.

    Returns ``{"ms": input-to-repaint in ms or None when nothing redrew, "hmin", "hmax"}``.
    """
    page.evaluate(LATENCY_HARNESS_JS)
    panel.evaluate("(el) => window.__rbLatency.arm(el)")
    act()
    deadline = time.monotonic() + timeout_s
    last_n, last_change = 0, time.monotonic()
    st = page.evaluate(LATENCY_STATE_JS)
    while time.monotonic() < deadline:
        st = page.evaluate(LATENCY_STATE_JS)
        n = len(st["paints"])
        if n != last_n:
            last_n, last_change = n, time.monotonic()
        elif n and time.monotonic() - last_change > settle_s:
            break
        time.sleep(0.05)
    page.evaluate("() => { window.__rbLatency.armed = false; }")
    ms = (st["paints"][-1] - st["t0"]) if st["paints"] and st["t0"] is not None else None
    return {"ms": ms, "hmin": st["hmin"], "hmax": st["hmax"]}


#: JavaScript: the data of the first ColumnDataSource holding column ``col`` (or, for
#: ``"a,b"``, exactly the sorted columns a and b) in the live Bokeh documents of the page
#: (widget documents first), with the number of documents.
LIVE_DATA_JS = """(col) => {
  const B = window.Bokeh;
  if (!B) return null;
  const docs = [];
  try {
    for (const v of (B.index && B.index.roots) || []) {
      if (v && v.model && v.model.document && !docs.includes(v.model.document))
        docs.push(v.model.document);
    }
  } catch (e) { /* no index */ }
  for (const d of B.documents || []) if (!docs.includes(d)) docs.push(d);
  const plain = (v) => (v && typeof v.length === 'number' && typeof v !== 'string')
      ? Array.from(v, plain) : v;
  for (const doc of docs) {
    const models = doc.all_models ? Array.from(doc.all_models)
        : Array.from(doc._all_models.values());
    for (const m of models) {
      if (m.type !== 'ColumnDataSource') continue;
      const d = m.data instanceof Map ? Object.fromEntries(m.data) : m.data;
      const exact = col.includes(',');
      const hit = d && (exact ? Object.keys(d).sort().join(',') === col : col in d);
      if (hit) {
        const out = {};
        for (const k of Object.keys(d).sort()) out[k] = plain(d[k]);
        return {ndocs: docs.length, data: out};
      }
    }
  }
  return {ndocs: docs.length, data: null};
}"""

#: JavaScript: the notices shown over figures (visible Labels with text) and whether every
#: data range of the live documents has finite bounds (the axes are drawn).
NOTICES_AND_RANGES_JS = """() => {
  const B = window.Bokeh;
  const docs = new Set();
  for (const v of (B.index && B.index.roots) || []) {
    if (v && v.model && v.model.document) docs.add(v.model.document);
  }
  const notices = [];
  const bad = [];
  for (const doc of docs) {
    for (const m of doc.all_models) {
      if (m.type === 'Label' && m.visible && m.text && m.x_units === 'screen'
          && m.y_units === 'screen') notices.push(m.text);
      if (m.type === 'DataRange1d' || m.type === 'Range1d') {
        if (!(Number.isFinite(m.start) && Number.isFinite(m.end) && m.end > m.start))
          bad.push([m.id, m.start, m.end]);
      }
    }
  }
  return {notices: notices, bad_ranges: bad};
}"""


#: JavaScript run before a page loads: every WebSocket frame, both ways, with its time
#: (``performance.now()``, the clock of input events) and size, kept for :data:`FRAMES_JS`.
WS_LOG_INIT_JS = """(() => {
  if (window.__rbWsLog) return;
  const log = window.__rbWsLog = [];
  const Orig = window.WebSocket;
  const size = (d) => (d == null ? 0 : (d.byteLength !== undefined ? d.byteLength :
                       (d.size !== undefined ? d.size : d.length)));
  class Logged extends Orig {
    constructor(...a) {
      super(...a);
      this.addEventListener('message', (e) => {
        log.push({dir: 'in', t: performance.now(), size: size(e.data), data: e.data});
      });
    }
    send(d) {
      log.push({dir: 'out', t: performance.now(), size: size(d), data: d});
      return super.send(d);
    }
  }
  window.WebSocket = Logged;
})();"""

#: JavaScript: the kernel messages of the WebSocket log from index ``from`` (JSON or the
#: binary v1 kernel protocol), each as {dir, t, size, kind}; kind is the message type, and
#: for a widget message its method and, for a figure patch, "patch" (kernel to page) or
#: "jsevent" (page to kernel).
FRAMES_JS = """(from) => {
  const td = new TextDecoder();
  const out = [];
  for (const r of (window.__rbWsLog || []).slice(from)) {
    let msg = null;
    try {
      if (typeof r.data === 'string') msg = JSON.parse(r.data);
      else {
        const dv = new DataView(r.data);
        const n = Number(dv.getBigUint64(0, true));
        const offs = [];
        for (let i = 0; i < n; i++) offs.push(Number(dv.getBigUint64(8 * (i + 1), true)));
        const part = (i) => td.decode(new Uint8Array(r.data, offs[i],
            (i + 1 < n ? offs[i + 1] : r.data.byteLength) - offs[i]));
        msg = {header: JSON.parse(part(1)), content: JSON.parse(part(4))};
      }
    } catch (e) { msg = {}; }
    const h = msg.header || {}, c = msg.content || {}, d = c.data || {};
    let kind = h.msg_type || '?';
    if (kind === 'comm_msg') {
      kind += ':' + (d.method || '');
      const cc = d.content || {};
      if (cc.msg) kind += ':' + cc.msg;
      if (cc.event) kind += ':' + cc.event;
    }
    out.push({dir: r.dir, t: r.t, size: r.size, kind: kind});
  }
  return out;
}"""

#: JavaScript: wrap BokehJS's patch application and plot painting to time them (once a page).
BOKEH_TIMING_JS = """() => {
  const B = window.Bokeh;
  if (!B || !B.require) return false;
  if (window.__rbBkLog) return true;
  const log = window.__rbBkLog = [];
  const {Document} = B.require('document');
  const apply = Document.prototype.apply_json_patch;
  Document.prototype.apply_json_patch = function (patch, buffers) {
    const t = performance.now();
    try { return apply.call(this, patch, buffers); }
    finally { log.push({what: 'patch', t: t, ms: performance.now() - t}); }
  };
  try {
    const PV = B.require('models/plots/plot_canvas').PlotView;
    const paint = PV.prototype._actual_paint;
    PV.prototype._actual_paint = function () {
      const t = performance.now();
      try { return paint.call(this); }
      finally { log.push({what: 'paint', t: t, ms: performance.now() - t}); }
    };
  } catch (e) { /* another BokehJS layout: patches timed only */ }
  return true;
}"""
