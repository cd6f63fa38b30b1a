"""Run a workbook headless: inject the design path, execute with nbclient, normalise the result.

The parameters convention is papermill's (without depending on papermill): the workbook's one
cell tagged ``parameters`` holds the defaults, and a new cell tagged ``injected-parameters`` is
inserted right after it with ``DESIGN_PATH = "<absolute path>"``.

Normalisation makes the executed notebook depend only on its inputs: execution timestamps and
kernel metadata are dropped, Python's hash seed is fixed, BokehJS model ids are the simple
integer ones (``BOKEH_SIMPLE_IDS``), and the UUIDs that Bokeh and ipywidgets still draw at
random (document ids, div ids, widget model ids) are renumbered in order of appearance. Ids
that occur in the design file's own text (a revision that is a 32-digit hex string, a serial
number that is a UUID) are kept byte for byte: :func:`design_ids` lists them and
:func:`normalise` leaves them alone.

A run stopped with SIGTERM unwinds (:func:`sigterm_unwinds`): the kernel is shut down, its
connection file (kept in the run's own temporary folder) removed, and :class:`Terminated`
raised to the caller.
"""

from __future__ import annotations

import contextlib
import copy
import json
import os
import re
import shutil
import signal
import sys
import tempfile
import threading
import tomllib
import uuid
from dataclasses import dataclass
from pathlib import Path

import nbformat

from kit import BLAS_THREAD_VARS
from kit.errors import RecordError, Terminated

PARAMETERS_TAG = "parameters"
INJECTED_TAG = "injected-parameters"
#: Name of the kernelspec written for the current interpreter when none is named.
OWN_KERNEL_NAME = "rotorbook-python"

_UUID_RE = re.compile(
    r"(?<![0-9a-fA-F])[0-9a-fA-F]{8}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{12}"
    r"(?![0-9a-fA-F])"
)
_HEX32_RE = re.compile(r"(?<![0-9a-fA-F-])[0-9a-f]{32}(?![0-9a-fA-F-])")
_ADDRESS_RE = re.compile(r" at 0x[0-9a-fA-F]{6,16}>")


@dataclass(frozen=True)
class CellFailure:
    """Where and how a workbook failed: ``cell`` is 1-based in the executed notebook."""

    ename: str
    evalue: str
    cell: int | None


def parameters_index(nb) -> int:
    """Index of the one cell tagged ``parameters``; RecordError when there is none or several."""
    found = [i for i, c in enumerate(nb.cells)
             if PARAMETERS_TAG in c.get("metadata", {}).get("tags", [])]
    if len(found) != 1:
        raise RecordError(f"a workbook needs exactly one cell tagged {PARAMETERS_TAG!r}, found "
                          f"{len(found)}")
    return found[0]


def design_path_line(path: str) -> str:
    """The Python assignment of the design path, quoted with json (a valid Python string)."""
    return f"DESIGN_PATH = {json.dumps(str(path))}"


def clear_outputs(nb):
    """A copy of ``nb`` without any stored output, execution count or widget state.

    A template's stored outputs come from another run (its demo design, an older kit): a
    record executes the template with them cleared, so that it holds only what its own run
    computed, and a cell that does not run shows nothing.
    """
    nb = copy.deepcopy(nb)
    nb.metadata.pop("widgets", None)
    for cell in nb.cells:
        if cell.cell_type == "code":
            cell.outputs = []
            cell.execution_count = None
        cell.get("metadata", {}).pop("execution", None)
    return nb


def inject_parameters(nb, design_path: Path):
    """A copy of ``nb``, outputs cleared (:func:`clear_outputs`), with the
    ``injected-parameters`` cell after the ``parameters`` cell."""
    nb = clear_outputs(nb)
    nb.cells = [c for c in nb.cells if INJECTED_TAG not in c.get("metadata", {}).get("tags", [])]
    i = parameters_index(nb)
    cell = nbformat.v4.new_code_cell(
        "# Parameters injected by `rotorbook record`\n" + design_path_line(str(design_path)),
        metadata={"tags": [INJECTED_TAG]},
    )
    cell["id"] = INJECTED_TAG
    nb.cells.insert(i + 1, cell)
    return nb


def rewrite_parameters(nb, design_path: str):
    """A copy of ``nb``, outputs cleared, whose ``parameters`` cell sets ``DESIGN_PATH`` to
    ``design_path``."""
    nb = clear_outputs(nb)
    cell = nb.cells[parameters_index(nb)]
    line = design_path_line(design_path)
    src, n = re.subn(r"(?m)^DESIGN_PATH\s*=.*$", lambda _m: line, cell.source)
    cell.source = src if n else (src.rstrip("\n") + "\n" + line).lstrip("\n")
    return nb


# -- kernel ---------------------------------------------------------------------------------------


@contextlib.contextmanager
def sigterm_unwinds():
    """While inside, SIGTERM raises :class:`Terminated` instead of ending the process at once.

    Only in the main thread and only where SIGTERM has its default action (an application
    that handles SIGTERM itself keeps its handler).
    """
    if threading.current_thread() is not threading.main_thread() \
            or signal.getsignal(signal.SIGTERM) is not signal.SIG_DFL:
        yield
        return

    def _raise(signum, frame):
        raise Terminated(f"stopped by signal {signum}")

    signal.signal(signal.SIGTERM, _raise)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, signal.SIG_DFL)


#: Prefix of a run's temporary folder (kernelspec and kernel connection files).
_TMP_PREFIX = "rotorbook-kernel-"


def _remove_dead_runs_tmp() -> None:
    """Remove temporary folders of runs that were killed (their pid is gone)."""
    pattern = re.compile(re.escape(_TMP_PREFIX) + r"(\d+)-")
    try:
        entries = list(Path(tempfile.gettempdir()).iterdir())
    except OSError:
        return
    for p in entries:
        m = pattern.match(p.name)
        if not m or int(m.group(1)) == os.getpid():
            continue
        try:
            os.kill(int(m.group(1)), 0)
        except ProcessLookupError:
            shutil.rmtree(p, ignore_errors=True)
        except OSError:
            pass


class Kernel:
    """The kernel to run workbooks in; a context manager that owns a temporary folder.

    With ``kernel_name=None`` a kernelspec for this very interpreter (``sys.executable``) is
    written to the temporary folder, so a record always runs with the kit that made it. A named
    kernelspec must be installed (``jupyter kernelspec list``). Kernel connection files are
    written into the temporary folder too, so closing removes them whatever happened to the
    kernel; folders left by killed runs (their pid is gone) are removed when a new one opens.
    """

    def __init__(self, kernel_name: str | None = None):
        from jupyter_client.kernelspec import KernelSpecManager, NoSuchKernel

        _remove_dead_runs_tmp()
        self._tmp: tempfile.TemporaryDirectory | None = tempfile.TemporaryDirectory(
            prefix=f"{_TMP_PREFIX}{os.getpid()}-")
        self.runtime_dir = self._tmp.name
        if kernel_name is None:
            spec_dir = Path(self._tmp.name) / OWN_KERNEL_NAME
            spec_dir.mkdir()
            (spec_dir / "kernel.json").write_text(json.dumps({
                # log level ERROR: the kernel's start-up notices (e.g. that it talks over TCP
                # on the loopback without encryption) are not the record's business
                "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}",
                         "--IPKernelApp.log_level=ERROR"],
                "display_name": "Python (rotorbook record)",
                "language": "python",
            }), encoding="utf-8")
            self.ksm = KernelSpecManager(kernel_dirs=[self._tmp.name])
            self.name = OWN_KERNEL_NAME
        else:
            self.ksm = KernelSpecManager()
            self.name = kernel_name
        try:
            self.ksm.get_kernel_spec(self.name)
        except NoSuchKernel:
            known = ", ".join(sorted(self.ksm.find_kernel_specs())) or "none"
            self.close()
            raise RecordError(f"kernel {kernel_name!r} is not installed -> one of: {known} "
                              "(or leave it out to use this Python)") from None

    def manager_class(self):
        """A kernel manager class that finds kernelspecs where this object looks and writes
        connection files into this object's temporary folder.

        nbclient then creates, owns and shuts down the kernel and its channels itself.
        """
        from jupyter_client.manager import AsyncKernelManager
        from traitlets import default

        ksm = self.ksm
        runtime_dir = self.runtime_dir

        class _Manager(AsyncKernelManager):
            @default("kernel_spec_manager")
            def _kernel_spec_manager_default(self):
                return ksm

            @default("connection_file")
            def _connection_file_default(self):
                return os.path.join(runtime_dir, f"kernel-{uuid.uuid4()}.json")

        return _Manager

    def close(self) -> None:
        if self._tmp is not None:
            self._tmp.cleanup()
            self._tmp = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def kernel_env() -> dict[str, str]:
    """The kernel's environment: this one, with a fixed hash seed, simple Bokeh ids and one
    BLAS thread.

    BokehJS resources are left as configured: the executed notebook may point at a CDN for
    JupyterLab's sake; the HTML record drops that loader and inlines BokehJS itself.
    """
    env = dict(os.environ)
    env.update({
        "PYTHONHASHSEED": "0",
        "BOKEH_SIMPLE_IDS": "yes",
        "PYDEVD_DISABLE_FILE_VALIDATION": "1",
    })
    # one BLAS thread (small matrices; see kit.cli), unless the caller set a number
    for var in BLAS_THREAD_VARS:
        env.setdefault(var, "1")
    return env


def execute(nb, kernel: Kernel, cwd: Path, timeout: int = 600) -> CellFailure | None:
    """Execute ``nb`` in place; return the failure, or None when every cell ran.

    Execution stops at the first cell that raises; the cells after it keep no outputs.
    """
    from nbclient import NotebookClient
    from nbclient.exceptions import CellExecutionError, CellTimeoutError, DeadKernelError

    client = NotebookClient(
        nb, kernel_name=kernel.name, kernel_manager_class=kernel.manager_class(),
        timeout=timeout, allow_errors=False, record_timing=False,
        store_widget_state=False, resources={"metadata": {"path": str(cwd)}},
    )
    # nbclient shuts the kernel down on SIGTERM and then resets SIGTERM to its default action;
    # the handler in place before (see sigterm_unwinds) is put back, and the signal re-raised
    main = threading.current_thread() is threading.main_thread()
    before = signal.getsignal(signal.SIGTERM) if main else None
    try:
        client.execute(env=kernel_env())
    except CellExecutionError as exc:
        return CellFailure(exc.ename or "Error", _first_line(exc.evalue), _failed_cell(nb))
    except CellTimeoutError as exc:
        return CellFailure("CellTimeoutError", f"a cell ran longer than {timeout} s "
                           f"({_first_line(str(exc))})", _running_cell(nb))
    except DeadKernelError as exc:
        return CellFailure("DeadKernelError", _first_line(str(exc)), _running_cell(nb))
    finally:
        if main and before is not None:
            signal.signal(signal.SIGTERM, before)
        if getattr(client, "_async_cleanup_kernel_future", None) is not None:
            raise Terminated("stopped by SIGTERM while a workbook ran")
    return None


def _first_line(text: str | None) -> str:
    return (text or "").strip().splitlines()[0] if (text or "").strip() else ""


def _failed_cell(nb) -> int | None:
    for i, c in enumerate(nb.cells):
        if c.cell_type == "code" and any(o.output_type == "error" for o in c.get("outputs", [])):
            return i + 1
    return _running_cell(nb)


def _running_cell(nb) -> int | None:
    """The last code cell that got an execution count (the one running when it stopped)."""
    last = None
    for i, c in enumerate(nb.cells):
        if c.cell_type == "code" and c.get("execution_count") is not None:
            last = i + 1
    return last


# -- determinism ----------------------------------------------------------------------------------


def design_ids(path: str | Path) -> frozenset[str]:
    """Every id-like string (UUID, 32 hex digits) in the design file's text and its path.

    :func:`normalise` keeps these byte for byte. The file's raw text is searched, and so is
    every string (and key) TOML parses out of it, since an escape such as ``\\u0030`` can spell
    hex digits that the raw text does not show.
    """
    texts = [str(path)]
    try:
        raw = Path(path).read_bytes().decode("utf-8", errors="replace")
    except OSError:
        raw = ""
    texts.append(raw)
    try:
        _strings(tomllib.loads(raw), texts)
    except tomllib.TOMLDecodeError:
        pass
    found: set[str] = set()
    for t in texts:
        found.update(m.group(0).lower() for m in _UUID_ANY_RE.finditer(t))
        found.update(m.group(0) for m in _HEX32_ANY_RE.finditer(t))
    return frozenset(found)


_UUID_ANY_RE = re.compile(r"[0-9a-fA-F]{8}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-[0-9a-fA-F]{4}-"
                          r"[0-9a-fA-F]{12}")
_HEX32_ANY_RE = re.compile(r"(?<![0-9a-fA-F])[0-9a-f]{32}(?![0-9a-fA-F])")


def _strings(obj, out: list[str]) -> None:
    if isinstance(obj, str):
        out.append(obj)
    elif isinstance(obj, dict):
        for k, v in obj.items():
            out.append(str(k))
            _strings(v, out)
    elif isinstance(obj, list):
        for v in obj:
            _strings(v, out)


class IdMap:
    """Renumber random ids in order of first appearance: ``b0000001-0000-4000-8000-...`` for
    UUIDs, hex for 32-digit model ids, so the same inputs give the same text. Ids in ``keep``
    (from the design file, :func:`design_ids`) are left as they are."""

    def __init__(self, keep: frozenset[str] | set[str] = frozenset()) -> None:
        self.seen: dict[str, str] = {}
        self.keep = frozenset(keep)

    def _uuid(self, m: re.Match) -> str:
        k = m.group(0).lower()
        if k in self.keep:
            return m.group(0)
        if k not in self.seen:
            n = len(self.seen) + 1
            self.seen[k] = f"b{n:07d}-0000-4000-8000-000000000000"
        return self.seen[k]

    def _hex(self, m: re.Match) -> str:
        k = m.group(0)
        if k in self.keep:
            return k
        if k not in self.seen:
            self.seen[k] = f"{len(self.seen) + 1:032x}"
        return self.seen[k]

    def __call__(self, text: str) -> str:
        text = _UUID_RE.sub(self._uuid, text)
        text = _HEX32_RE.sub(self._hex, text)
        return _ADDRESS_RE.sub(" at 0x...>", text)


def normalise(nb, keep: frozenset[str] | set[str] = frozenset()) -> None:
    """Strip what varies between runs from an executed notebook, in place.

    ``keep``: ids that came from the design file (:func:`design_ids`), left unchanged.
    """
    ids = IdMap(keep)
    nb.metadata.pop("widgets", None)
    nb.metadata.pop("papermill", None)
    for cell in nb.cells:
        md = cell.get("metadata", {})
        md.pop("execution", None)
        for out in cell.get("outputs", []):
            out.pop("transient", None)
            if "data" in out:
                out["data"] = _walk(out["data"], ids)
            if "metadata" in out:
                out["metadata"] = _walk(out["metadata"], ids)
            if out.get("output_type") == "stream":
                out["text"] = ids(out["text"])
            if out.get("output_type") == "error":
                out["traceback"] = [ids(t) for t in out["traceback"]]
                out["evalue"] = ids(out["evalue"])


def _walk(obj, ids: IdMap):
    if isinstance(obj, str):
        return ids(obj)
    if isinstance(obj, list):
        return [_walk(x, ids) for x in obj]
    if isinstance(obj, dict):
        return type(obj)((k, _walk(v, ids)) for k, v in obj.items())
    return obj
