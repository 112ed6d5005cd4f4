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
