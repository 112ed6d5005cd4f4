"""Motion: a skeleton animated over frames, and forward kinematics over the whole clip at once."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import quat
from .errors import RetargetError
from .skeleton import Skeleton

__all__ = ["Motion", "forward_kinematics"]


def _readonly(a: np.ndarray) -> np.ndarray:
    a = np.ascontiguousarray(a, dtype=np.float64)
    if a.flags.writeable and a.base is not None:
        a = a.copy()
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class Motion:
    """A clip on one skeleton.

    skeleton: the Skeleton animated.
    rotations: (F, J, 4) local rotations, scalar-last unit quaternions (rest rotation included).
    root_positions: (F, 3) local translation of the root joint, file units.
    fps: frames per second (> 0).
    translations: (F, J, 3) local translations of every joint, or None. Only present when the file
        animates translation on some joint other than the root; where present it replaces the offsets.
    """

    skeleton: Skeleton
    rotations: np.ndarray
    root_positions: np.ndarray
    fps: float
    translations: np.ndarray | None = None
    source: str | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        j = self.skeleton.num_joints
        rot = np.asarray(self.rotations, dtype=np.float64)
        if rot.ndim != 3 or rot.shape[1:] != (j, 4):
            raise RetargetError(f"rotations has shape {rot.shape}, expected (F, {j}, 4)", path=self.source)
        f = rot.shape[0]
        root = np.asarray(self.root_positions, dtype=np.float64)
        if root.shape != (f, 3):
            raise RetargetError(f"root_positions has shape {root.shape}, expected ({f}, 3)", path=self.source)
        if not (np.isfinite(self.fps) and self.fps > 0):
            raise RetargetError(f"frame rate must be a positive number, got {self.fps}", path=self.source)
        object.__setattr__(self, "rotations", _readonly(rot))
        object.__setattr__(self, "root_positions", _readonly(root))
        object.__setattr__(self, "fps", float(self.fps))
        if self.translations is not None:
            tr = np.asarray(self.translations, dtype=np.float64)
            if tr.shape != (f, j, 3):
                raise RetargetError(f"translations has shape {tr.shape}, expected ({f}, {j}, 3)",
                                    path=self.source)
            object.__setattr__(self, "translations", _readonly(tr))

    @property
    def num_frames(self) -> int:
        return self.rotations.shape[0]

    @property
    def duration(self) -> float:
        """Seconds from the first to the last frame."""
        return max(self.num_frames - 1, 0) / self.fps

    @classmethod
    def rest(cls, skeleton: Skeleton, frames: int = 1, fps: float = 30.0) -> "Motion":
        """A clip that holds the rest pose."""
        rot = np.broadcast_to(skeleton.rest_rotations, (frames, skeleton.num_joints, 4))
        root = np.broadcast_to(skeleton.offsets[0], (frames, 3))
        return cls(skeleton, rot, root, fps)

    def local_translations(self) -> np.ndarray:
        """(F, J, 3) local translation of every joint on every frame (root from root_positions)."""
        f, j = self.num_frames, self.skeleton.num_joints
        if self.translations is not None:
            out = np.array(self.translations)
        else:
            out = np.broadcast_to(self.skeleton.offsets, (f, j, 3)).copy()
        out[:, 0] = self.root_positions
        return out

    def replace(self, **changes) -> "Motion":
        """A copy with some fields changed."""
        fields = dict(skeleton=self.skeleton, rotations=self.rotations, root_positions=self.root_positions,
                      fps=self.fps, translations=self.translations, source=self.source)
        fields.update(changes)
        return Motion(**fields)

    def slice(self, start: int | None = None, stop: int | None = None) -> "Motion":
        """Frames [start, stop) as a new clip."""
        s = slice(start, stop)
        return self.replace(rotations=self.rotations[s], root_positions=self.root_positions[s],
                            translations=None if self.translations is None else self.translations[s])

    def global_transforms(self) -> tuple[np.ndarray, np.ndarray]:
        """Forward kinematics: (global rotations (F, J, 4), global positions (F, J, 3))."""
        return forward_kinematics(self.skeleton, self.rotations, self.root_positions, self.translations)


def forward_kinematics(skeleton: Skeleton, rotations: np.ndarray, root_positions: np.ndarray,
                       translations: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Global rotations and positions for every frame.

    rotations: (F, J, 4) local quaternions; root_positions: (F, 3); translations: (F, J, 3) or None
    (then each joint uses its rest offset). Returns (F, J, 4) and (F, J, 3) in the skeleton's space.
    Loops over joints in topological order; every step is vectorised over frames.
    """
    rotations = np.asarray(rotations, dtype=np.float64)
    f, n = rotations.shape[:2]
    # Work joint-major so each joint's frames are contiguous.
    local = np.ascontiguousarray(rotations.transpose(1, 0, 2))
    grot = np.empty((n, f, 4))
    gpos = np.empty((n, f, 3))
    parents = skeleton.parents
    offsets = skeleton.offsets
    tr = None if translations is None else np.ascontiguousarray(np.asarray(translations).transpose(1, 0, 2))
    for j in range(n):
        p = parents[j]
        if p < 0:
            grot[j] = local[j]
            gpos[j] = root_positions
            continue
        grot[j] = quat.multiply(grot[p], local[j])
        t = offsets[j] if tr is None else tr[j]
        gpos[j] = gpos[p] + quat.rotate(grot[p], t)
    return grot.transpose(1, 0, 2), gpos.transpose(1, 0, 2)
