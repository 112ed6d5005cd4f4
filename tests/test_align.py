"""Rest alignment: changes of axes, reference poses, bone frames and the per-joint constants.

Ground truth comes from tests/bodies.py: one invented body rendered onto rigs that differ in structure,
names, axes, units, channel order and rest posture, where the true per-joint relation is known by
construction. Outside references: scipy.spatial.transform.Rotation for rotation matrices and
quaternions.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from retarget import quat
from retarget.align import (FORWARD, UP, align, bone_frame, file_to_canonical_rotation, leg_length,
                            neutral_frame, reference_pose, standing_height)
from retarget.chains import analyze_body
from retarget.convention import Convention
from retarget.errors import MappingError, OptionError, SkeletonError
from retarget.transfer import transfer

from bodies import (DROPPED, INDEX, OFFSETS, build_rig, capture_spec, character_spec, random_pose, render,
                    rest_motion, rotation_angles, rot, segment_angles, summary, truth_pairs, walk)

AXES = ["+X", "-X", "+Y", "-Y", "+Z", "-Z"]
CONVENTIONS = [(u, f) for u, f in itertools.product(AXES, AXES) if u[1] != f[1]]


@pytest.mark.parametrize("up,forward", CONVENTIONS)
def test_change_of_axes_quaternion_is_the_convention_matrix(up, forward):
    """The quaternion used for the change of axes is the same rotation as Convention.file_to_canonical,
    as scipy's Rotation reads it; it takes the file's up to +Y and its forward to +Z."""
    conv = Convention(up, forward, 1.0)
    q = file_to_canonical_rotation(conv)
    m = Rotation.from_quat(q).as_matrix()
    assert np.allclose(m, conv.file_to_canonical(), atol=1e-12)
    assert np.allclose(m @ conv.up_vector, UP) and np.allclose(m @ conv.forward_vector, FORWARD)


@given(st.tuples(st.floats(-1, 1), st.floats(-1, 1), st.floats(-1, 1)).filter(lambda v: np.linalg.norm(v) > 0.1),
       st.tuples(st.floats(-1, 1), st.floats(-1, 1)).filter(lambda v: np.linalg.norm(v) > 0.1),
       st.booleans())
@settings(max_examples=60, deadline=None)
def test_bone_frame_is_a_proper_rotation_along_the_bone(direction, fwd_xz, use_up):
    """A bone frame is orthonormal with determinant +1 (a rotation, as scipy accepts it), its first axis
    runs along the bone, and its second axis is the reference (forward, or up) made perpendicular."""
    d = np.array(direction)
    fwd = np.array([fwd_xz[0], 0.0, fwd_xz[1]])
    fwd /= np.linalg.norm(fwd)
    f = bone_frame(d, fwd, use_up)
    assert np.allclose(f.T @ f, np.eye(3), atol=1e-12) and np.isclose(np.linalg.det(f), 1.0)
    Rotation.from_matrix(f)  # accepted as a rotation
    assert np.allclose(f[:, 0], d / np.linalg.norm(d))
    ref = UP if use_up else fwd
    perp = ref - np.dot(ref, f[:, 0]) * f[:, 0]
    if np.linalg.norm(perp) > 1e-3:
        assert np.allclose(f[:, 1], perp / np.linalg.norm(perp), atol=1e-9)


def test_reference_pose_is_the_rest_in_canonical_metres():
    """A Z-up centimetre rig's rest pose, in canonical space, is the body's own rest posture in metres
    (the body is defined in canonical space), and the character faces +Z."""
    rig = build_rig(capture_spec())
    ref = reference_pose(rig.skeleton, rig.convention, analyze_body(rig.skeleton))
    assert ref.label == "rest"
    assert np.allclose(ref.positions, rig.posture_positions[rig.body_index], atol=1e-12)
    assert np.allclose(ref.forward, FORWARD, atol=1e-12)


def test_degenerate_rest_reads_a_frame_or_refuses():
    """A rig whose zero pose puts every bone along one line (orientation baked into the channels) is read
    from an animated frame; without a clip it is refused with a SkeletonError naming the reason."""
    rig = build_rig(character_spec(degenerate=True, up="+Y", forward="+Z", unit=0.01, posture={}))
    motion = render(rig, *walk(40, twist_only=DROPPED))
    body = analyze_body(rig.skeleton, motion)
    ref = reference_pose(rig.skeleton, Convention("+Y", "+Z", 0.01), body, motion)
    assert ref.label.startswith("frame ")
    with pytest.raises(SkeletonError, match="one line"):
        reference_pose(rig.skeleton, Convention("+Y", "+Z", 0.01), body)


def test_neutral_frame_finds_the_standing_frame():
    """Among random poses, the one frame standing straight with arms hanging at the sides (turned about
    the forward axis only) is the most neutral."""
    rig = build_rig(capture_spec())
    local, root = random_pose(np.random.default_rng(3), 30, max_deg=35)
    local[:, 0] = quat.identity()
    local[17] = quat.identity((len(OFFSETS),))
    local[17, INDEX["shoulder_l"]] = rot((0, 0, 1), -80)
    local[17, INDEX["shoulder_r"]] = rot((0, 0, 1), 80)
    motion = render(rig, local, root)
    body = analyze_body(rig.skeleton)
    assert neutral_frame(motion, rig.convention, body) == 17


def test_leg_length_and_standing_height_from_the_body_table():
    """Thigh + shin and the straightened standing height match the body's own bone table: thigh is the
    knee offset, shin the ankle offset; standing height adds the pelvis-to-hip drop and the ankle's
    height above the toe's end site."""
    rig = build_rig(capture_spec())
    body = analyze_body(rig.skeleton)
    ref = reference_pose(rig.skeleton, rig.convention, body)
    thigh = np.linalg.norm(OFFSETS[INDEX["knee_l"]])
    shin = np.linalg.norm(OFFSETS[INDEX["ankle_l"]])
    assert leg_length(body, ref.positions) == pytest.approx(thigh + shin, abs=1e-12)
    drop = -(OFFSETS[INDEX["buttock_l"]][1] + OFFSETS[INDEX["thigh_l"]][1])
    ankle = 0.06 + 0.01  # toe offset drop and its end site drop (tests/bodies.py)
    assert standing_height(body, ref) == pytest.approx(drop + thigh + shin + ankle, abs=1e-12)


def test_identical_skeletons_give_identity_constants():
    """A rig onto itself: every per-joint constant is the identity (to rounding), root scale 1, no ground
    offset."""
    rig = build_rig(capture_spec())
    al = align(rig.skeleton, rig.skeleton, truth_pairs(rig, rig))
    assert np.max(quat.angle_between(al.offsets, quat.identity((len(al.offsets),)))) < 1e-9
    assert al.root_scale == pytest.approx(1.0, abs=1e-12) and abs(al.ground_offset) < 1e-12


def test_t_pose_source_puts_an_a_pose_target_into_a_t_pose():
    """The source holding its T-pose rest: every mapped body segment of the A-pose target points where
    the source's points (arms horizontal), to 1e-9 degrees."""
    a, b = build_rig(capture_spec()), build_rig(character_spec())
    src = render(a, *rest_motion(a, 2))
    out = transfer(src, align(a.skeleton, b.skeleton, truth_pairs(a, b)))
    mean, worst = summary(segment_angles(out, b, src, a))
    assert worst < 1e-9


@pytest.mark.parametrize("twist,limit", [("chain", 0.2), ("facing", 6.0)])
def test_twist_carried_down_the_chain_beats_facing_frames(twist, limit):
    """Why bone frames take their twist from the parent (DEVELOPERS.md): the A-pose rig spreads its legs
    5 degrees about the forward axis, which turns each foot about its own forward-pointing bone. Frames
    built from the character's facing cannot see that turn (about 5 degrees of twist error on the feet);
    carrying the parent's frame change down the chain recovers it to under 0.2 degrees (the rest is the
    thigh not being exactly perpendicular to the forward axis). Measured on a walk."""
    a, b = build_rig(capture_spec()), build_rig(character_spec())
    local, root = walk(60, twist_only=DROPPED)
    src, truth = render(a, local, root), render(b, local, root)
    out = transfer(src, align(a.skeleton, b.skeleton, truth_pairs(a, b), source_motion=src, twist=twist))
    feet = rotation_angles(out, b, truth, b, ["ankle_l", "ankle_r", "toe_l", "toe_r"])
    _, worst = summary(feet)
    assert worst < limit
    if twist == "facing":
        assert worst > 3.0  # the effect being guarded against is real


def test_bad_pairs_and_options_are_refused():
    """Empty, out-of-range and repeated pairs are MappingErrors naming the joint; a bad root scale or
    twist mode is an OptionError."""
    rig = build_rig(capture_spec())
    sk = rig.skeleton
    with pytest.raises(MappingError, match="no pairs"):
        align(sk, sk, [])
    with pytest.raises(MappingError, match="outside"):
        align(sk, sk, [(0, 999)])
    with pytest.raises(MappingError, match=repr(sk.names[0])):
        align(sk, sk, [(0, 0), (0, 1)])
    with pytest.raises(OptionError, match="root scale"):
        align(sk, sk, truth_pairs(rig, rig), root_scale=-1.0)
    with pytest.raises(OptionError, match="twist"):
        align(sk, sk, truth_pairs(rig, rig), twist="sideways")
