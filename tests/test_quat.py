"""Quaternion helpers against scipy.spatial.transform.Rotation and transforms3d (independent libraries),
plus property tests of the algebra."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy.spatial.transform import Rotation

from retarget import quat

ORDERS = ["XYZ", "XZY", "YXZ", "YZX", "ZXY", "ZYX"]
# Float64 round-off through a handful of trig calls: 1e-9 leaves ample room and still catches any
# wrong sign or axis (those give errors of order 1).
TOL = 1e-9


def _same_rotation(a, b):
    return np.abs(np.abs(np.sum(a * b, axis=-1)) - 1.0).max() < TOL


@pytest.mark.parametrize("order", ORDERS)
def test_from_euler_matches_scipy_intrinsic(order):
    """scipy's uppercase sequence is intrinsic; ours must give the same rotation."""
    rng = np.random.default_rng(1)
    ang = rng.uniform(-np.pi, np.pi, (500, 3))
    assert _same_rotation(quat.from_euler(ang, order), Rotation.from_euler(order, ang).as_quat())


@pytest.mark.parametrize("order", ORDERS)
def test_from_euler_matches_transforms3d(order):
    """transforms3d's 'r' + axes spells a rotating (intrinsic) frame; its quaternions are scalar-first."""
    import transforms3d.euler as t3e

    rng = np.random.default_rng(2)
    for ang in rng.uniform(-np.pi, np.pi, (50, 3)):
        w, x, y, z = t3e.euler2quat(*ang, axes="r" + order.lower())
        assert _same_rotation(quat.from_euler(ang, order), np.array([x, y, z, w]))


@pytest.mark.parametrize("order", ORDERS)
def test_to_euler_round_trip_and_scipy(order):
    rng = np.random.default_rng(3)
    ang = rng.uniform(-np.pi, np.pi, (500, 3))
    ang[:, 1] = rng.uniform(-1.5, 1.5, 500)  # away from gimbal lock: the canonical solution is unique
    q = quat.from_euler(ang, order)
    np.testing.assert_allclose(quat.to_euler(q, order), ang, atol=1e-9)
    np.testing.assert_allclose(quat.to_euler(q, order), Rotation.from_quat(q).as_euler(order), atol=1e-9)


def test_bvh_composition_rule_hand_case():
    """Channels 'Zrotation Xrotation Yrotation' = (90, 90, 0) map (0, 0, 1) to (1, 0, 0): Rx(90) takes
    +Z to -Y, then Rz(90) takes -Y to +X (worked by hand from the BVH channel-order rule)."""
    q = quat.from_euler([90.0, 90.0, 0.0], "ZXY", degrees=True)
    np.testing.assert_allclose(quat.rotate(q, [0.0, 0.0, 1.0]), [1.0, 0.0, 0.0], atol=1e-12)


def test_multiply_and_rotate_match_scipy():
    rng = np.random.default_rng(4)
    a = Rotation.random(200, random_state=5)
    b = Rotation.random(200, random_state=6)
    v = rng.normal(size=(200, 3))
    assert _same_rotation(quat.multiply(a.as_quat(), b.as_quat()), (a * b).as_quat())
    np.testing.assert_allclose(quat.rotate(a.as_quat(), v), a.apply(v), atol=1e-12)
    np.testing.assert_allclose(quat.to_matrix(a.as_quat()), a.as_matrix(), atol=1e-12)


def test_slerp_matches_scipy_slerp():
    from scipy.spatial.transform import Slerp

    r = Rotation.random(2, random_state=7)
    t = np.linspace(0, 1, 11)
    ref = Slerp([0, 1], r)(t).as_quat()
    ours = quat.slerp(r.as_quat()[0], r.as_quat()[1], t)
    assert _same_rotation(ours, ref)


unit_quats = arrays(np.float64, (4,), elements=st.floats(-1, 1)).filter(lambda q: np.linalg.norm(q) > 0.1)


@settings(max_examples=200, deadline=None)
@given(unit_quats, unit_quats)
def test_product_is_unit_and_inverse_cancels(a, b):
    a, b = quat.normalize(a), quat.normalize(b)
    p = quat.multiply(a, b)
    assert abs(np.linalg.norm(p) - 1) < 1e-12
    assert _same_rotation(quat.multiply(quat.conjugate(a), p), b)


@settings(max_examples=200, deadline=None)
@given(unit_quats, arrays(np.float64, (3,), elements=st.floats(-1, 1)).filter(lambda v: np.linalg.norm(v) > 0.1))
def test_swing_twist_recomposes_and_twist_is_about_axis(q, axis):
    q, axis = quat.normalize(q), axis / np.linalg.norm(axis)
    swing, twist = quat.swing_twist(q, axis)
    assert _same_rotation(quat.multiply(swing, twist), q)
    # The twist leaves the axis where it is; the swing's axis is perpendicular to it.
    np.testing.assert_allclose(quat.rotate(twist, axis), axis, atol=1e-9)
    assert abs(np.dot(swing[:3], axis)) < 1e-9


@settings(max_examples=100, deadline=None)
@given(st.sampled_from(ORDERS), arrays(np.float64, (3,), elements=st.floats(-3.1, 3.1)))
def test_euler_round_trip_any_angles(order, ang):
    """to_euler may return the other solution of the pair, but the rotation must be the same."""
    q = quat.from_euler(ang, order)
    assert _same_rotation(quat.from_euler(quat.to_euler(q, order), order), q)


@pytest.mark.parametrize("order", ORDERS)
def test_continuous_euler_through_full_spins_and_gimbal(order):
    """A clip that spins twice about each axis and passes through the middle axis' gimbal lock: the
    angles must change by less than the true per-frame motion allows (no +-360 or 180 jumps) and still
    reproduce every rotation."""
    f = 721
    t = np.linspace(0, 1, f)
    ang = np.stack([4 * np.pi * t, np.pi * np.sin(2 * np.pi * t), -4 * np.pi * t], axis=1)
    q = quat.from_euler(ang, order)
    out = quat.to_euler_continuous(q, order)
    assert _same_rotation(quat.from_euler(out, order), q)
    step = np.abs(np.diff(out, axis=0)).max()
    # The true per-frame change is at most 4*pi/720 ~ 0.0175 rad per axis; allow 3x for the re-split
    # near gimbal lock, far below any wrap (6.28) or flip (3.14).
    assert step < 0.06, step


def test_make_continuous_removes_sign_flips():
    q = Rotation.from_euler("z", np.linspace(0, 6 * np.pi, 300)[:, None]).as_quat()
    q[::7] *= -1
    c = quat.make_continuous(q)
    assert np.all(np.sum(c[1:] * c[:-1], axis=-1) > 0)
    assert _same_rotation(c, q)


def test_between_vectors_including_opposite():
    rng = np.random.default_rng(8)
    a = rng.normal(size=(100, 3))
    b = rng.normal(size=(100, 3))
    b[0] = -a[0]
    q = quat.between_vectors(a, b)
    out = quat.rotate(q, a / np.linalg.norm(a, axis=1, keepdims=True))
    np.testing.assert_allclose(out, b / np.linalg.norm(b, axis=1, keepdims=True), atol=1e-9)


def test_from_matrix_matches_scipy_including_half_turns_and_skewed_input():
    """quat.from_matrix (numpy) against scipy's Rotation.from_matrix: random rotations, identity, half
    turns about each axis and one just short of it (where the trace is no longer the largest pick),
    and matrices off orthonormal by 1e-3 (both take the nearest rotation first). Both use the same
    construction, so 1e-12 only leaves room for rounding. Left-handed frames are refused."""
    m = Rotation.random(500, random_state=3).as_matrix()
    special = Rotation.from_rotvec(np.array([[0, 0, 0], [np.pi, 0, 0], [0, np.pi, 0], [0, 0, np.pi],
                                             [np.pi - 1e-9, 0, 0], [np.pi / np.sqrt(2), np.pi / np.sqrt(2), 0]]))
    skewed = m[:50] + np.random.default_rng(3).normal(size=(50, 3, 3)) * 1e-3
    for mats in (np.concatenate([m, special.as_matrix()]), skewed):
        ours = quat.from_matrix(mats)
        theirs = Rotation.from_matrix(mats).as_quat()
        theirs = np.where(theirs[:, 3:4] < 0, -theirs, theirs)
        np.testing.assert_allclose(ours, theirs, atol=1e-12)
        assert np.all(ours[:, 3] >= 0)
    assert quat.from_matrix(np.eye(3)).tolist() == [0.0, 0.0, 0.0, 1.0]
    assert quat.from_matrix(np.zeros((2, 0, 3, 3))).shape == (2, 0, 4)
    with pytest.raises(ValueError, match="determinant"):
        quat.from_matrix(np.diag([1.0, 1.0, -1.0]))


def test_from_euler_accurate_for_large_and_whole_turn_angles():
    """from_euler reduces angles by whole turns before its half-angle tangents: against scipy, and
    against the same rotation given with the angles reduced to (-180, 180], for angles up to ten turns
    (BVH files carry unwrapped angles) and exactly on whole and half turns. 1e-12: rounding of angles
    near 3600 degrees is about 1e-13 relative."""
    rng = np.random.default_rng(8)
    ang = np.concatenate([rng.uniform(-3600, 3600, (2000, 3)),
                          np.array([[180, -180, 360], [540, 720, -900], [0, 0, 0], [90, -90, 270]])])
    for order in ORDERS:
        ours = quat.from_euler(ang, order, degrees=True)
        theirs = Rotation.from_euler(order, ang, degrees=True).as_quat()
        assert _same_rotation(ours, theirs)
        reduced = quat.from_euler((ang + 180.0) % 360.0 - 180.0, order, degrees=True)
        assert _same_rotation(ours, reduced)
        np.testing.assert_allclose(np.linalg.norm(ours, axis=-1), 1.0, atol=1e-14)
    # Whole turns flip the quaternion's sign, as the half-angle product says: q(a + 360) = -q(a).
    np.testing.assert_allclose(quat.from_euler([370.0, 0, 0], "XYZ", degrees=True),
                               -quat.from_euler([10.0, 0, 0], "XYZ", degrees=True), atol=1e-15)
    out = np.empty((3, 2, 4))
    res = quat.from_euler(np.zeros((3, 2, 3)), "ZXY", out=out)
    assert res is out and np.all(out[..., 3] == 1.0)


def test_component_major_layout_round_trip():
    """to_component_major / from_component_major are exact inverses (a copy, nothing computed), for
    all joints and for a picked subset, over more frames than one copy block."""
    data = np.random.default_rng(1).normal(size=(1000, 7, 4))
    planes = quat.to_component_major(data)
    assert planes.shape == (7, 4, 1000) and planes.flags.c_contiguous
    assert np.array_equal(planes, data.transpose(1, 2, 0))
    assert np.array_equal(quat.from_component_major(planes), data)
    assert np.array_equal(quat.to_component_major(data, [5, 1]), data[:, [5, 1]].transpose(1, 2, 0))
