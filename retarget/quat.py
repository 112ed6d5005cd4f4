"""Vectorised quaternion helpers, scalar-last (x, y, z, w), float64.

Everything here broadcasts over leading axes, so a whole clip (F, J, 4) goes through one call. The
rotation convention is the active one used by scipy.spatial.transform.Rotation: ``rotate(q, v)`` turns
the vector ``v``, and ``multiply(a, b)`` applies ``b`` first, then ``a``.

Euler angles are *intrinsic*: the order string "ZXY" means rotate about Z, then about the new X, then
about the newest Y, i.e. R = Rz(a0) @ Rx(a1) @ Ry(a2). This is how BVH channel lists compose, and
what scipy calls the uppercase sequence "ZXY".
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "identity",
    "normalize",
    "conjugate",
    "multiply",
    "rotate",
    "from_axis_angle",
    "angle_between",
    "from_euler",
    "to_euler",
    "to_euler_continuous",
    "slerp",
    "swing_twist",
    "make_continuous",
    "between_vectors",
    "from_matrix",
    "to_matrix",
    "to_component_major",
    "from_component_major",
    "is_component_major",
]

_AXES = {"X": 0, "Y": 1, "Z": 2}
_TWO_PI = 2.0 * np.pi
# Work block sizes: a block's temporaries stay small enough to be reused from the CPU cache (and from the
# allocator's free lists) instead of being mapped afresh for every array, which costs more than the
# arithmetic on them. Measured best on a 2-core machine (benchmarks/).
_BLOCK = 1 << 17        # quaternions per block in to_euler_continuous (whole tracks)
_EULER_BLOCK = 1 << 13  # rotations per block in from_euler
_EULER_ORDERS = ("XYZ", "XZY", "YXZ", "YZX", "ZXY", "ZYX")


_LAYOUT_BLOCK = 256  # frames per block when changing layout: the block stays in the CPU cache


def is_component_major(data: np.ndarray) -> bool:
    """Whether (F, J, k) data is a transposed view of C-ordered (J, k, F) memory."""
    return data.ndim == 3 and data.transpose(1, 2, 0).flags.c_contiguous


def to_component_major(data: np.ndarray, joints=None) -> np.ndarray:
    """Per-frame, per-joint data (F, J, k) -> (S, k, F) contiguous: for each joint (all, or the S joints
    listed), each component one contiguous row over the frames (k = 4 for quaternions, 3 for vectors).
    Data already stored that way comes back as it is (all joints: the same memory) or as whole rows;
    other data is copied in blocks of frames, several times faster than one strided copy."""
    data = np.asarray(data, dtype=np.float64)
    if is_component_major(data):
        planes = data.transpose(1, 2, 0)
        return planes if joints is None else planes[list(joints)]
    f = data.shape[0]
    pick = slice(None) if joints is None else list(joints)
    count = data.shape[1] if joints is None else len(pick)
    out = np.empty((count, data.shape[2], f))
    for f0 in range(0, f, _LAYOUT_BLOCK):
        out[:, :, f0: f0 + _LAYOUT_BLOCK] = data[f0: f0 + _LAYOUT_BLOCK, pick].transpose(1, 2, 0)
    return out


def from_component_major(planes: np.ndarray) -> np.ndarray:
    """(J, k, F) component-major data -> (F, J, k) contiguous (the inverse of to_component_major)."""
    planes = np.asarray(planes, dtype=np.float64)
    f = planes.shape[2]
    out = np.empty((f, planes.shape[0], planes.shape[1]))
    for f0 in range(0, f, _LAYOUT_BLOCK):
        out[f0: f0 + _LAYOUT_BLOCK] = planes[:, :, f0: f0 + _LAYOUT_BLOCK].transpose(2, 0, 1)
    return out


def identity(shape: tuple[int, ...] = ()) -> np.ndarray:
    """Identity quaternions of the given leading shape: (*shape, 4)."""
    q = np.zeros(tuple(shape) + (4,))
    q[..., 3] = 1.0
    return q


def normalize(q: np.ndarray) -> np.ndarray:
    """Unit quaternions: (..., 4) -> (..., 4)."""
    q = np.asarray(q, dtype=np.float64)
    return q / np.linalg.norm(q, axis=-1, keepdims=True)


def conjugate(q: np.ndarray) -> np.ndarray:
    """Inverse of unit quaternions: (..., 4) -> (..., 4)."""
    out = np.array(q, dtype=np.float64, copy=True)
    out[..., :3] *= -1.0
    return out


def multiply(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Hamilton product a * b (apply b, then a): (..., 4) x (..., 4) -> (..., 4), broadcasting."""
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    ax, ay, az, aw = a[..., 0], a[..., 1], a[..., 2], a[..., 3]
    bx, by, bz, bw = b[..., 0], b[..., 1], b[..., 2], b[..., 3]
    out = np.empty(np.broadcast_shapes(a.shape, b.shape))
    out[..., 0] = aw * bx + ax * bw + ay * bz - az * by
    out[..., 1] = aw * by - ax * bz + ay * bw + az * bx
    out[..., 2] = aw * bz + ax * by - ay * bx + az * bw
    out[..., 3] = aw * bw - ax * bx - ay * by - az * bz
    return out


def rotate(q: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Rotate vectors by unit quaternions: (..., 4), (..., 3) -> (..., 3), broadcasting.

    v + w t + u x t with t = 2 u x v (u the vector part, w the scalar), written out per component (the
    same arithmetic as with np.cross, without its per-call overhead)."""
    q = np.asarray(q, dtype=np.float64)
    v = np.asarray(v, dtype=np.float64)
    ux, uy, uz, w = q[..., 0], q[..., 1], q[..., 2], q[..., 3]
    vx, vy, vz = v[..., 0], v[..., 1], v[..., 2]
    tx = 2.0 * (uy * vz - uz * vy)
    ty = 2.0 * (uz * vx - ux * vz)
    tz = 2.0 * (ux * vy - uy * vx)
    out = np.empty(np.broadcast_shapes(q.shape[:-1], v.shape[:-1]) + (3,))
    out[..., 0] = vx + w * tx + (uy * tz - uz * ty)
    out[..., 1] = vy + w * ty + (uz * tx - ux * tz)
    out[..., 2] = vz + w * tz + (ux * ty - uy * tx)
    return out


def from_axis_angle(axis: np.ndarray, angle: np.ndarray) -> np.ndarray:
    """Quaternions from unit axes (..., 3) and angles in radians (...) -> (..., 4)."""
    axis = np.asarray(axis, dtype=np.float64)
    half = 0.5 * np.asarray(angle, dtype=np.float64)
    s = np.sin(half)[..., None]
    out = np.empty(np.broadcast_shapes(axis.shape[:-1], np.shape(half)) + (4,))
    out[..., :3] = axis * s
    out[..., 3] = np.cos(half)
    return out


def angle_between(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Angle in radians of the relative rotation between unit quaternions: (..., 4) -> (...)."""
    r = multiply(conjugate(a), b)
    return 2.0 * np.arctan2(np.linalg.norm(r[..., :3], axis=-1), np.abs(r[..., 3]))


def _check_order(order: str) -> str:
    order = order.upper()
    if not 1 <= len(order) <= 3 or any(c not in _AXES for c in order):
        raise ValueError(f"Euler order must be one to three of X, Y, Z, got {order!r}")
    return order


def _axis_quaternions(angles: np.ndarray, axis: int) -> np.ndarray:
    q = np.zeros(angles.shape + (4,))
    q[..., axis] = np.sin(0.5 * angles)
    q[..., 3] = np.cos(0.5 * angles)
    return q


def _half_angle_cos_sin(angles: np.ndarray, degrees: bool) -> tuple[np.ndarray, np.ndarray]:
    """cos and sin of half of each angle, shaped like ``angles``, through the tangent of a quarter angle.

    numpy's tangent is vectorised (and within an ulp), its sine and cosine of float64 are not: with
    t = tan(x / 4), cos(x / 2) = (1 - t^2) / (1 + t^2) and sin(x / 2) = 2 t / (1 + t^2), exact to a couple
    of ulps. The angle is first reduced by whole turns k (|x| <= half a turn, so |t| <= 1); each whole
    turn flips the sign of the half-angle pair."""
    turn = 360.0 if degrees else _TWO_PI
    quarter = (np.pi / 720.0) if degrees else 0.25
    if angles.size and -0.5 * turn <= angles.min() and angles.max() <= 0.5 * turn:
        turns = None  # nothing to reduce (the usual case)
        x = angles * quarter
    else:
        turns = np.rint(angles * (1.0 / turn))
        x = angles - turns * turn
        x *= quarter
    t = np.tan(x, out=x)
    t2 = t * t
    inv = 1.0 + t2
    np.divide(1.0, inv, out=inv)
    cos = 1.0 - t2
    cos *= inv
    sin = np.multiply(t, 2.0, out=t2)
    sin *= inv
    if turns is not None and turns.any():
        half = turns * 0.5                  # m or m + 0.5 for even or odd turns
        sign = np.floor(half)
        sign -= half
        sign *= 4.0
        sign += 1.0                         # 1 for even, -1 for odd
        cos *= sign
        sin *= sign
    return cos, sin


def _tait_bryan_quaternions(angles: np.ndarray, order: str, degrees: bool, out: np.ndarray) -> None:
    """Closed form of q_i(a) q_j(b) q_k(c) for (..., 3) angles into out (..., 4). With e_i e_j = eps e_k
    (eps = +1 for cyclic orders): w = ca cb cc - eps sa sb sc, q_i = sa cb cc + eps ca sb sc,
    q_j = ca sb cc - eps sa cb sc, q_k = ca cb sc + eps sa sb cc (half angles)."""
    i, j, k = (_AXES[c] for c in order)
    # Work on contiguous planes (one per angle, one per component), then interleave once.
    c, s = _half_angle_cos_sin(np.moveaxis(angles, -1, 0).copy(), degrees)
    ca, cb, cc = c
    sa, sb, sc = s
    cbcc, sbsc, sbcc, cbsc = cb * cc, sb * sc, sb * cc, cb * sc
    if (j - i) % 3 == 1:
        esa, eca = sa, ca
    else:
        esa, eca = -sa, -ca
    planes = np.empty((4,) + ca.shape)
    np.subtract(ca * cbcc, esa * sbsc, out=planes[3])
    np.add(sa * cbcc, eca * sbsc, out=planes[i])
    np.subtract(ca * sbcc, esa * cbsc, out=planes[j])
    np.add(ca * cbsc, esa * sbcc, out=planes[k])
    out[...] = np.moveaxis(planes, 0, -1)


def from_euler(angles: np.ndarray, order: str, degrees: bool = False, *, out: np.ndarray | None = None
               ) -> np.ndarray:
    """Quaternions from intrinsic Euler angles.

    angles: (..., k) with k = len(order), one angle per axis in the order given.
    order: one to three of "X", "Y", "Z" (repeats allowed), intrinsic, as in BVH channel lists.
    out: optional (..., 4) float64 array (a strided view is fine) to write the result into.
    Returns (..., 4).
    """
    order = _check_order(order)
    angles = np.asarray(angles, dtype=np.float64)
    if len(order) == 3 and len(set(order)) == 3:
        if out is None:
            out = np.empty(angles.shape[:-1] + (4,))
        if angles.ndim == 1:
            _tait_bryan_quaternions(angles[None], order, degrees, out[None])
            return out
        # Blocks of a few thousand rotations along the first axis.
        per = int(np.prod(angles.shape[1:-1], dtype=np.int64))
        step = max(1, _EULER_BLOCK // max(per, 1))
        for b in range(0, angles.shape[0], step):
            _tait_bryan_quaternions(angles[b: b + step], order, degrees, out[b: b + step])
        return out
    if degrees:
        angles = np.deg2rad(angles)
    q = _axis_quaternions(angles[..., 0], _AXES[order[0]])
    for i in range(1, len(order)):
        q = multiply(q, _axis_quaternions(angles[..., i], _AXES[order[i]]))
    if out is not None:
        out[...] = q
        return out
    return q


def to_matrix(q: np.ndarray) -> np.ndarray:
    """Rotation matrices from unit quaternions: (..., 4) -> (..., 3, 3)."""
    q = np.asarray(q, dtype=np.float64)
    x, y, z, w = q[..., 0], q[..., 1], q[..., 2], q[..., 3]
    m = np.empty(q.shape[:-1] + (3, 3))
    m[..., 0, 0] = 1 - 2 * (y * y + z * z)
    m[..., 0, 1] = 2 * (x * y - z * w)
    m[..., 0, 2] = 2 * (x * z + y * w)
    m[..., 1, 0] = 2 * (x * y + z * w)
    m[..., 1, 1] = 1 - 2 * (x * x + z * z)
    m[..., 1, 2] = 2 * (y * z - x * w)
    m[..., 2, 0] = 2 * (x * z - y * w)
    m[..., 2, 1] = 2 * (y * z + x * w)
    m[..., 2, 2] = 1 - 2 * (x * x + y * y)
    return m


def from_matrix(m: np.ndarray) -> np.ndarray:
    """Unit quaternions from rotation matrices: (..., 3, 3) -> (..., 4), w >= 0.

    A matrix that is not orthonormal (to 1e-12) is first replaced by the nearest rotation (U V^T of its
    singular value decomposition); a matrix with a determinant <= 0 raises ValueError. The quaternion
    is built from the largest of the trace and the diagonal entries, which keeps it well conditioned
    (as scipy's Rotation.from_matrix does; numpy only, so the command line does not load scipy)."""
    m = np.array(m, dtype=np.float64)
    flat = m.reshape(-1, 3, 3)
    det = np.linalg.det(flat) if flat.shape[0] else np.zeros(0)
    if np.any(det <= 0):
        k = int(np.flatnonzero(det <= 0)[0])
        raise ValueError(f"rotation matrix {k} has a non-positive determinant (left-handed or null frame): "
                         f"{flat[k].tolist()}")
    gram = flat @ flat.transpose(0, 2, 1)
    skew = ~np.all(np.abs(gram - np.eye(3)) <= 1e-12, axis=(1, 2))
    if np.any(skew):
        u, _, vt = np.linalg.svd(flat[skew])
        flat[skew] = u @ vt
    trace = flat[:, 0, 0] + flat[:, 1, 1] + flat[:, 2, 2]
    choice = np.argmax(np.stack([flat[:, 0, 0], flat[:, 1, 1], flat[:, 2, 2], trace], axis=1), axis=1)
    q = np.empty((flat.shape[0], 4))
    for i in range(3):
        rows = choice == i
        if not np.any(rows):
            continue
        r = flat[rows]
        j, k = (i + 1) % 3, (i + 2) % 3
        v = np.empty((r.shape[0], 4))
        v[:, i] = 1.0 - trace[rows] + 2.0 * r[:, i, i]
        v[:, j] = r[:, j, i] + r[:, i, j]
        v[:, k] = r[:, k, i] + r[:, i, k]
        v[:, 3] = r[:, k, j] - r[:, j, k]
        q[rows] = v
    rows = choice == 3
    if np.any(rows):
        r = flat[rows]
        q[rows, 0] = r[:, 2, 1] - r[:, 1, 2]
        q[rows, 1] = r[:, 0, 2] - r[:, 2, 0]
        q[rows, 2] = r[:, 1, 0] - r[:, 0, 1]
        q[rows, 3] = 1.0 + trace[rows]
    q /= np.linalg.norm(q, axis=1, keepdims=True)
    q = np.where(q[:, 3:4] < 0, -q, q)
    return q.reshape(m.shape[:-2] + (4,))


def _matrix_entry(comps: tuple[np.ndarray, ...], r: int, c: int) -> np.ndarray:
    """Entry (r, c) of to_matrix(q), by the same expression, without building the other eight.
    comps: the quaternions' (x, y, z, w) components, each (...)."""
    x, y, z, w = comps
    xyz = (x, y, z)
    # In place, with the same roundings as the expressions in to_matrix.
    if r == c:
        a, b = (xyz[i] for i in range(3) if i != r)
        out = a * a
        out += b * b
        out *= 2.0
        return np.subtract(1.0, out, out=out)  # 1 - 2 (a a + b b)
    # Off the diagonal: 2 * (q_r q_c -/+ q_o w), the sign by the entry's side (see to_matrix).
    o = 3 - r - c
    lo, hi = min(r, c), max(r, c)
    out = xyz[lo] * xyz[hi]
    other = xyz[o] * w
    # to_matrix: m01 = xy - zw, m02 = xz + yw, m12 = yz - xw; the transposes flip the sign.
    minus_above = (lo, hi) in ((0, 1), (1, 2))
    minus = minus_above if r < c else not minus_above
    if minus:
        out -= other
    else:
        out += other
    out *= 2.0
    return out


def _tait_bryan_planes(comps: tuple[np.ndarray, ...], order: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Intrinsic Tait-Bryan angles in radians, the middle one in [-pi/2, pi/2], as three arrays (...).
    comps: the (x, y, z, w) components of unit quaternions, each (...), at least one-dimensional."""
    i, j, k = (_AXES[c] for c in order)
    # Sign of the permutation (i, j, k): +1 for cyclic orders (XYZ, YZX, ZXY).
    cyclic = (j - i) % 3 == 1
    # For R = R_i(a) R_j(b) R_k(c): R[i, k] = sign * sin(b). Only five entries of R are needed.
    m_ik = _matrix_entry(comps, i, k)
    if not cyclic:
        np.negative(m_ik, out=m_ik)
    np.clip(m_ik, -1.0, 1.0, out=m_ik)
    mid = np.arcsin(m_ik, out=m_ik)
    m_jk, m_ij = _matrix_entry(comps, j, k), _matrix_entry(comps, i, j)
    if cyclic:  # -sign * m
        np.negative(m_jk, out=m_jk)
        np.negative(m_ij, out=m_ij)
    first = np.arctan2(m_jk, _matrix_entry(comps, k, k), out=m_jk)
    last = np.arctan2(m_ij, _matrix_entry(comps, i, i), out=m_ij)
    return first, mid, last


def _planes(q: np.ndarray) -> tuple[np.ndarray, ...]:
    """The four components of quaternions (..., 4) as arrays (...) (at least (1,)) whose elements are
    contiguous in memory: views when the components are stored apart already (component-major clips),
    else one copy."""
    q = np.atleast_2d(q)
    if q.ndim == 3 and q.strides[0] == q.itemsize and q.strides[2] >= q.shape[0] * q.itemsize:
        return tuple(q[..., c] for c in range(4))
    return tuple(np.moveaxis(q, -1, 0).copy())


def _tait_bryan_angles(q: np.ndarray, order: str) -> np.ndarray:
    """Intrinsic Tait-Bryan angles (..., 3) in radians with the middle angle in [-pi/2, pi/2]."""
    out = np.stack(_tait_bryan_planes(_planes(q), order), axis=-1)
    return out[0] if q.ndim == 1 else out


def to_euler(q: np.ndarray, order: str, degrees: bool = False) -> np.ndarray:
    """Intrinsic Euler angles of unit quaternions, frame by frame (no continuity).

    q: (..., 4). order: three distinct axes, e.g. "ZXY". Returns (..., 3), the middle angle in
    [-90, 90] degrees. Near gimbal lock the first angle takes the whole turn about the shared axis.
    """
    order = _check_order(order)
    if len(order) != 3 or len(set(order)) != 3:
        raise ValueError(f"to_euler needs three distinct axes, got {order!r}")
    out = _tait_bryan_angles(np.asarray(q, dtype=np.float64), order)
    _settle_gimbal(out, np.asarray(q, dtype=np.float64), order, fill_first=None)
    return np.rad2deg(out) if degrees else out


_GIMBAL_COS = 1e-6


def _settle_gimbal(angles: np.ndarray, q: np.ndarray, order: str, fill_first: np.ndarray | None) -> None:
    """At gimbal lock the first and last angles share one axis: keep ``fill_first`` (or 0) as the first
    angle and solve the last one exactly, in place."""
    locked = np.abs(np.cos(angles[..., 1])) < _GIMBAL_COS
    if not np.any(locked):
        return
    first = np.zeros(angles.shape[:-1]) if fill_first is None else fill_first
    angles[..., 0] = np.where(locked, first, angles[..., 0])
    qa = _axis_quaternions(angles[..., 0], _AXES[order[0]])
    qb = _axis_quaternions(angles[..., 1], _AXES[order[1]])
    qc = multiply(conjugate(multiply(qa, qb)), q)
    k = _AXES[order[2]]
    last = 2.0 * np.arctan2(qc[..., k], qc[..., 3])
    angles[..., 2] = np.where(locked, last, angles[..., 2])


def _wrap(a: np.ndarray) -> np.ndarray:
    return (a + np.pi) % (2.0 * np.pi) - np.pi


def _wrap_small(a: np.ndarray) -> np.ndarray:
    """_wrap for angles in [-pi, 2 pi] (bit for bit: there (a + pi) % 2pi is a + pi or a + pi - 2pi, and
    that subtraction is exact)."""
    y = a + np.pi
    y -= (y >= _TWO_PI) * _TWO_PI  # subtracting 0.0 leaves every value as it is
    y -= np.pi
    return y


def _unwrap_small(p: np.ndarray) -> np.ndarray:
    """np.unwrap(p, axis=0) for angles in [-pi, pi], bit for bit, with the work spent only on the columns
    that jump (by pi or more) somewhere."""
    up = p + 0.0  # np.unwrap adds a zero correction to every frame after the first (-0.0 becomes 0.0)
    up[0] = p[0]
    if p.shape[0] < 2:
        return up
    flat_p = p.reshape(p.shape[0], -1)
    dd = flat_p[1:] - flat_p[:-1]
    jumps = np.abs(dd) >= np.pi
    cols = np.flatnonzero(jumps.any(axis=0))
    if cols.size == 0:
        return up
    d = dd[:, cols]
    # np.unwrap: ddmod = mod(dd + pi, 2 pi) - pi, with -pi turned to pi where dd > 0; here dd + pi lies in
    # [-pi, 3 pi], where the mod is one exact add or subtract.
    y = d + np.pi
    y = np.where(y < 0, y + _TWO_PI, np.where(y >= _TWO_PI, y - _TWO_PI, y))
    ddmod = y - np.pi
    ddmod[(ddmod == -np.pi) & (d > 0)] = np.pi
    correct = ddmod - d
    correct[~jumps[:, cols]] = 0.0
    flat_up = up.reshape(up.shape[0], -1)
    flat_up[1:, cols] = flat_p[1:, cols] + np.cumsum(correct, axis=0)
    return up


def to_euler_continuous(q: np.ndarray, order: str, degrees: bool = False, *, out: np.ndarray | None = None
                        ) -> np.ndarray:
    """Intrinsic Euler angles along axis 0 (frames) that change smoothly from frame to frame.

    q: (F, ..., 4) unit quaternions. Returns (F, ..., 3); out: optional (F, ..., 3) float64 array (a
    strided view is fine) to write them into.

    Each rotation has two Euler solutions, (a, b, c) and (a + pi, pi - b, c + pi). Between consecutive
    frames we pick the one closer to the previous pick; because the map between the two solutions is an
    isometry of the wrapped angle distance, the pick is a running parity (cumulative XOR) and needs no
    Python loop over frames. The chosen angles are then unwrapped, so there are no +-360 jumps. At gimbal
    lock the first angle holds its last free value and the last angle takes the rest of the turn.
    """
    order = _check_order(order)
    q = np.asarray(q, dtype=np.float64)
    n = q.shape[0]
    if n == 0:
        return np.empty(q.shape[:-1] + (3,)) if out is None else out
    if out is None:
        out = np.empty(q.shape[:-1] + (3,))
    # Whole tracks (all frames) of a few rotations at a time.
    flat = q.reshape(n, -1, 4)
    dest = out.reshape(n, -1, 3)
    if not np.shares_memory(dest, out):  # out's layout cannot be seen as (F, K, 3): fill a copy
        dest = np.empty(flat.shape[:2] + (3,))
    step = max(1, _BLOCK // n)
    for k in range(0, flat.shape[1], step):
        _euler_tracks(flat[:, k: k + step], order, degrees, dest[:, k: k + step])
    if not np.shares_memory(dest, out):
        out[...] = dest.reshape(out.shape)
    return out


def _euler_tracks(q: np.ndarray, order: str, degrees: bool, out: np.ndarray) -> None:
    """to_euler_continuous of (F, K, 4) tracks, F >= 1, into out (F, K, 3)."""
    n = q.shape[0]
    # Work on contiguous planes: one array (F, ...) per component and per angle.
    a, b, c = _tait_bryan_planes(_planes(q), order)
    # Carry the first angle over gimbal-locked frames from the last free frame (forward fill). A frame can
    # only be locked where |sin(mid)| is within 1e-11 of 1, so the cosines are taken there only.
    near = np.abs(b) > np.pi / 2 - 1e-5
    if np.any(near):
        locked = np.zeros(near.shape, dtype=bool)
        locked[near] = np.abs(np.cos(b[near])) < _GIMBAL_COS
        if np.any(locked):
            canon = np.stack([a, b, c], axis=-1)
            idx = np.where(locked, 0, np.arange(n).reshape((n,) + (1,) * (locked.ndim - 1)))
            idx = np.maximum.accumulate(idx, axis=0)
            fill = np.take_along_axis(canon[..., 0], idx, axis=0)
            fill = np.where(locked & (idx == 0) & locked[:1], 0.0, fill)
            _settle_gimbal(canon, q, order, fill_first=fill)
            # The settled last angle lies in [-2 pi, 2 pi]: bring it back to [-pi, pi) like the others.
            last = canon[..., 2]
            last[locked] = _wrap(last[locked])
            a, b, c = (np.ascontiguousarray(canon[..., i]) for i in range(3))
    if n > 1:
        # Wrapped distances to the previous frame's canonical angles, of this frame's two solutions.
        # With A, B, C the wrapped changes of the three angles (each in [0, pi]): the same solution is
        # A + B + C away, the other one (pi - A) + (pi - |b + b_prev|) + (pi - C) away.
        da = np.abs(a[1:] - a[:-1])
        np.subtract(_TWO_PI, da, out=da, where=da > np.pi)
        dc = np.abs(c[1:] - c[:-1])
        np.subtract(_TWO_PI, dc, out=dc, where=dc > np.pi)
        d_same = da + np.abs(b[1:] - b[:-1])
        d_same += dc
        d_same -= 1e-12
        d_flip = 3.0 * np.pi - da
        d_flip -= np.abs(b[1:] + b[:-1])
        d_flip -= dc
        flip = d_flip < d_same
        if np.any(flip):
            parity = np.empty(b.shape, dtype=bool)
            parity[0] = False
            np.logical_xor.accumulate(flip, axis=0, out=parity[1:])
            a = np.where(parity, a + np.pi, a)
            b = np.where(parity, np.pi - b, b)
            c = np.where(parity, c + np.pi, c)
    angles = [_unwrap_small(_wrap_small(angle)) for angle in (a, b, c)]
    if degrees:
        angles = [np.rad2deg(angle, out=angle) for angle in angles]
    # Interleave into out a few hundred frames at a time, so the rows written stay in the CPU cache.
    for f0 in range(0, n, _LAYOUT_BLOCK):
        for i, angle in enumerate(angles):
            out[f0: f0 + _LAYOUT_BLOCK, :, i] = angle[f0: f0 + _LAYOUT_BLOCK]


def slerp(q0: np.ndarray, q1: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Spherical linear interpolation, shortest path: (..., 4), (..., 4), t (...) -> (..., 4)."""
    q0 = np.asarray(q0, dtype=np.float64)
    q1 = np.asarray(q1, dtype=np.float64)
    t = np.asarray(t, dtype=np.float64)[..., None]
    d = np.sum(q0 * q1, axis=-1, keepdims=True)
    q1 = np.where(d < 0, -q1, q1)
    d = np.abs(d)
    theta = np.arccos(np.clip(d, -1.0, 1.0))
    s = np.sin(theta)
    small = s < 1e-9
    with np.errstate(invalid="ignore", divide="ignore"):
        w0 = np.where(small, 1.0 - t, np.sin((1.0 - t) * theta) / np.where(small, 1.0, s))
        w1 = np.where(small, t, np.sin(t * theta) / np.where(small, 1.0, s))
    return normalize(w0 * q0 + w1 * q1)


def swing_twist(q: np.ndarray, axis: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Split rotations into swing and twist about ``axis`` (in the rotation's own frame).

    q: (..., 4) unit quaternions; axis: (..., 3) unit vectors. Returns (swing, twist), each (..., 4),
    with q = swing * twist, twist a rotation about ``axis`` and swing a rotation about an axis
    perpendicular to it.
    """
    q = np.asarray(q, dtype=np.float64)
    axis = np.asarray(axis, dtype=np.float64)
    proj = np.sum(q[..., :3] * axis, axis=-1, keepdims=True) * axis
    twist = np.concatenate([np.broadcast_to(proj, q.shape[:-1] + (3,)), q[..., 3:4]], axis=-1)
    n = np.linalg.norm(twist, axis=-1, keepdims=True)
    twist = np.where(n > 1e-12, twist / np.where(n > 1e-12, n, 1.0), identity(q.shape[:-1]))
    swing = multiply(q, conjugate(twist))
    return swing, twist


def make_continuous(q: np.ndarray, axis: int = 0) -> np.ndarray:
    """Flip quaternion signs so consecutive samples along ``axis`` have a non-negative dot product.

    q: (..., 4). The same rotations come back; only the signs change, as a running parity.
    """
    q = np.moveaxis(np.asarray(q, dtype=np.float64), axis, 0)
    if q.shape[0] < 2:
        return np.moveaxis(q.copy(), 0, axis)
    flips = np.sum(q[1:] * q[:-1], axis=-1) < 0
    parity = np.concatenate([np.zeros((1,) + flips.shape[1:], dtype=bool),
                             np.cumsum(flips, axis=0) % 2 == 1], axis=0)
    out = np.where(parity[..., None], -q, q)
    return np.moveaxis(out, 0, axis)


def between_vectors(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Shortest-arc rotations taking directions a to b: (..., 3), (..., 3) -> (..., 4).

    Zero-length inputs give the identity; opposite directions turn about an axis perpendicular to a.
    """
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    na = np.linalg.norm(a, axis=-1, keepdims=True)
    nb = np.linalg.norm(b, axis=-1, keepdims=True)
    ok = (na[..., 0] > 1e-12) & (nb[..., 0] > 1e-12)
    a = a / np.where(na > 1e-12, na, 1.0)
    b = b / np.where(nb > 1e-12, nb, 1.0)
    d = np.sum(a * b, axis=-1)
    c = np.cross(a, b)
    q = np.concatenate([c, (1.0 + d)[..., None]], axis=-1)
    opposite = d < -1.0 + 1e-12
    if np.any(opposite):
        helper = np.where(np.abs(a[..., 0:1]) < 0.9, np.array([1.0, 0.0, 0.0]), np.array([0.0, 1.0, 0.0]))
        perp = np.cross(a, helper)
        perp /= np.linalg.norm(perp, axis=-1, keepdims=True)
        q = np.where(opposite[..., None], np.concatenate([perp, np.zeros(d.shape + (1,))], axis=-1), q)
    q = normalize(np.where(ok[..., None], q, identity(q.shape[:-1])))
    return q
