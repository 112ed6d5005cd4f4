"""Rotation transfer, in-between joints, aim correction and root motion, over whole clips at once.

Given an Alignment (align.py), every frame is carried from the source to the target in four steps, each
vectorised over frames (Python loops run over joints only):

1. mapped joints: G_t = C_s * G_s_file * Q (one 4x4 product per joint: both constants fold into one
   linear map of the quaternion's components);
2. unmapped joints between two mapped ones of a chain: the world rotation deltas from the reference pose
   of the two ends, G * G_ref^-1, are slerped with the joint's arc-length weight and applied to its
   reference rotation;
3. aim correction: for every span with both ends mapped, the shortest rotation taking the target span
   (start joint to end joint, through the in-between joints) onto the source span's direction is applied
   to the start joint and the in-between joints. A shortest-arc turn keeps the twist about the bone, and
   the span then points where the source's does even when the chains have different joint counts;
4. everything else below a mapped joint keeps its reference local rotation (follows its parent); joints
   above every mapped joint keep their reference global rotation.

Root motion: the source pelvis position in canonical metres, scaled by the root scale about the ground
plane (canonical y = 0, taken as the floor as capture files commonly have it), raised by the alignment's
ground offset, and put on the target's pelvis.
"""

from __future__ import annotations

import numpy as np

from . import quat
from .align import UP, Alignment, file_to_canonical_rotation
from .motion import Motion

__all__ = ["transfer", "transfer_world", "remove_travel", "right_product", "left_product"]

# Inside this module a clip's quaternions for one joint are held component-major, (4, F): each of x, y,
# z, w is one contiguous row, so the products below run on contiguous rows (about twice as fast as
# (F, 4) rows, whose components are strided). Vectors likewise are (3, F).


def right_product(c: np.ndarray) -> np.ndarray:
    """(4, 4) M with q @ M == quat.multiply(q, c) for any q (..., 4): right multiplication by a constant."""
    return quat.multiply(np.eye(4), np.asarray(c, dtype=np.float64)[None, :])


def left_product(c: np.ndarray) -> np.ndarray:
    """(4, 4) M with q @ M == quat.multiply(c, q) for any q (..., 4): left multiplication by a constant."""
    return quat.multiply(np.asarray(c, dtype=np.float64)[None, :], np.eye(4))


def _closure(skeleton, joints) -> list[int]:
    """Joints and all their ancestors, in topological order."""
    keep = set()
    for j in joints:
        j = int(j)
        while j >= 0 and j not in keep:
            keep.add(j)
            j = int(skeleton.parents[j])
    return sorted(keep)


def _mul(a: np.ndarray, b: np.ndarray, conj_a: bool = False) -> np.ndarray:
    """Hamilton product a * b (or conj(a) * b) of component-major quaternions (4, F) -> (4, F)."""
    ax, ay, az, aw = a
    bx, by, bz, bw = b
    if conj_a:
        ax, ay, az = -ax, -ay, -az
    out = np.empty((4, a.shape[1]))
    np.multiply(aw, bx, out=out[0])
    out[0] += ax * bw
    out[0] += ay * bz
    out[0] -= az * by
    np.multiply(aw, by, out=out[1])
    out[1] -= ax * bz
    out[1] += ay * bw
    out[1] += az * bx
    np.multiply(aw, bz, out=out[2])
    out[2] += ax * by
    out[2] -= ay * bx
    out[2] += az * bw
    np.multiply(aw, bw, out=out[3])
    out[3] -= ax * bx
    out[3] -= ay * by
    out[3] -= az * bz
    return out


def _rot(q: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Rotate v (3,) or (3, F) by unit quaternions q (4, F) -> (3, F): v + 2w (u x v) + u x (2 u x v)."""
    x, y, z, w = q
    vx, vy, vz = v
    tx = y * vz - z * vy
    tx *= 2.0
    ty = z * vx - x * vz
    ty *= 2.0
    tz = x * vy - y * vx
    tz *= 2.0
    o = np.empty((3, q.shape[1]))
    np.multiply(w, tx, out=o[0])
    o[0] += y * tz
    o[0] -= z * ty
    o[0] += vx
    np.multiply(w, ty, out=o[1])
    o[1] += z * tx
    o[1] -= x * tz
    o[1] += vy
    np.multiply(w, tz, out=o[2])
    o[2] += x * ty
    o[2] -= y * tx
    o[2] += vz
    return o


def _norm(v: np.ndarray) -> np.ndarray:
    """Lengths of component-major vectors (k, F) -> (F,)."""
    return np.sqrt(np.einsum("ij,ij->j", v, v))


def _between(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Shortest-arc rotations (4, F) taking directions a (3, F) onto b (3, F); identity where either has
    no length; opposite directions turn half a turn about an axis perpendicular to a (as
    quat.between_vectors, which handles those rare frames)."""
    na, nb = _norm(a), _norm(b)
    q = np.empty((4, a.shape[1]))
    q[0] = a[1] * b[2] - a[2] * b[1]
    q[1] = a[2] * b[0] - a[0] * b[2]
    q[2] = a[0] * b[1] - a[1] * b[0]
    q[3] = na * nb + np.einsum("ij,ij->j", a, b)
    n = _norm(q)
    bad = (na <= 1e-12) | (nb <= 1e-12) | (n <= 1e-12 * np.maximum(na * nb, 1e-300))
    q /= np.where(bad, 1.0, n)
    if np.any(bad):
        with np.errstate(invalid="ignore", divide="ignore"):
            q[:, bad] = quat.between_vectors(a[:, bad].T, b[:, bad].T).T
    return q


def _const(q: np.ndarray, m: np.ndarray) -> np.ndarray:
    """Apply a constant product given as a (4, 4) row-vector matrix (right_product / left_product) to
    component-major quaternions (4, F)."""
    return m.T @ q


def _source_world(motion: Motion, rot_joints, pos_joints) -> tuple[dict, dict]:
    """File-space global rotations {j: (4, F)} and positions {j: (3, F)} of the joints asked for (and
    their ancestors), by forward kinematics over all frames at once."""
    sk = motion.skeleton
    rots: dict[int, np.ndarray] = {}
    pos: dict[int, np.ndarray] = {}
    need_pos = set(_closure(sk, pos_joints))
    tr = motion.translations
    todo = _closure(sk, list(rot_joints) + list(pos_joints))
    if quat.is_component_major(motion.rotations):
        planes, row = quat.to_component_major(motion.rotations), {j: j for j in todo}
    else:
        planes, row = quat.to_component_major(motion.rotations, todo), {j: i for i, j in enumerate(todo)}
    for j in todo:
        p = int(sk.parents[j])
        local = planes[row[j]]
        if p < 0:
            rots[j] = local
            if j in need_pos:
                pos[j] = np.ascontiguousarray(motion.root_positions.T)
            continue
        rots[j] = _mul(rots[p], local)
        if j in need_pos:
            off = sk.offsets[j] if tr is None else np.ascontiguousarray(tr[:, j].T)
            pos[j] = pos[p] + _rot(rots[p], off)
    return rots, pos


def remove_travel(path: np.ndarray, fps: float, seconds: float = 1.0) -> np.ndarray:
    """Horizontal travel taken out of a canonical root path (F, 3): the centred moving average of x and z
    over ``seconds`` is subtracted, so the root sways about the origin but no longer travels; y is kept.
    The ends are padded by point reflection, so steady travel is removed right up to the first and last
    frames."""
    f = path.shape[0]
    out = np.array(path, dtype=np.float64, copy=True)
    if f < 2:
        out[:, [0, 2]] = 0.0
        return out
    w = max(1, min(2 * f - 1, int(round(seconds * fps))))
    if w % 2 == 0:
        w -= 1  # odd window, centred
    half = min(w // 2, f - 1)
    w = 2 * half + 1
    xz = out[:, [0, 2]]
    head = 2.0 * xz[:1] - xz[half:0:-1]
    tail = 2.0 * xz[-1:] - xz[-2:-half - 2:-1]
    padded = np.concatenate([head, xz, tail])
    c = np.concatenate([np.zeros((1, 2)), np.cumsum(padded, axis=0)])
    mean = (c[w:] - c[:-w]) / w
    out[:, [0, 2]] = xz - mean
    return out


def _carry(motion: Motion, al: Alignment, in_place: bool
           ) -> tuple[list[np.ndarray], np.ndarray, dict[int, tuple[np.ndarray, ...]]]:
    """Steps 1-4 and root motion. Returns (per target joint its canonical global rotations (4, F), the
    pelvis path (F, 3) in canonical metres, and per span start joint the angle its start joint was
    turned, the angle its in-between joints were bent and the remaining direction error, each (F,)
    radians)."""
    tgt = al.target
    f = motion.num_frames
    nt = tgt.num_joints
    qs = file_to_canonical_rotation(al.source_convention)
    to_canonical = al.source_convention.scale * al.source_convention.file_to_canonical()

    ends = {j for sg in al.segments for j in (sg.source_start, sg.source_end)} | {al.source_root}
    srot, spos = _source_world(motion, al.pairs[:, 0], ends)
    world = {j: to_canonical @ spos[j] for j in ends}

    g: list[np.ndarray | None] = [None] * nt
    lq = left_product(qs)
    for (s, t), q in zip(al.pairs, al.offsets):
        g[int(t)] = _const(srot[int(s)], lq @ right_product(q))

    ref = al.target_reference.rotations
    offs = tgt.offsets
    checks: dict[int, tuple[np.ndarray, ...]] = {}
    for sg in al.segments:
        if sg.between:
            da = _const(g[sg.start], right_product(quat.conjugate(ref[sg.start]))).T
            db = _const(g[sg.end], right_product(quat.conjugate(ref[sg.end]))).T
            for k, w in zip(sg.between, sg.weights):
                g[k] = _const(np.ascontiguousarray(quat.slerp(da, db, np.full(f, w)).T), right_product(ref[k]))
        vs = world[sg.source_end] - world[sg.source_start]
        if sg.between:
            # Keep the mapped start joint as transferred and bend the in-between joints instead: turn the
            # sub-chain after the start joint about its first joint so the span's end lands on the ray
            # from the start joint along the source span (the far crossing of that ray with the sphere
            # the sub-chain can reach). Frames where it cannot reach turn the whole span (below).
            first = _rot(g[sg.start], offs[sg.between[0]])
            rest = np.zeros((3, f))
            for k, c in zip(sg.between, sg.between[1:] + (sg.end,)):
                rest += _rot(g[k], offs[c])
            ray = vs / np.maximum(_norm(vs), 1e-300)
            along = np.einsum("ij,ij->j", ray, first)
            disc = along * along - np.einsum("ij,ij->j", first, first) + np.einsum("ij,ij->j", rest, rest)
            reach = along + np.sqrt(np.maximum(disc, 0.0))
            bend = _between(rest, reach * ray - first)
            fits = (disc >= 0.0) & (reach > 0.0)
            bend[:, ~fits] = np.array([[0.0], [0.0], [0.0], [1.0]])
            for k in sg.between:
                g[k] = _mul(bend, g[k])
            vt = first + _rot(bend, rest)
        else:
            bend = None
            vt = _rot(g[sg.start], offs[sg.end])
        aim = _between(vt, vs)
        for k in (sg.start,) + sg.between:
            g[k] = _mul(aim, g[k])
        # For the report: how far the span's start joint was turned, how far the in-between joints were
        # bent (radians, (F,)), and the source span's direction ((3, F), canonical, unit), against which
        # the finished clip is measured.
        angle = 2.0 * np.arctan2(_norm(aim[:3]), np.abs(aim[3]))
        bent = np.zeros(f) if bend is None else 2.0 * np.arctan2(_norm(bend[:3]), np.abs(bend[3]))
        checks[sg.start] = (angle, bent, vs / np.maximum(_norm(vs), 1e-300))

    followers = set(al.followers)
    for j in range(nt):
        if g[j] is not None:
            continue
        if j in followers:
            g[j] = _const(g[int(tgt.parents[j])], right_product(al.target_local[j]))
        else:
            g[j] = np.repeat(ref[j][:, None], f, axis=1)

    pelvis = al.root_scale * world[al.source_root].T + al.ground_offset * UP
    if in_place:
        pelvis = remove_travel(pelvis, motion.fps)
    return g, pelvis, checks


def transfer_world(motion: Motion, alignment: Alignment, in_place: bool = False
                   ) -> tuple[np.ndarray, np.ndarray, dict[int, tuple[np.ndarray, ...]]]:
    """Target global rotations and pelvis path in canonical space.

    motion: a clip on alignment.source. Returns (rotations (F, Jt, 4) canonical globals, pelvis (F, 3)
    canonical metres of alignment.target_root, checks) where checks maps each span's start joint to
    (angle the start joint was turned (F,), angle the in-between joints were bent (F,), remaining angle
    between target and source span (F,)), radians.
    """
    g, pelvis, checks = _carry(motion, alignment, in_place)
    return np.stack([q.T for q in g], axis=1), pelvis, checks


def transfer(motion: Motion, alignment: Alignment, in_place: bool = False, checks: dict | None = None
             ) -> Motion:
    """Carry a clip on alignment.source onto alignment.target.

    Returns a Motion on the target skeleton (its names, offsets and channel layout) in the target's file
    axes and units, at the source's frame rate. in_place: take the horizontal root travel out.
    checks: a dict to receive transfer_world's per-span checks, for reports.
    """
    al = alignment
    tgt = al.target
    f, nt = motion.num_frames, tgt.num_joints
    g, pelvis, found = _carry(motion, al, in_place)
    if checks is not None:
        checks.update(found)

    # Local rotations: the change of axes cancels between parent and child, only the root keeps it.
    qt_inv = quat.conjugate(file_to_canonical_rotation(al.target_convention))
    local = np.empty((nt, 4, f))
    local[0] = _const(g[0], left_product(qt_inv))
    for j in range(1, nt):
        local[j] = _mul(g[int(tgt.parents[j])], g[j], conj_a=True)
    local.setflags(write=False)
    local = local.transpose(2, 0, 1)  # (F, nt, 4), stored component-major

    ct = al.target_convention.file_to_canonical()
    st = al.target_convention.scale
    m = al.target_root
    translations = None
    if m == 0:
        root = pelvis
    else:
        path = tgt.ancestors(m)[::-1] + [m]  # root ... pelvis
        fixed = set(al.fixed)
        if tgt.has_position_channels(m) and all(k in fixed for k in path[:-1]):
            # The pelvis has its own position channels under a static root: move the pelvis, keep the root.
            ref_pos = al.target_reference.positions
            root = np.tile(ref_pos[0], (f, 1))
            offset = (pelvis - ref_pos[path[-2]]).T / st  # canonical axes, target units
            parent = g[path[-2]].copy()
            parent[:3] *= -1.0
            translations = np.broadcast_to(tgt.offsets, (f, nt, 3)).copy()
            translations[:, m] = _rot(parent, offset).T
        else:
            # Place the root so that the pelvis lands on its path.
            root = np.array(pelvis)
            for a, c in zip(path[:-1], path[1:]):
                root -= st * _rot(g[a], tgt.offsets[c]).T
    root_file = (root @ ct) / st
    if translations is not None:
        translations[:, 0] = root_file
    return Motion(tgt, local, root_file, motion.fps, translations, source=tgt.source)
