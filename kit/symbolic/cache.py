"""Disk cache of generated modules: keys, paths, verification, atomic writes.

This module never imports sympy: a warm start (cache hit) computes the key from
``importlib.metadata`` versions and a hash of the source files of ``kit.symbolic``, checks the
stored module's header, and imports it.

A cached module starts with a header::

    CACHE_KEY = "n4-wheel-linear|kit=0.1.0|sympy=1.14.0|src=<sha256>"
    BODY_SHA256 = "<sha256 of everything after the body marker>"
    # ---- generated body ----

On load both are checked; a mismatch (stale or corrupt file) warns with
:class:`kit.errors.CacheWarning` and the caller rebuilds the module.
"""

from __future__ import annotations

import hashlib
import importlib.metadata
import importlib.util
import os
import re
import warnings
from functools import lru_cache
from pathlib import Path
from types import ModuleType

from kit.errors import CacheWarning
from kit.fileio import write_atomic

from .structure import Structure

__all__ = [
    "BODY_MARKER",
    "cache_dir",
    "cache_key",
    "cache_path",
    "load_cached",
    "module_from_source",
    "source_hash",
    "write_atomic",
]

#: Line separating the header from the body of a generated module.
BODY_MARKER = "# ---- generated body ----\n"

_HEADER_RE = re.compile(r'^CACHE_KEY = "(?P<key>[^"\n]*)"\nBODY_SHA256 = "(?P<sha>[0-9a-f]{64})"\n',
                        re.MULTILINE)


def _kit_version() -> str:
    try:
        return importlib.metadata.version("rotorbook")
    except importlib.metadata.PackageNotFoundError:
        import kit

        return kit.__version__


@lru_cache(maxsize=1)
def source_hash() -> str:
    """SHA-256 over the ``kit/symbolic`` source files (names and bytes, sorted by name)."""
    digest = hashlib.sha256()
    for path in sorted(Path(__file__).parent.glob("*.py")):
        digest.update(path.name.encode())
        digest.update(b"\0")
        digest.update(path.read_bytes())
        digest.update(b"\0")
    return digest.hexdigest()


def cache_key(structure: Structure) -> str:
    """The full cache key of ``structure``'s generated module (no sympy import).

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    sympy_version = importlib.metadata.version("sympy")
    return (
        f"{structure.key}|kit={_kit_version()}|sympy={sympy_version}|src={source_hash()}"
    )


def cache_dir() -> Path:
    """``$ROTORBOOK_CACHE_DIR`` if set, else the platform's user cache dir for rotorbook."""
    env = os.environ.get("ROTORBOOK_CACHE_DIR")
    if env:
        return Path(env)
    import platformdirs

    return Path(platformdirs.user_cache_dir("rotorbook"))


def cache_path(structure: Structure) -> Path:
    """Path of the cached module of ``structure`` (the file may not exist yet).

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    key = cache_key(structure)
    tag = hashlib.sha256(key.encode()).hexdigest()[:16]
    name = f"rotorbook_gen_{structure.key.replace('-', '_')}_{tag}.py"
    return cache_dir() / "symbolic" / name


def body_sha256(body: str) -> str:
    """Checksum of a module body, as stored in its header.

    Parameters
    ----------
    body : str
        The module text after the header marker.
    """
    return hashlib.sha256(body.encode("utf-8")).hexdigest()


def check_source(text: str, key: str) -> str | None:
    """Return ``None`` when ``text`` is a valid module for ``key``, else the reason it is not.

    Parameters
    ----------
    text : str
        The whole module source.
    key : str
        The cache key it must carry (:func:`cache_key`).
    """
    head, sep, body = text.partition(BODY_MARKER)
    if not sep:
        return "no body marker"
    match = _HEADER_RE.search(head)
    if match is None:
        return "no header"
    if match["key"] != key:
        return f"key {match['key']!r} differs from {key!r}"
    if match["sha"] != body_sha256(body):
        return "body checksum mismatch"
    return None


def module_from_source(text: str, name: str, path: Path | None = None) -> ModuleType:
    """Execute generated module source ``text`` as a fresh module called ``name``.

    Parameters
    ----------
    text : str
        Python source of a generated module.
    name : str
        Module name to give it.
    path : Path or None
        File it came from (for tracebacks).
    """
    spec = importlib.util.spec_from_loader(name, loader=None, origin=str(path) if path else None)
    assert spec is not None
    module = importlib.util.module_from_spec(spec)
    if path is not None:
        module.__file__ = str(path)
    code = compile(text, str(path) if path else f"<{name}>", "exec")
    exec(code, module.__dict__)
    return module


def load_cached(structure: Structure) -> ModuleType | None:
    """Load ``structure``'s module from the disk cache, or return ``None`` on a miss.

    A file that exists but fails verification (stale key, corrupt body, syntax error)
    emits :class:`~kit.errors.CacheWarning` and counts as a miss.

    Parameters
    ----------
    structure : Structure
        Rotor count, wheel, drag law.
    """
    path = cache_path(structure)
    key = cache_key(structure)
    reason: str | None
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    except (OSError, UnicodeDecodeError) as exc:
        reason = f"unreadable ({exc})"
    else:
        reason = check_source(text, key)
        if reason is None:
            try:
                return module_from_source(text, _module_name(path), path)
            except Exception as exc:  # a verified but broken file: rebuild it
                reason = f"failed to import ({type(exc).__name__}: {exc})"
    warnings.warn(
        f"cached generated module {path} is stale or corrupt ({reason}); rebuilding it",
        CacheWarning,
        stacklevel=3,
    )
    return None


def _module_name(path: Path) -> str:
    return "kit._generated." + path.stem
