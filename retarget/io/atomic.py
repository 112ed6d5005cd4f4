"""Atomic file output: write next to the destination, then rename, so there is never a half file."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterable
from pathlib import Path

from ..errors import RetargetError

__all__ = ["atomic_write"]


def _read_umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


# Read once, at import: changing the umask to read it is not safe while other threads create files.
_UMASK = _read_umask()


def atomic_write(path: str | os.PathLike, data: bytes | Iterable[bytes]) -> Path:
    """Write ``data`` (bytes, or an iterable of bytes pieces written in turn) to ``path`` through a
    temporary file in the same folder and an atomic rename. An error while the pieces are produced
    leaves no file behind."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise RetargetError("output folder does not exist", path=str(folder))
    if path.is_dir():
        raise RetargetError("is a folder, expected a file name to write", path=str(path))
    try:
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{path.name}.", suffix=".part")
    except OSError as exc:
        raise RetargetError(f"cannot write here: {exc.strerror}", path=str(path)) from None
    try:
        # mkstemp makes the file private (0600); give it the permissions a plain open() would.
        os.fchmod(fd, 0o666 & ~_UMASK)
        with os.fdopen(fd, "wb") as fh:
            if isinstance(data, (bytes, bytearray, memoryview)):
                fh.write(data)
            else:
                for piece in data:
                    fh.write(piece)
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        if isinstance(exc, OSError):
            raise RetargetError(f"cannot write: {exc.strerror or exc}", path=str(path)) from None
        raise
    return path
