"""Building glTF-style rigs from BVH-style skeletons.

A BVH skeleton's joints all have identity rest rotations: every joint frame is parallel to the world.
Character rigs in glTF usually carry bone-aligned local axes instead: each joint's local +Y runs along
its bone towards its (first) child (common practice in many rigs). `bone_aligned` builds such a
skeleton with the same rest positions, `rebase_rest` moves a clip onto it without changing any world
position, and `box_mesh` makes a simple body (one box per bone, rigidly bound) for a skinned file.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import quat
from ..errors import SkeletonError
from ..motion import Motion
from ..skeleton import Skeleton

__all__ = ["bone_aligned", "rebase_rest", "box_mesh", "BoxMesh"]


def _aim_frame(d: np.ndarray) -> np.ndarray:
    """A rotation whose local +Y points along d; local X is d x Z (or d x X when d is nearly along Z),
    so a bone pointing up gets the world's own axes."""
    y = d / np.linalg.norm(d)
    ref = np.array([0.0, 0.0, 1.0]) if abs(y[2]) < 0.95 else np.array([1.0, 0.0, 0.0])
    x = np.cross(y, ref)
    x /= np.linalg.norm(x)
    z = np.cross(x, y)
    return quat.from_matrix(np.stack([x, y, z], axis=1))


def bone_aligned(skeleton: Skeleton) -> Skeleton:
    """The same skeleton (names, parents, rest positions, tips in space) with bone-aligned rest rotations:
    each joint's local +Y aims at its first child (a leaf aims at its end-site tip; a leaf without one
    keeps its parent's axes). Offsets and tips are re-expressed in the new joint frames."""
    rot, pos = skeleton.rest_global
    tips_world = skeleton.rest_tips
    n = skeleton.num_joints
    frame = np.empty((n, 4))
    for j in range(n):
        d = None
        for c in skeleton.children[j]:
            v = pos[c] - pos[j]
            if np.linalg.norm(v) > 1e-9:
                d = v
                break
        if d is None and not np.isnan(tips_world[j]).any():
            v = tips_world[j] - pos[j]
            if np.linalg.norm(v) > 1e-9:
                d = v
        if d is not None:
            frame[j] = _aim_frame(d)
        else:
            p = skeleton.parents[j]
            frame[j] = frame[p] if p >= 0 else rot[j]
    rest = np.empty((n, 4))
    offsets = np.empty((n, 3))
    for j in range(n):
        p = skeleton.parents[j]
        if p < 0:
            rest[j], offsets[j] = frame[j], pos[j]
        else:
            inv = quat.conjugate(frame[p])
            rest[j] = quat.multiply(inv, frame[j])
            offsets[j] = quat.rotate(inv, pos[j] - pos[p])
    tips = np.where(np.isnan(skeleton.tips), np.nan,
                    quat.rotate(quat.conjugate(frame), np.nan_to_num(tips_world - pos)))
    return Skeleton(skeleton.names, skeleton.parents, offsets, rest, tips, skeleton.channels, skeleton.source)


def rebase_rest(motion: Motion, skeleton: Skeleton) -> Motion:
    """The same world motion on a skeleton with other rest rotations (same names, parents and rest
    positions, e.g. from bone_aligned).

    With C_j = R_j^-1 R'_j (world rest rotations of the old and new skeleton), every global rotation
    becomes G_j C_j, so the local rotation becomes C_p^-1 L_j C_j and a local translation C_p^-1 t_j.
    """
    old = motion.skeleton
    if old.names != skeleton.names or not np.array_equal(old.parents, skeleton.parents):
        raise SkeletonError("rebase_rest needs a skeleton with the same joints and parents", path=skeleton.source)
    r_old, _ = old.rest_global
    r_new, _ = skeleton.rest_global
    c = quat.multiply(quat.conjugate(r_old), r_new)
    rot = np.empty(motion.rotations.shape)
    tr = None if motion.translations is None else np.array(motion.translations)
    for j in range(old.num_joints):
        p = old.parents[j]
        q = quat.multiply(motion.rotations[:, j], c[j])
        if p >= 0:
            q = quat.multiply(quat.conjugate(c[p]), q)
            if tr is not None:
                tr[:, j] = quat.rotate(quat.conjugate(c[p]), tr[:, j])
        rot[:, j] = q
    return Motion(skeleton, rot, motion.root_positions, motion.fps, tr, source=motion.source)


@dataclass(frozen=True)
class BoxMesh:
    """A skinned triangle mesh in the skeleton's rest (bind) space.

    positions, normals: (V, 3); joints: (V, 4) joint indices; weights: (V, 4), rows sum to 1;
    indices: (T * 3,) counter-clockwise triangles seen from outside.
    """
    positions: np.ndarray
    normals: np.ndarray
    joints: np.ndarray
    weights: np.ndarray
    indices: np.ndarray


_FACES = (  # corner numbers (bit 0: +u side, bit 1: +v side, bit 2: far end) and the face's outward axis
    ((0, 1, 3, 2), "start"), ((4, 5, 7, 6), "end"),
    ((0, 1, 5, 4), "-v"), ((2, 3, 7, 6), "+v"),
    ((0, 2, 6, 4), "-u"), ((1, 3, 7, 5), "+u"),
)


def box_mesh(skeleton: Skeleton, width: float = 0.22) -> BoxMesh:
    """One box per bone (parent joint to child joint, and leaf joint to its end-site tip), bound rigidly
    to the joint the bone hangs from. width: box thickness as a share of the bone length, kept between
    1.5 and 6 percent of the figure's size."""
    _, pos = skeleton.rest_global
    tips = skeleton.rest_tips
    size = float(np.max(np.ptp(np.concatenate([pos, tips[~np.isnan(tips).any(axis=1)]]), axis=0))) or 1.0
    segments = []
    for j in range(1, skeleton.num_joints):
        segments.append((pos[skeleton.parents[j]], pos[j], skeleton.parents[j]))
    for j in range(skeleton.num_joints):
        if not np.isnan(tips[j]).any():
            segments.append((pos[j], tips[j], j))
    verts, norms, joints, tris = [], [], [], []
    for a, b, owner in segments:
        d = b - a
        length = np.linalg.norm(d)
        if length < 1e-6 * size:
            continue
        d = d / length
        helper = np.array([0.0, 0.0, 1.0]) if abs(d[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
        u = np.cross(d, helper)
        u /= np.linalg.norm(u)
        v = np.cross(d, u)
        h = 0.5 * float(np.clip(width * length, 0.015 * size, 0.06 * size))
        corners = np.array([(b if k & 4 else a) + (h if k & 1 else -h) * u + (h if k & 2 else -h) * v
                            for k in range(8)])
        axes = {"start": -d, "end": d, "-v": -v, "+v": v, "-u": -u, "+u": u}
        for quad, axis in _FACES:
            n = axes[axis]
            base = len(verts)
            for k in quad:
                verts.append(corners[k])
                norms.append(n)
                joints.append(owner)
            p0, p1, p2 = corners[quad[0]], corners[quad[1]], corners[quad[2]]
            if np.dot(np.cross(p1 - p0, p2 - p0), n) > 0:
                tris += [base, base + 1, base + 2, base, base + 2, base + 3]
            else:
                tris += [base, base + 2, base + 1, base, base + 3, base + 2]
    if not verts:
        raise SkeletonError("the skeleton has no bone long enough for a mesh", path=skeleton.source)
    count = len(verts)
    joint_idx = np.zeros((count, 4), dtype=np.int64)
    joint_idx[:, 0] = joints
    weights = np.zeros((count, 4))
    weights[:, 0] = 1.0
    return BoxMesh(np.array(verts), np.array(norms), joint_idx, weights, np.array(tris, dtype=np.int64))
