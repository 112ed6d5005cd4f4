"""Atomic file output: write next to the destination, then rename, so there is never a half file."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterable
from pathlib import Path

from ..errors import RetargetError

__all__ = ["atomic_write"]


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def atomic_write(path: str | os.PathLike, data: bytes | Iterable[bytes]) -> Path:
    """Write ``data`` (bytes, or an iterable of bytes pieces written in turn) to ``path`` through a
    temporary file in the same folder and an atomic rename. An error while the pieces are produced
    leaves no file behind."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise RetargetError("output folder does not exist", path=str(folder))
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{path.name}.", suffix=".part")
    try:
        # mkstemp makes the file private (0600); give it the permissions a plain open() would.
        os.fchmod(fd, 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as fh:
            if isinstance(data, (bytes, bytearray, memoryview)):
                fh.write(data)
            else:
                for piece in data:
                    fh.write(piece)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return path
