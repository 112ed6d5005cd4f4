"""Skeleton: the joint hierarchy and its rest pose.

Joints are stored in topological order (every parent before its children, the root first with parent
-1). Offsets are rest local translations in the file's units; rest rotations are local quaternions
(identity for BVH, whatever the file says for glTF). A leaf joint may carry an end-site tip offset so the
last bone has a direction and a length.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from . import quat
from .errors import SkeletonError

__all__ = ["Skeleton", "POSITION_CHANNELS", "ROTATION_CHANNELS"]

POSITION_CHANNELS = ("Xposition", "Yposition", "Zposition")
ROTATION_CHANNELS = ("Xrotation", "Yrotation", "Zrotation")
_DEFAULT_ROOT_CHANNELS = ("Xposition", "Yposition", "Zposition", "Zrotation", "Xrotation", "Yrotation")
_DEFAULT_CHANNELS = ("Zrotation", "Xrotation", "Yrotation")


def _frozen(a: np.ndarray, dtype=np.float64) -> np.ndarray:
    a = np.array(a, dtype=dtype, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class Skeleton:
    """An immutable joint hierarchy.

    names: (J,) unique joint names.
    parents: (J,) int, parents[i] < i, the root has -1.
    offsets: (J, 3) rest local translations, file units.
    rest_rotations: (J, 4) rest local rotations, scalar-last quaternions.
    tips: (J, 3) end-site offsets in the joint's frame, NaN where the joint has none.
    channels: per joint, the BVH channel names in file order (kept so a writer can reproduce them).
    """

    names: tuple[str, ...]
    parents: np.ndarray
    offsets: np.ndarray
    rest_rotations: np.ndarray = None  # type: ignore[assignment]
    tips: np.ndarray = None  # type: ignore[assignment]
    channels: tuple[tuple[str, ...], ...] = None  # type: ignore[assignment]
    source: str | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        names = tuple(str(n) for n in self.names)
        n = len(names)
        if n == 0:
            raise SkeletonError("a skeleton needs at least one joint", path=self.source)
        parents = np.asarray(self.parents, dtype=np.int64)
        if parents.shape != (n,):
            raise SkeletonError(f"parents has shape {parents.shape}, expected ({n},)", path=self.source)
        if parents[0] != -1 or np.any(parents[1:] < 0) or np.any(parents[1:] >= np.arange(1, n)):
            raise SkeletonError("joints must be in topological order with one root first "
                                "(parents[0] == -1 and 0 <= parents[i] < i)", path=self.source)
        seen: dict[str, int] = {}
        for i, name in enumerate(names):
            if name in seen:
                raise SkeletonError(f"duplicate joint name {name!r} (joints {seen[name]} and {i})",
                                    path=self.source)
            seen[name] = i
        offsets = np.asarray(self.offsets, dtype=np.float64)
        if offsets.shape != (n, 3):
            raise SkeletonError(f"offsets has shape {offsets.shape}, expected ({n}, 3)", path=self.source)
        rest = quat.identity((n,)) if self.rest_rotations is None else quat.normalize(self.rest_rotations)
        tips = np.full((n, 3), np.nan) if self.tips is None else np.asarray(self.tips, dtype=np.float64)
        if tips.shape != (n, 3):
            raise SkeletonError(f"tips has shape {tips.shape}, expected ({n}, 3)", path=self.source)
        channels = self.channels
        if channels is None:
            channels = tuple(_DEFAULT_ROOT_CHANNELS if i == 0 else _DEFAULT_CHANNELS for i in range(n))
        channels = tuple(tuple(c) for c in channels)
        if len(channels) != n:
            raise SkeletonError(f"channels lists {len(channels)} joints, expected {n}", path=self.source)
        object.__setattr__(self, "names", names)
        object.__setattr__(self, "parents", _frozen(parents, np.int64))
        object.__setattr__(self, "offsets", _frozen(offsets))
        object.__setattr__(self, "rest_rotations", _frozen(rest))
        object.__setattr__(self, "tips", _frozen(tips))
        object.__setattr__(self, "channels", channels)

    # ----- structure -------------------------------------------------------------------------------
    def __len__(self) -> int:
        return len(self.names)

    @property
    def num_joints(self) -> int:
        return len(self.names)

    @cached_property
    def _index(self) -> dict[str, int]:
        return {n: i for i, n in enumerate(self.names)}

    def index(self, name: str) -> int:
        """Index of a joint by name; SkeletonError naming the joint when absent."""
        try:
            return self._index[name]
        except KeyError:
            raise SkeletonError(f"no joint named {name!r}", path=self.source) from None

    def __contains__(self, name: object) -> bool:
        return name in self._index

    @cached_property
    def children(self) -> tuple[tuple[int, ...], ...]:
        """Per joint, the indices of its children in order."""
        kids: list[list[int]] = [[] for _ in self.names]
        for i, p in enumerate(self.parents[1:], start=1):
            kids[p].append(i)
        return tuple(tuple(k) for k in kids)

    @cached_property
    def depths(self) -> np.ndarray:
        """(J,) number of ancestors of each joint."""
        d = np.zeros(len(self.names), dtype=np.int64)
        for i in range(1, len(self.names)):
            d[i] = d[self.parents[i]] + 1
        return d

    def ancestors(self, j: int) -> list[int]:
        """Indices from j's parent up to the root."""
        out = []
        p = int(self.parents[j])
        while p >= 0:
            out.append(p)
            p = int(self.parents[p])
        return out

    def is_ancestor(self, a: int, b: int) -> bool:
        """True when joint a is a proper ancestor of joint b."""
        return bool(self.ancestor_matrix[a, b])

    @cached_property
    def ancestor_matrix(self) -> np.ndarray:
        """(J, J) bool: [a, b] is True when joint a is a proper ancestor of joint b."""
        n = len(self.names)
        anc = np.zeros((n, n), dtype=bool)
        for j in range(1, n):
            p = self.parents[j]
            anc[:, j] = anc[:, p]
            anc[p, j] = True
        anc.setflags(write=False)
        return anc

    def rotation_order(self, j: int) -> str:
        """The joint's rotation channel axes in file order, e.g. "ZXY" ("" when it has none)."""
        return "".join(c[0] for c in self.channels[j] if c in ROTATION_CHANNELS)

    def has_position_channels(self, j: int) -> bool:
        return any(c in POSITION_CHANNELS for c in self.channels[j])

    @cached_property
    def signature(self) -> str:
        """A short hash of names, hierarchy and offsets; changes when the skeleton changes."""
        h = hashlib.sha256()
        for name, p in zip(self.names, self.parents):
            h.update(f"{name}\x00{int(p)}\x00".encode())
        h.update(np.round(self.offsets, 6).tobytes())
        return h.hexdigest()[:16]

    # ----- rest pose -------------------------------------------------------------------------------
    @cached_property
    def rest_global(self) -> tuple[np.ndarray, np.ndarray]:
        """Rest pose in the skeleton's own space: (rotations (J, 4), positions (J, 3)), root at its offset."""
        n = len(self.names)
        rot = np.empty((n, 4))
        pos = np.empty((n, 3))
        for j in range(n):
            p = self.parents[j]
            if p < 0:
                rot[j] = self.rest_rotations[j]
                pos[j] = self.offsets[j]
            else:
                rot[j] = quat.multiply(rot[p], self.rest_rotations[j])
                pos[j] = pos[p] + quat.rotate(rot[p], self.offsets[j])
        rot.setflags(write=False)
        pos.setflags(write=False)
        return rot, pos

    @cached_property
    def rest_tips(self) -> np.ndarray:
        """(J, 3) rest positions of end-site tips, NaN where a joint has none."""
        rot, pos = self.rest_global
        return pos + quat.rotate(rot, np.nan_to_num(self.tips)) + np.where(np.isnan(self.tips), np.nan, 0.0)

    def with_rest(self, offsets: np.ndarray | None = None, rest_rotations: np.ndarray | None = None,
                  tips: np.ndarray | None = None) -> "Skeleton":
        """A copy with other rest values (same names, parents and channels)."""
        return Skeleton(self.names, self.parents,
                        self.offsets if offsets is None else offsets,
                        self.rest_rotations if rest_rotations is None else rest_rotations,
                        self.tips if tips is None else tips, self.channels, self.source)

    def renamed(self, names: list[str] | tuple[str, ...]) -> "Skeleton":
        """A copy with new joint names, in the same order."""
        return Skeleton(tuple(names), self.parents, self.offsets, self.rest_rotations, self.tips,
                        self.channels, self.source)
