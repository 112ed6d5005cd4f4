"""Reading and writing clips and rigs; the format follows the file extension."""

from __future__ import annotations

import os
from pathlib import Path

from ..errors import RetargetError
from ..motion import Motion
from .atomic import atomic_write
from .bvh import format_bvh, parse_bvh, read_bvh, read_bvh_skeleton, write_bvh
from .gltf import GLTF_EXTENSIONS, read_gltf, write_gltf

__all__ = ["read_skeleton", "read_motion", "write_motion", "read_bvh", "read_bvh_skeleton", "write_bvh",
           "parse_bvh", "format_bvh", "atomic_write", "read_gltf", "write_gltf"]


def read_motion(path: str | os.PathLike, fps: float | None = None) -> Motion:
    """Read a clip or rig: .bvh, or .gltf/.glb (the file's first animation, else its rest pose)."""
    ext = Path(path).suffix.lower()
    if ext == ".bvh":
        return read_bvh(path, fps=fps)
    if ext in GLTF_EXTENSIONS:
        return read_gltf(path, fps=fps)
    raise RetargetError(f"unsupported file type {ext or '(none)'!r}: expected .bvh, .gltf or .glb",
                        path=str(path))


def read_skeleton(path: str | os.PathLike):
    """Only the skeleton of a clip or rig file (for BVH, without reading the frames)."""
    ext = Path(path).suffix.lower()
    if ext == ".bvh":
        return read_bvh_skeleton(path)
    return read_motion(path).skeleton


def write_motion(path: str | os.PathLike, motion: Motion, template: str | os.PathLike | None = None) -> Path:
    """Write a clip; the format follows the extension. For .gltf/.glb, template is the rig file whose
    mesh, skin and materials are copied (None writes a skeleton-only file); BVH ignores it."""
    ext = Path(path).suffix.lower()
    if ext == ".bvh":
        return write_bvh(path, motion)
    if ext in GLTF_EXTENSIONS:
        return write_gltf(path, motion, template=template)
    raise RetargetError(f"unsupported output type {ext or '(none)'!r}: expected .bvh, .gltf or .glb",
                        path=str(path))
