"""Convention detection (up, forward, units) and body layout on a small humanoid turned to every axis
combination, plus the real clips when present."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from retarget import Motion, Skeleton, analyze_body, detect_convention, read_bvh, quat
from retarget.convention import Convention, guess_units

# A 1.75 m humanoid in canonical axes (+Y up, faces +Z, left = +X), metres; T-pose. Joint heights follow
# the usual stature fractions (hip 0.53, shoulder 0.82, head 0.94; recalled from memory, as tabulated
# in anthropometry handbooks) - only their order matters here.
H = 1.75
JOINTS = [
    ("Hips", None, (0, 0.53, 0)), ("Spine", "Hips", (0, 0.62, 0)), ("Chest", "Spine", (0, 0.74, 0)),
    ("Neck", "Chest", (0, 0.84, 0)), ("Head", "Neck", (0, 0.90, 0)),
    ("LeftShoulder", "Chest", (0.03, 0.80, 0)), ("LeftArm", "LeftShoulder", (0.11, 0.82, 0)),
    ("LeftForeArm", "LeftArm", (0.30, 0.82, 0)), ("LeftHand", "LeftForeArm", (0.44, 0.82, 0)),
    ("RightShoulder", "Chest", (-0.03, 0.80, 0)), ("RightArm", "RightShoulder", (-0.11, 0.82, 0)),
    ("RightForeArm", "RightArm", (-0.30, 0.82, 0)), ("RightHand", "RightForeArm", (-0.44, 0.82, 0)),
    ("LeftUpLeg", "Hips", (0.05, 0.50, 0)), ("LeftLeg", "LeftUpLeg", (0.05, 0.28, 0)),
    ("LeftFoot", "LeftLeg", (0.05, 0.04, 0)), ("LeftToe", "LeftFoot", (0.05, 0.0, 0.10)),
    ("RightUpLeg", "Hips", (-0.05, 0.50, 0)), ("RightLeg", "RightUpLeg", (-0.05, 0.28, 0)),
    ("RightFoot", "RightLeg", (-0.05, 0.04, 0)), ("RightToe", "RightFoot", (-0.05, 0.0, 0.10)),
]


def humanoid(up="+Y", forward="+Z", metres_per_unit=1.0, opaque=False) -> Skeleton:
    names = [n for n, _, _ in JOINTS]
    parents = [-1 if p is None else names.index(p) for _, p, _ in JOINTS]
    pos = np.array([p for _, _, p in JOINTS]) * H / metres_per_unit
    # Canonical -> file axes: canonical (left, up, forward) become the file's (left, up, forward).
    conv = Convention(up, forward, metres_per_unit)
    pos = pos @ conv.file_to_canonical()
    offsets = pos - np.vstack([np.zeros(3), pos[parents[1:]]])
    if opaque:
        names = [f"j{i:02d}" for i in range(len(names))]
    return Skeleton(tuple(names), np.array(parents), offsets)


AXES = ["+X", "-X", "+Y", "-Y", "+Z", "-Z"]
COMBOS = [(u, f) for u, f in itertools.product(AXES, AXES) if u[1] != f[1]]


@pytest.mark.parametrize("up,forward", COMBOS)
def test_detects_every_axis_combination(up, forward):
    """24 proper axis frames: up from feet to head, forward from left/right names."""
    c = detect_convention(humanoid(up, forward))
    assert (c.up, c.forward, c.forward_evidence) == (up, forward, "names")
    assert c.up_confidence > 0.99


@pytest.mark.parametrize("up,forward", [("+Y", "+Z"), ("+Z", "-Y"), ("-Z", "+X")])
def test_opaque_names_use_the_toes(up, forward):
    c = detect_convention(humanoid(up, forward, opaque=True))
    assert (c.up, c.forward, c.forward_evidence) == (up, forward, "geometry")


@pytest.mark.parametrize("mpu,unit", [(1.0, "m"), (0.01, "cm"), (0.0254, "in"), (0.056444, "unknown")])
def test_units_from_height(mpu, unit):
    """Metres, centimetres and inches are named; a unit that fits none of them (CMU's ASF unit, 1/0.45
    inch, per the real clips' notes) is called unknown rather than guessed."""
    c = detect_convention(humanoid(metres_per_unit=mpu))
    assert c.units == unit
    if unit != "unknown":
        assert c.metres_per_unit == pytest.approx(mpu)


def test_guess_units_refuses_ambiguous_heights():
    assert guess_units(1.75) == ("m", 1.0)
    assert guess_units(175) == ("cm", 0.01)
    assert guess_units(25.6)[0] == "unknown"  # fits no unit
    assert guess_units(101.0) == ("unknown", None)  # 1.01 m in cm or 2.57 m in inches: both plausible


def test_overrides_win_and_canonical_matrix_is_a_rotation():
    c = detect_convention(humanoid("+Z", "-Y")).with_overrides(up="y", forward="-x", metres_per_unit=0.01)
    assert (c.up, c.forward, c.metres_per_unit) == ("+Y", "-X", 0.01)
    m = c.file_to_canonical()
    np.testing.assert_allclose(m @ m.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(m) == pytest.approx(1.0)


def test_degenerate_rest_pose_reads_the_animated_frame():
    """All offsets along +X (as some exporters write) with the real orientation in the rotations: the
    layout is read from an animated frame instead of the zero pose."""
    sk = humanoid()
    rest_rot, rest_pos = sk.rest_global
    lengths = np.linalg.norm(sk.offsets, axis=1)
    line = sk.with_rest(offsets=np.stack([lengths, np.zeros_like(lengths), np.zeros_like(lengths)], 1))
    # Local rotations that bend each +X bone onto its true direction: global = between(+X, true bone).
    n = sk.num_joints
    glob = quat.identity((n,))
    for j in range(1, n):
        glob[j] = quat.between_vectors(np.array([1.0, 0, 0]), rest_pos[j] - rest_pos[sk.parents[j]])
    # Joint j's local rotation takes its parent's frame to the frame its children's +X offsets need.
    kids_rot = quat.identity((n,))
    for j in range(n):
        kids = sk.children[j]
        if kids:
            kids_rot[j] = glob[kids[0]]
    local = quat.identity((n,))
    for j in range(n):
        p = sk.parents[j]
        local[j] = kids_rot[j] if p < 0 else quat.multiply(quat.conjugate(kids_rot[p]), kids_rot[j])
    motion = Motion(line, np.repeat(local[None], 4, 0), np.repeat(line.offsets[:1], 4, 0), 30)
    body = analyze_body(line, motion)
    assert body.reference.startswith("frame")
    c = detect_convention(line, motion, body)
    assert (c.up, c.forward) == ("+Y", "+Z")


def test_layout_of_the_humanoid():
    sk = humanoid()
    b = analyze_body(sk)
    n = sk.names
    assert n[b.pelvis] == "Hips" and n[b.chest] == "Chest" and n[b.head] == "Head"
    assert [n[j] for j in (b.legs["left"].root, b.legs["left"].mid, b.legs["left"].end, b.legs["left"].toe)] == \
        ["LeftUpLeg", "LeftLeg", "LeftFoot", "LeftToe"]
    assert [n[j] for j in (b.arms["right"].root, b.arms["right"].mid, b.arms["right"].end)] == \
        ["RightArm", "RightForeArm", "RightHand"]


def test_real_clips_conventions(real_clips):
    """Facts from the real clips' notes: every file is +Y up and, at rest or in its first reading
    frame, faces about +Z or +X; the CMU ASF-unit files are unknown, the others centimetres."""
    for path in real_clips:
        m = read_bvh(path)
        c = detect_convention(m.skeleton, m)
        assert c.up == "+Y", path.name
        if "_cmu31" in path.name:
            assert c.units == "unknown", path.name
        else:
            assert c.units == "cm", path.name
