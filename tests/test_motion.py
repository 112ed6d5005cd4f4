"""Forward kinematics against an independent, slow, matrix-per-frame reference."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from retarget import Motion, Skeleton, forward_kinematics, quat


def _random_skeleton(rng, n=12, rest_rotations=False):
    parents = [-1] + [int(rng.integers(0, i)) for i in range(1, n)]
    offsets = rng.normal(size=(n, 3)) * 10
    rest = Rotation.random(n, random_state=int(rng.integers(1 << 30))).as_quat() if rest_rotations else None
    return Skeleton(tuple(f"j{i}" for i in range(n)), np.array(parents), offsets, rest)


def _slow_fk(sk, rot, root, trans=None):
    """Frame by frame, joint by joint, with 4x4 matrices from scipy."""
    f, n = rot.shape[:2]
    pos = np.zeros((f, n, 3))
    for fr in range(f):
        mats = []
        for j in range(n):
            m = np.eye(4)
            m[:3, :3] = Rotation.from_quat(rot[fr, j]).as_matrix()
            m[:3, 3] = root[fr] if j == 0 else (sk.offsets[j] if trans is None else trans[fr, j])
            if sk.parents[j] >= 0:
                m = mats[sk.parents[j]] @ m
            mats.append(m)
            pos[fr, j] = m[:3, 3]
    return pos


def test_fk_matches_slow_matrix_reference():
    rng = np.random.default_rng(0)
    sk = _random_skeleton(rng, rest_rotations=True)
    f = 20
    rot = Rotation.random(f * sk.num_joints, random_state=1).as_quat().reshape(f, sk.num_joints, 4)
    root = rng.normal(size=(f, 3))
    m = Motion(sk, rot, root, 30.0)
    grot, gpos = m.global_transforms()
    np.testing.assert_allclose(gpos, _slow_fk(sk, rot, root), atol=1e-9)
    # Global rotation of a joint = product of local rotations down its ancestry.
    j = sk.num_joints - 1
    chain = [j] + sk.ancestors(j)
    ref = Rotation.identity(f)
    for k in reversed(chain):
        ref = ref * Rotation.from_quat(rot[:, k])
    assert np.abs(np.abs(np.sum(grot[:, j] * ref.as_quat(), -1)) - 1).max() < 1e-9


def test_fk_with_animated_translations_replaces_offsets():
    rng = np.random.default_rng(1)
    sk = _random_skeleton(rng)
    f = 5
    rot = Rotation.random(f * sk.num_joints, random_state=2).as_quat().reshape(f, sk.num_joints, 4)
    trans = rng.normal(size=(f, sk.num_joints, 3))
    root = trans[:, 0]
    m = Motion(sk, rot, root, 30.0, translations=trans)
    np.testing.assert_allclose(m.global_transforms()[1], _slow_fk(sk, rot, root, trans), atol=1e-9)


@settings(max_examples=30, deadline=None)
@given(st.integers(2, 30), st.integers(0, 10_000))
def test_fk_of_zero_pose_is_cumulative_offsets(n, seed):
    """Identity rotations: each joint sits at the sum of the offsets along its ancestry."""
    rng = np.random.default_rng(seed)
    sk = _random_skeleton(rng, n)
    m = Motion(sk, quat.identity((3, n)), np.broadcast_to(sk.offsets[0], (3, 3)), 24.0)
    pos = m.global_transforms()[1]
    for j in range(n):
        expected = sk.offsets[[j] + sk.ancestors(j)].sum(axis=0)
        np.testing.assert_allclose(pos[:, j], np.broadcast_to(expected, (3, 3)), atol=1e-9)


@settings(max_examples=30, deadline=None)
@given(st.integers(2, 20), st.integers(0, 10_000))
def test_fk_of_rest_rotations_is_rest_pose(n, seed):
    rng = np.random.default_rng(seed)
    sk = _random_skeleton(rng, n, rest_rotations=True)
    grot, gpos = Motion.rest(sk, frames=2).global_transforms()
    np.testing.assert_allclose(gpos[0], sk.rest_global[1], atol=1e-9)
    assert np.all(np.abs(np.linalg.norm(grot, axis=-1) - 1) < 1e-12)


def test_fk_of_some_joints_equals_the_same_columns_of_full_fk():
    """forward_kinematics(joints=...) computes only those joints and their ancestors; its columns are
    bit for bit the full result's (same arithmetic, joint by joint), in the order asked for."""
    rng = np.random.default_rng(5)
    sk = _random_skeleton(rng, n=15, rest_rotations=True)
    f = 40
    rot = Rotation.random(f * 15, random_state=4).as_quat().reshape(f, 15, 4)
    root = rng.normal(size=(f, 3))
    trans = rng.normal(size=(f, 15, 3))
    for tr in (None, trans):
        grot, gpos = forward_kinematics(sk, rot, root, tr)
        pick = [11, 3, 14, 0]
        sub_rot, sub_pos = forward_kinematics(sk, rot, root, tr, joints=pick)
        assert sub_rot.shape == (f, 4, 4) and sub_pos.shape == (f, 4, 3)
        assert np.array_equal(sub_rot, grot[:, pick]) and np.array_equal(sub_pos, gpos[:, pick])
    np.testing.assert_allclose(forward_kinematics(sk, rot, root, trans)[1], _slow_fk(sk, rot, root, trans),
                               atol=1e-9)
