"""Small file helpers shared by the layers that write files (generated code, records)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_atomic(path: Path, text: str) -> None:
    """Write ``text`` (UTF-8) to ``path`` atomically: a temporary file in the same folder,
    flushed to disk, then ``os.replace``; ordinary file permissions (0666 less the umask).

    Readers see the old file or the new one, never a partial write; a failure leaves no
    temporary file behind.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.chmod(tmp, 0o666 & ~_umask())
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
