"""Motion: a skeleton animated over frames, and forward kinematics over the whole clip at once."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import quat
from .errors import RetargetError
from .skeleton import Skeleton

__all__ = ["Motion", "forward_kinematics"]


def _readonly(a: np.ndarray) -> np.ndarray:
    """A read-only float64 array, frame-major (C order) or, for (F, J, k) data, component-major (a
    transposed view of a C-ordered (J, k, F) array); anything else is made C-ordered. Writable views of
    someone else's array are copied (keeping their layout)."""
    a = np.asarray(a, dtype=np.float64)
    if not (a.flags.c_contiguous or quat.is_component_major(a)):
        a = np.ascontiguousarray(a)
    elif a.flags.writeable and a.base is not None:
        a = a.copy(order="K")
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class Motion:
    """A clip on one skeleton.

    skeleton: the Skeleton animated.
    rotations: (F, J, 4) local rotations, scalar-last unit quaternions (rest rotation included). Stored
        either frame-major (C order) or component-major (a transposed view of (J, 4, F) memory, each
        joint's x, y, z and w one contiguous row over the frames, as the reader and transfer make
        them): numpy code works on either; quat.to_component_major is free for the latter.
    root_positions: (F, 3) local translation of the root joint, file units.
    fps: frames per second (> 0).
    The arrays given are kept, not copied, and made read-only (a Motion never changes); pass a copy
    when you still want to write into yours.
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
                       translations: np.ndarray | None = None, joints=None) -> tuple[np.ndarray, np.ndarray]:
    """Global rotations and positions for every frame.

    rotations: (F, J, 4) local quaternions; root_positions: (F, 3); translations: (F, J, 3) or None
    (then each joint uses its rest offset). Returns (F, J, 4) and (F, J, 3) in the skeleton's space.
    joints: optional joint indices; then only they and their ancestors are computed and the results are
    (F, len(joints), 4) and (F, len(joints), 3), one column per joint asked for, in that order.
    Loops over joints in topological order; every step is vectorised over frames, on contiguous
    per-component arrays (the results are views of joint-major, component-major arrays).
    """
    rotations = np.asarray(rotations, dtype=np.float64)
    f, n = rotations.shape[:2]
    parents = skeleton.parents
    if joints is None:
        wanted = list(range(n))
        todo = wanted
    else:
        wanted = [int(j) for j in joints]
        need: set[int] = set()
        for j in wanted:
            while j >= 0 and j not in need:
                need.add(j)
                j = int(parents[j])
        todo = sorted(need)  # parents come before their children
    slot = {j: i for i, j in enumerate(todo)}
    # The local rotations of the joints needed, as contiguous (4, F) rows per joint (the clip's own
    # memory when it is stored that way).
    if quat.is_component_major(rotations):
        planes, row = quat.to_component_major(rotations), {j: j for j in todo}
    else:
        planes, row = quat.to_component_major(rotations, None if len(todo) == n else todo), slot
    grot = np.empty((len(todo), 4, f))
    gpos = np.empty((len(todo), 3, f))
    offsets = skeleton.offsets
    root_positions = np.asarray(root_positions, dtype=np.float64)
    for i, j in enumerate(todo):
        p = int(parents[j])
        local = planes[row[j]]
        if p < 0:
            grot[i] = local
            gpos[i] = np.broadcast_to(root_positions, (f, 3)).T
            continue
        pr, pp = grot[slot[p]], gpos[slot[p]]
        t = offsets[j] if translations is None else np.asarray(translations)[:, j].T
        _fk_joint(pr, pp, local, t, grot[i], gpos[i])
    if joints is not None and wanted != todo:
        pick = [slot[j] for j in wanted]
        grot, gpos = grot[pick], gpos[pick]
    return grot.transpose(2, 0, 1), gpos.transpose(2, 0, 1)


def _fk_joint(pr: np.ndarray, pp: np.ndarray, local: np.ndarray, t, out_r: np.ndarray, out_p: np.ndarray) -> None:
    """One joint: global rotation = parent * local (quat.multiply's arithmetic), global position =
    parent position + parent rotation applied to the offset t (quat.rotate's arithmetic).
    pr (4, F), pp (3, F): the parent's; local (4, F); t: (3,) or (3, F); out_r (4, F), out_p (3, F)."""
    ax, ay, az, aw = pr
    bx, by, bz, bw = local
    out_r[0] = aw * bx + ax * bw + ay * bz - az * by
    out_r[1] = aw * by - ax * bz + ay * bw + az * bx
    out_r[2] = aw * bz + ax * by - ay * bx + az * bw
    out_r[3] = aw * bw - ax * bx - ay * by - az * bz
    vx, vy, vz = t
    # t2 = 2 (u x v); v + w t2 + u x t2, with u = the parent's vector part and w its scalar.
    tx = 2.0 * (ay * vz - az * vy)
    ty = 2.0 * (az * vx - ax * vz)
    tz = 2.0 * (ax * vy - ay * vx)
    out_p[0] = pp[0] + (vx + aw * tx + (ay * tz - az * ty))
    out_p[1] = pp[1] + (vy + aw * ty + (az * tx - ax * tz))
    out_p[2] = pp[2] + (vz + aw * tz + (ax * ty - ay * tx))
