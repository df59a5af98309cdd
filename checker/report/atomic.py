"""Atomic file writes: a temporary file in the target's directory, fsync, then rename.

An interrupted run leaves either the previous report or the new one, never a
half-written file, and no temporary file behind on ordinary errors.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import TextIO


@contextlib.contextmanager
def atomic_text(path: Path, encoding: str = "utf-8") -> Iterator[TextIO]:
    """Open a text handle whose content replaces ``path`` only when the block succeeds."""
    path = Path(path)
    fd, tmp_name = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    tmp = Path(tmp_name)
    try:
        with os.fdopen(fd, "w", encoding=encoding, newline="") as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise
    _fsync_dir(path.parent)


def write_text_atomic(path: Path, text: str, encoding: str = "utf-8") -> Path:
    with atomic_text(path, encoding=encoding) as handle:
        handle.write(text)
    return Path(path)


def _fsync_dir(directory: Path) -> None:
    """Make the rename itself durable where the platform allows it (best effort)."""
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
