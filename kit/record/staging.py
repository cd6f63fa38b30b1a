"""One writer per record folder, and record sets that appear whole or not at all.

A record folder ``DIR`` (``rotorbook record --out DIR``) holds the records of one design file,
named by its SHA-256 in ``DIR/.rotorbook-set.json``. Writing into it goes through
:class:`RecordFolder`:

1. **Lock.** ``.DIR.rotorbook-lock`` beside the folder is locked with :mod:`filelock` (``flock``
   on POSIX) for the whole run, and the owner's pid and start time are written into it. A
   second run fails at once (``wait=False``) or waits. The operating system drops the lock when
   its owner dies, so a lock is never stale; a lock file that still names an owner when the
   lock is taken was left by a run that died, and what that run left behind is cleared.
2. **Check.** A folder that holds another design's records (another SHA-256) is refused unless
   ``force``; an existing record of the same workbook is refused unless ``force``; a folder
   holding anything that is not a record (a design file, a sub-folder) is always refused, since
   the folder is replaced as a whole.
3. **Stage.** The new set is written into ``.DIR.staging-<pid>-<random>`` beside the folder,
   starting from hard links to the records it keeps (same design, other workbooks).
4. **Swap.** When every record and the index are written, the staging folder and ``DIR`` are
   exchanged in one ``renameat2(RENAME_EXCHANGE)`` call on Linux; elsewhere (or where the file
   system refuses it) ``DIR`` is renamed to ``.DIR.previous-<pid>-<random>`` and the staging
   folder to ``DIR``, and a run that dies between the two renames has the previous set put
   back by the next run. Then the previous set is removed.

A run that dies at any point leaves either the previous set or the new one in ``DIR``, never a
mix; a failure while writing (disk full, no permission) removes the staging folder and raises
:class:`~kit.errors.RecordError` with one line.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import datetime as _dt
import errno
import json
import os
import re
import secrets
import shutil
import sys
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

from kit.errors import RecordError
from kit.fileio import write_atomic

#: The file in a record folder that names the design its records belong to.
MANIFEST = ".rotorbook-set.json"
MANIFEST_SCHEMA = "rotorbook.recordset/1"
#: Jupyter's autosave folder, carried over from the previous set.
CHECKPOINTS = ".ipynb_checkpoints"
#: File suffixes a record folder may hold.
RECORD_SUFFIXES = (".html", ".ipynb")

#: Errors of writing files that become one line and exit 2 (others keep their traceback).
_WRITE_ERRNOS = frozenset({errno.ENOSPC, errno.EDQUOT, errno.EFBIG, errno.EROFS, errno.EACCES,
                           errno.EPERM, errno.EIO, errno.ENAMETOOLONG})
_RENAME_EXCHANGE = 2  # linux/fs.h
_AT_FDCWD = -100


def lock_path(folder: Path) -> Path:
    """The lock file beside ``folder``: ``.<name>.rotorbook-lock``."""
    return folder.parent / f".{folder.name}.rotorbook-lock"


def _side(folder: Path, kind: str) -> Path:
    return folder.parent / f".{folder.name}.{kind}-{os.getpid()}-{secrets.token_hex(4)}"


def _leftovers(folder: Path, kind: str) -> list[Path]:
    pattern = re.compile(re.escape(f".{folder.name}.{kind}-") + r"\d+-[0-9a-f]{8}$")
    try:
        return sorted(p for p in folder.parent.iterdir() if pattern.match(p.name))
    except OSError:
        return []


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _parse_owner(data: bytes) -> dict:
    try:
        owner = json.loads(data.decode("utf-8")) if data.strip() else {}
    except ValueError:
        return {}
    return owner if isinstance(owner, dict) else {}


def _read_owner(path: Path) -> dict:
    try:
        return _parse_owner(path.read_bytes()[:4096])
    except OSError:
        return {}


def _oserror_line(exc: OSError, folder: Path) -> str:
    what = exc.strerror or str(exc)
    where = f" ({exc.filename})" if exc.filename else ""
    if exc.errno == errno.ENOSPC:
        fix = "free some space or choose another --out folder"
    elif exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        fix = "choose a folder you may write to (--out)"
    else:
        fix = "check the folder and try again, or choose another --out folder"
    return (f"cannot write the records into {str(folder)!r}: {what}{where}; nothing was "
            f"changed there -> {fix}")


def exchange(a: Path, b: Path) -> bool:
    """Swap two paths atomically (Linux ``renameat2(RENAME_EXCHANGE)``).

    Returns False when the platform or file system does not offer it; OSError otherwise.
    """
    if not sys.platform.startswith("linux"):
        return False
    libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
    fn = getattr(libc, "renameat2", None)
    if fn is None:
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.EINVAL, errno.ENOSYS, errno.ENOTSUP, errno.EOPNOTSUPP):
        return False
    raise OSError(err, os.strerror(err), str(b))


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _link_or_copy(src: str, dst: str) -> None:
    try:
        os.link(src, dst)
    except OSError:
        shutil.copy2(src, dst)


@dataclass(frozen=True)
class FolderSet:
    """What a record folder holds: its design (None: empty or new) and its record files."""

    exists: bool
    sha256: str | None
    name: str
    revision: str
    files: tuple[str, ...]

    @property
    def records(self) -> set[str]:
        return {Path(f).stem for f in self.files if f.endswith(RECORD_SUFFIXES)
                and f != "index.html"}


def read_folder(folder: Path) -> FolderSet:
    """Inspect an existing folder; RecordError when it is not a record folder."""
    if not folder.exists():
        return FolderSet(False, None, "", "", ())
    if not folder.is_dir():
        raise RecordError(f"--out: {str(folder)!r} is a file, not a folder -> name a folder "
                          "(a new one, or one written by rotorbook record)")
    names = sorted(os.listdir(folder))
    foreign = [n for n in names if n not in (MANIFEST, CHECKPOINTS)
               and not (n.endswith(RECORD_SUFFIXES) and (folder / n).is_file())]
    if foreign:
        raise RecordError(f"--out: {str(folder)!r} holds {foreign[0]!r}, which is not a record; "
                          "the folder is replaced as a whole when records are written -> name "
                          "a new or empty folder, or one written by rotorbook record")
    files = tuple(n for n in names if n.endswith(RECORD_SUFFIXES))
    if not files:
        return FolderSet(True, None, "", "", ())
    meta = _read_owner(folder / MANIFEST)
    sha = meta.get("sha256") if meta.get("schema") == MANIFEST_SCHEMA else None
    if not isinstance(sha, str):
        sha = _legacy_sha(folder / "index.html")
    return FolderSet(True, sha or "", str(meta.get("design_name", "")),
                     str(meta.get("revision", "")), files)


def _legacy_sha(index: Path) -> str:
    """The design SHA-256 an index page written before manifests existed shows, or ""."""
    try:
        head = index.read_text(encoding="utf-8", errors="replace")[:20000]
    except OSError:
        return ""
    m = re.search(r"SHA-256</th><td[^>]*>([0-9a-f]{64})<", head)
    return m.group(1) if m else ""


class RecordFolder:
    """The lock, the staging folder and the swap of one record folder (a context manager).

    Parameters
    ----------
    folder : str or Path
        The record folder (``--out``).
    wait : bool
        Wait for another run that holds the folder instead of failing at once.

    Use::

        with RecordFolder(out) as rf:
            stage = rf.prepare(design, names, force)   # checks, then the staging folder
            ...write records and the index into stage...
            rf.commit(design)                          # the swap
    """

    def __init__(self, folder: str | Path, wait: bool = False) -> None:
        self.shown = Path(folder)
        self.folder = Path(os.path.abspath(folder))
        self.wait = wait
        self.stage: Path | None = None
        self.notes: list[str] = []
        self._lock = None
        self._committed = False

    # -- lock -------------------------------------------------------------------------------------

    def _check_target(self) -> None:
        if self.folder.parent == self.folder:
            raise RecordError(f"--out: {str(self.shown)!r} is the root folder -> name a folder "
                              "for the records")
        cwd = Path.cwd().resolve()
        real = self.folder.resolve()
        if real == cwd or real in cwd.parents:
            raise RecordError(f"--out: {str(self.shown)!r} is the current folder or holds it; "
                              "it is replaced as a whole -> name a sub-folder, e.g. records")
        read_folder(self.folder)  # a file, or a folder of other things: refused before locking

    def _take_ownership(self, lp: Path) -> None:
        """Under the lock: note a previous owner that died, then write this run's pid."""
        with open(lp, "r+b") as fh:
            stale = _parse_owner(fh.read(4096))
            pid = stale.get("pid")
            if isinstance(pid, int) and pid != os.getpid() and not _pid_alive(pid):
                self.notes.append(f"a previous run into {str(self.shown)!r} (pid {pid}, "
                                  f"started {stale.get('started', '?')}) stopped without "
                                  "finishing; what it left was removed and its records were "
                                  "not kept")
            fh.seek(0)
            fh.truncate()
            fh.write(json.dumps({"pid": os.getpid(), "started": _dt.datetime.now(_dt.UTC)
                                 .isoformat(timespec="seconds"),
                                 "folder": str(self.folder)}).encode("utf-8"))
            fh.flush()

    def __enter__(self) -> RecordFolder:
        from filelock import FileLock, Timeout

        self._check_target()
        lp = lock_path(self.folder)
        try:
            self.folder.parent.mkdir(parents=True, exist_ok=True)
            lock = FileLock(lp, timeout=0)
            try:
                lock.acquire(timeout=-1 if self.wait else 0)
            except Timeout:
                owner = _read_owner(lp)
                who = (f" (pid {owner['pid']}, started {owner.get('started', '?')})"
                       if owner.get("pid") else "")
                raise RecordError(f"--out: {str(self.shown)!r} is being written by another "
                                  f"rotorbook record run{who} -> wait for it to finish, add "
                                  "--wait to queue behind it, or choose another --out folder"
                                  ) from None
        except OSError as exc:
            raise RecordError(_oserror_line(exc, self.shown)) from None
        self._lock = lock
        try:
            self._take_ownership(lp)
            self._recover()
        except OSError as exc:
            self._release()
            raise RecordError(_oserror_line(exc, self.shown)) from None
        return self

    def _recover(self) -> None:
        """Undo what a run that died left: a half swap, staging folders, an old set."""
        previous = _leftovers(self.folder, "previous")
        if previous and not self.folder.exists():
            os.rename(previous[-1], self.folder)  # died between the two renames: put it back
            previous = previous[:-1]
        for p in previous + _leftovers(self.folder, "staging"):
            shutil.rmtree(p, ignore_errors=True)

    def _release(self) -> None:
        if self._lock is not None:
            try:
                with open(lock_path(self.folder), "r+b") as fh:
                    fh.truncate(0)  # no owner: a later run sees a clean hand-over
            except OSError:
                pass
            self._lock.release()
            self._lock = None

    def __exit__(self, exc_type, exc, tb) -> None:
        try:
            if self.stage is not None and not self._committed:
                shutil.rmtree(self.stage, ignore_errors=True)
        finally:
            self._release()
        if isinstance(exc, OSError) and exc.errno in _WRITE_ERRNOS:
            raise RecordError(_oserror_line(exc, self.shown)) from None

    # -- check and stage --------------------------------------------------------------------------

    def prepare(self, design, names: Iterable[str], force: bool) -> Path:
        """Check the folder against ``design``; make and return the staging folder.

        Raises RecordError for another design's records or an existing record without
        ``force``.
        """
        names = list(names)
        held = read_folder(self.folder)
        same = held.sha256 is None or held.sha256 == design.sha256
        if not same and not force:
            who = (f"{held.name!r} rev. {held.revision!r} (design file SHA-256 "
                   f"{held.sha256[:12]}...)" if held.name and held.sha256
                   else "another design (or one this kit cannot identify)")
            raise RecordError(f"--out: {str(self.shown)!r} holds the records of {who}, not of "
                              f"{design.name!r} rev. {design.revision!r} -> choose another "
                              "--out folder, or --force to replace that whole set")
        if same and not force:
            existing = [str(self.shown / f) for f in held.files
                        if Path(f).stem in names and f != "index.html"]
            if existing:
                raise RecordError(f"record exists: {', '.join(existing)} -> use --force "
                                  "(force=True) to replace it")
        try:
            self.stage = _side(self.folder, "staging")
            self.stage.mkdir()
            if same and held.exists:
                for f in held.files:
                    if f != "index.html" and Path(f).stem not in names:
                        _link_or_copy(str(self.folder / f), str(self.stage / f))
                if (self.folder / CHECKPOINTS).is_dir():
                    shutil.copytree(self.folder / CHECKPOINTS, self.stage / CHECKPOINTS,
                                    copy_function=_link_or_copy)
        except OSError as exc:
            raise RecordError(_oserror_line(exc, self.shown)) from None
        return self.stage

    # -- swap -------------------------------------------------------------------------------------

    def commit(self, design) -> None:
        """Write the manifest into the staging folder and put the set in place."""
        if self.stage is None:
            raise RecordError("nothing staged")
        files = sorted(n for n in os.listdir(self.stage) if n.endswith(RECORD_SUFFIXES))
        write_atomic(self.stage / MANIFEST, json.dumps({
            "schema": MANIFEST_SCHEMA, "design_name": design.name, "revision": design.revision,
            "sha256": design.sha256, "files": files,
        }, indent=1) + "\n")
        _fsync_dir(self.stage)
        if not self.folder.exists():
            os.rename(self.stage, self.folder)
            old = None
        elif exchange(self.stage, self.folder):
            old = self.stage  # now holds the previous set
        else:
            old = _side(self.folder, "previous")
            os.rename(self.folder, old)
            os.rename(self.stage, self.folder)
        self._committed = True
        _fsync_dir(self.folder.parent)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
