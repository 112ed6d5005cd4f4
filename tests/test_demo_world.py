"""The demo world (demo_clips/): the generator checked against the facts it cites, and every file it wrote
read back by an independent reader.

References: Drillis & Contini segment lengths as fractions of height, as tabulated by Winter (the table is
copied here on its own, so a typo in the generator's copy fails); Perry's gait phases (stance about 60
percent of a walking cycle); running stance below half the cycle (running literature); bvhio as the
independent BVH reader. Values recalled from memory are marked in demo_clips/README.md.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

from retarget import quat
from retarget.io import read_bvh

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_clips"
CAPTURE = DEMO / "capture"
RIGS = DEMO / "rigs"

TAKES = ["walk", "walk_curve", "jog", "turn", "jump", "crouch_pick", "box_step", "idle"]
RIG_NAMES = ["brannoc_stocky", "quillon_lanky"]


def _load_generator():
    spec = importlib.util.spec_from_file_location("demo_generate", DEMO / "generate.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules["demo_generate"] = mod
    spec.loader.exec_module(mod)
    return mod


@pytest.fixture(scope="module")
def gen():
    return _load_generator()


@pytest.fixture(scope="module")
def takes():
    """Every take read with our reader, with its contact flags (F, 2) as ints."""
    out = {}
    for name in TAKES:
        m = read_bvh(CAPTURE / f"{name}.bvh")
        c = np.loadtxt(CAPTURE / f"{name}.contacts.csv", delimiter=",", skiprows=1, dtype=np.int64)
        out[name] = (m, c)
    return out


# ----- Winter's table (Drillis & Contini), an independent copy, and the documented characters --------

WINTER = {"ankle": 0.039, "knee": 0.285, "hip": 0.530, "shoulder": 0.818, "chin": 0.870, "top": 1.000,
          "upper_arm": 0.186, "forearm": 0.146, "hand": 0.108, "thigh": 0.245, "shank": 0.246,
          "foot": 0.152, "shoulder_width": 0.259}

# From demo_clips/README.md: standing height, deliberate deviations, file units and axes, rest arm angle.
CHARACTERS = {
    "capture": dict(height=1.78, leg=1.0, head=1.0, arm=1.0, width=1.0, metres_per_unit=0.01,
                    up=(0, 0, 1), forward=(0, -1, 0), left=(1, 0, 0), arm_down=0.0),
    "brannoc_stocky": dict(height=1.35, leg=0.8, head=1.5, arm=1.0, width=1.15, metres_per_unit=1.0,
                           up=(0, 1, 0), forward=(0, 0, 1), left=(1, 0, 0), arm_down=45.0),
    "quillon_lanky": dict(height=1.95, leg=1.0, head=1.0, arm=1.2, width=1.0, metres_per_unit=0.01,
                          up=(0, 1, 0), forward=(-1, 0, 0), left=(0, 0, 1), arm_down=0.0),
}

# Joint roles per skeleton: (hip, knee, ankle, toe, shoulder, elbow, wrist, hand tip joint, head) for the
# left side ({s} is the side marker), plus the right-side marker.
ROLES = {
    "capture": (("tm_{s}_femur", "tm_{s}_tibia", "tm_{s}_foot", "tm_{s}_toe", "tm_{s}_humerus",
                 "tm_{s}_forearm", "tm_{s}_hand", "tm_{s}_middle2", "tm_head"), ("L", "R")),
    "brannoc_stocky": (("hip_{s}", "knee_{s}", "ankle_{s}", "toe_{s}", "shoulder_{s}", "elbow_{s}",
                        "wrist_{s}", "wrist_{s}", "head"), ("l", "r")),
    "quillon_lanky": (("{s}LegUpper", "{s}LegLower", "{s}Foot", "{s}Toe", "{s}ArmUpper", "{s}ArmLower",
                       "{s}Hand", "{s}Fingers", "head"), ("lf", "rt")),
}

# Placement rules the generator documents as common practice (not from the table).
ANKLE_FROM_HEEL = 0.25


def _table_height(ch: dict) -> float:
    """The H the table is scaled by so the character stands ch['height'] tall after its deviations."""
    unit = (WINTER["ankle"] + ch["leg"] * (WINTER["thigh"] + WINTER["shank"])
            + (WINTER["shoulder"] - WINTER["hip"]) + (WINTER["chin"] - WINTER["shoulder"])
            + ch["head"] * (WINTER["top"] - WINTER["chin"]))
    return ch["height"] / unit


def _skeleton_file(key: str) -> Path:
    return CAPTURE / "walk.bvh" if key == "capture" else RIGS / f"{key}.bvh"


def _measure(key: str) -> dict[str, tuple[float, float]]:
    """(measured, expected) in metres for every table segment and landmark height, from the file."""
    ch = CHARACTERS[key]
    sk = read_bvh(_skeleton_file(key)).skeleton
    _, pos = sk.rest_global
    pos = pos * ch["metres_per_unit"]
    tips = sk.rest_tips * ch["metres_per_unit"]
    up, fwd = np.array(ch["up"], float), np.array(ch["forward"], float)
    H = _table_height(ch)
    names, sides = ROLES[key]
    out: dict[str, tuple[float, float]] = {}
    floor = 0.0  # the rest pose stands on the floor of the file's space
    for s in sides:
        hip, knee, ankle, toe, sho, elb, wri, hand_end, head = (sk.index(n.format(s=s)) for n in names)
        hand_tip = tips[hand_end]
        leg, arm = ch["leg"], ch["arm"]
        out[f"thigh_{s}"] = (np.linalg.norm(pos[hip] - pos[knee]), WINTER["thigh"] * H * leg)
        out[f"shank_{s}"] = (np.linalg.norm(pos[knee] - pos[ankle]), WINTER["shank"] * H * leg)
        out[f"upper_arm_{s}"] = (np.linalg.norm(pos[sho] - pos[elb]), WINTER["upper_arm"] * H * arm)
        out[f"forearm_{s}"] = (np.linalg.norm(pos[elb] - pos[wri]), WINTER["forearm"] * H * arm)
        out[f"hand_{s}"] = (np.linalg.norm(pos[wri] - hand_tip), WINTER["hand"] * H * arm)
        out[f"foot_{s}"] = (float(np.dot(tips[toe] - pos[ankle], fwd)),
                            (1.0 - ANKLE_FROM_HEEL) * WINTER["foot"] * H)
        out[f"ankle_height_{s}"] = (float(np.dot(pos[ankle], up)) - floor, WINTER["ankle"] * H)
        knee_h = WINTER["ankle"] + leg * WINTER["shank"]
        hip_h = knee_h + leg * WINTER["thigh"]
        out[f"knee_height_{s}"] = (float(np.dot(pos[knee], up)), knee_h * H)
        out[f"hip_height_{s}"] = (float(np.dot(pos[hip], up)), hip_h * H)
        shoulder_h = hip_h + WINTER["shoulder"] - WINTER["hip"]
        out[f"shoulder_height_{s}"] = (float(np.dot(pos[sho], up)), shoulder_h * H)
    ls, rs = (sk.index(names[4].format(s=s)) for s in sides)
    out["shoulder_width"] = (np.linalg.norm(pos[ls] - pos[rs]), WINTER["shoulder_width"] * H * ch["width"])
    head = sk.index(names[8])
    chin_h = hip_h + WINTER["chin"] - WINTER["hip"]
    out["chin_height"] = (float(np.dot(pos[head], up)), chin_h * H)
    out["standing_height"] = (float(np.dot(tips[head], up)), ch["height"])
    return out


@pytest.mark.parametrize("key", list(CHARACTERS))
def test_segment_proportions_follow_winters_table(key):
    """Every table segment and landmark height of the generated skeleton (read back from its file) is
    within 2 percent of Drillis & Contini's fraction of height (Winter's table) times the character's
    documented H, with the documented deliberate deviations (stocky: legs x0.8, head x1.5, widths x1.15;
    lanky: arms x1.2). 2 percent is the issue's tolerance; the files hold 6 decimals, far below it."""
    for what, (got, want) in _measure(key).items():
        assert abs(got / want - 1.0) < 0.02, f"{key} {what}: {got:.4f} m, table says {want:.4f} m"


def test_characters_deviate_where_documented():
    """The stocky character has shorter legs and a bigger head than the table (as a share of its
    height), the lanky one longer arms; the performer is the table."""
    def share(key, part):
        m = _measure(key)
        return m[part][0] / m["standing_height"][0]

    assert share("brannoc_stocky", "hip_height_l") < 0.9 * share("capture", "hip_height_L")
    head = {k: 1.0 - share(k, "chin_height") for k in CHARACTERS}
    assert head["brannoc_stocky"] > 1.3 * head["capture"]
    assert share("quillon_lanky", "upper_arm_lf") > 1.15 * share("capture", "upper_arm_L")


@pytest.mark.parametrize("key", list(CHARACTERS))
def test_axes_units_and_rest_pose(key):
    """Each skeleton's space is as documented: the head is above the feet along its up axis, the toes
    ahead of the ankles along its forward axis, the left limbs on its left axis; the height in file units
    matches its unit; the upper arm points level (T-pose) or 45 degrees down (A-pose). 1 degree covers
    the 6-decimal files."""
    ch = CHARACTERS[key]
    sk = read_bvh(_skeleton_file(key)).skeleton
    _, pos = sk.rest_global
    up, fwd, left = (np.array(ch[k], float) for k in ("up", "forward", "left"))
    names, sides = ROLES[key]
    j = {n: sk.index(names[k].format(s=sides[0])) for k, n in enumerate(
        ("hip", "knee", "ankle", "toe", "shoulder", "elbow", "wrist", "hand", "head"))}
    jr = sk.index(names[0].format(s=sides[1]))
    assert np.dot(pos[j["head"]] - pos[j["ankle"]], up) > 0
    assert np.dot(pos[j["toe"]] - pos[j["ankle"]], fwd) > 0
    assert np.dot(pos[j["hip"]] - pos[jr], left) > 0
    height = np.dot(sk.rest_tips[j["head"]], up) * ch["metres_per_unit"]
    assert abs(height - ch["height"]) < 0.02 * ch["height"]
    arm = pos[j["elbow"]] - pos[j["shoulder"]]
    below = np.degrees(np.arcsin(-np.dot(arm, up) / np.linalg.norm(arm)))
    assert abs(below - ch["arm_down"]) < 1.0


def test_structures_differ_as_a_real_rig_does():
    """Capture: 4 spine joints, 3 two-joint fingers per hand, toes, clavicles, 30-40 joints. Stocky: 3
    spine joints, no fingers, forearm and thigh twist joints as leaves. Lanky: 5 spine joints, a tail."""
    cap = read_bvh(CAPTURE / "walk.bvh").skeleton
    assert 30 <= cap.num_joints <= 40
    assert sum(n.startswith("tm_spine") for n in cap.names) == 4
    for s in "LR":
        for finger in ("thumb", "index", "middle"):
            a, b = cap.index(f"tm_{s}_{finger}1"), cap.index(f"tm_{s}_{finger}2")
            assert cap.parents[b] == a and cap.names[cap.parents[a]] == f"tm_{s}_hand"
        assert f"tm_{s}_clavicle" in cap and f"tm_{s}_toe" in cap
    st = read_bvh(RIGS / "brannoc_stocky.bvh").skeleton
    assert sum(n.startswith("back_") for n in st.names) == 3
    for s in "lr":
        assert st.children[st.index(f"wrist_{s}")] == ()  # no fingers
        for roll, parent in ((f"forearm_roll_{s}", f"elbow_{s}"), (f"thigh_roll_{s}", f"hip_{s}")):
            assert st.children[st.index(roll)] == () and st.names[st.parents[st.index(roll)]] == parent
    la = read_bvh(RIGS / "quillon_lanky.bvh").skeleton
    assert sum(n.startswith("spine") for n in la.names) == 5
    tail = [la.index(f"tail{k}") for k in range(1, 6)]
    assert la.parents[tail[0]] == 0 and all(la.parents[b] == a for a, b in zip(tail, tail[1:]))
    assert len({cap.signature, st.signature, la.signature}) == 3


# ----- gait facts ------------------------------------------------------------------------------------

def _toe_track(m, side: str):
    """Toe joint horizontal speed (cm/s) and height above its rest height (cm) per frame: the capture is
    Z-up in centimetres."""
    sk = m.skeleton
    j = sk.index(f"tm_{side}_toe")
    p = m.global_transforms()[1][:, j]
    v = np.gradient(p, axis=0) * m.fps
    return np.linalg.norm(v[:, :2], axis=1), p[:, 2] - sk.rest_global[1][j, 2]


def _detected_stance(m, side: str, support_levels=(0.0,)) -> np.ndarray:
    """Stance found from the geometry alone: the toe moves under 15 cm/s and sits within 3 cm of a
    support level. Planted feet here move a few cm/s (jitter + slight slide), swinging ones metres per
    second; 15 cm/s and 3 cm sit well between the two."""
    speed, height = _toe_track(m, side)
    near = np.min(np.abs(height[:, None] - np.array(support_levels)[None]), axis=1) < 3.0
    return (speed < 15.0) & near


def test_walk_stance_share_is_perrys_sixty_percent(takes):
    """Perry: stance is about 60 percent of a walking gait cycle. Both the ground-truth flags and the
    stance detected from the toe's motion are within +-5 points of 60 percent for each foot (the take is
    four whole cycles)."""
    m, c = takes["walk"]
    for k, side in enumerate("LR"):
        assert abs(c[:, 1 + k].mean() - 0.60) <= 0.05
        assert abs(_detected_stance(m, side).mean() - 0.60) <= 0.05


def test_jog_stance_below_half_with_flight(takes):
    """Running: stance below half the cycle, so there are frames with both feet off the ground (flight),
    in the flags and in the geometry."""
    m, c = takes["jog"]
    for k, side in enumerate("LR"):
        assert c[:, 1 + k].mean() < 0.5
        assert _detected_stance(m, side).mean() < 0.5
    assert np.any((c[:, 1] == 0) & (c[:, 2] == 0))


@pytest.mark.parametrize("name", TAKES)
def test_contact_flags_agree_with_the_geometry(takes, name):
    """A flagged foot is planted: the toe's horizontal speed stays under 10 cm/s for 95 percent of its
    contact frames (the deliberate slide of about 1 cm per stance and sub-cm jitter give a few cm/s) and
    its height stays within 1 cm of the support level (floor, or the 30 cm box top in box_step). Unflagged
    frames in the stepping takes move much faster (median over 30 cm/s)."""
    m, c = takes[name]
    levels = (0.0, 30.0) if name == "box_step" else (0.0,)
    for k, side in enumerate("LR"):
        flag = c[:, 1 + k] == 1
        speed, height = _toe_track(m, side)
        assert flag.any()
        assert np.percentile(speed[flag], 95) < 10.0, side
        off = np.min(np.abs(height[flag, None] - np.array(levels)[None]), axis=1)
        assert off.max() < 1.0, side
        if (~flag).sum() > 5 and name not in ("jump",):
            assert np.median(speed[~flag]) > 30.0, side


def test_box_step_has_two_support_heights_and_jump_is_airborne(takes):
    """box_step: each foot has contacts on the floor and on the 30 cm box top. jump: a stretch with both
    flags 0 in which both toes really are off the ground (over 5 cm up at mid-flight)."""
    m, c = takes["box_step"]
    for k, side in enumerate("LR"):
        _, height = _toe_track(m, side)
        h = height[c[:, 1 + k] == 1]
        assert (np.abs(h) < 1.0).any() and (np.abs(h - 30.0) < 1.0).any()
    m, c = takes["jump"]
    air = np.flatnonzero((c[:, 1] == 0) & (c[:, 2] == 0))
    assert len(air) > 0.3 * m.fps  # about 0.47 s of flight
    mid = air[len(air) // 3: 2 * len(air) // 3]
    for side in "LR":
        assert _toe_track(m, side)[1][mid].min() > 5.0


def test_takes_hold_euler_order_hostile_frames(takes):
    """Real capture has poses near gimbal lock of a joint's channel order: here knees flex past 90
    degrees about X, the middle axis of the capture's ZXY joints, in several takes. Counted: frames where
    some joint's middle angle (its own channel order) is within 5 degrees of +-90."""
    hits = {}
    for name, (m, _) in takes.items():
        sk = m.skeleton
        n = 0
        for j in range(1, sk.num_joints):
            mid = quat.to_euler(m.rotations[:, j], sk.rotation_order(j), degrees=True)[:, 1]
            n += int(np.sum(np.abs(mid) > 85.0))
        hits[name] = n
    assert sum(v > 0 for v in hits.values()) >= 3, hits


def test_take_lengths_and_rates(takes):
    """A few seconds each at 60-120 fps; flags have one row per frame with header frame,left,right."""
    for name, (m, c) in takes.items():
        assert 60.0 - 1e-3 <= m.fps <= 120.0 + 1e-3
        assert 2.5 <= m.duration <= 7.0
        assert c.shape == (m.num_frames, 3) and np.array_equal(c[:, 0], np.arange(m.num_frames))
        assert set(np.unique(c[:, 1:])) <= {0, 1}
        header = (CAPTURE / f"{name}.contacts.csv").read_text().splitlines()[0]
        assert header == "frame,left,right"


# ----- files read back independently -----------------------------------------------------------------

def _all_files() -> list[Path]:
    return [CAPTURE / f"{t}.bvh" for t in TAKES] + [RIGS / f"{r}.bvh" for r in RIG_NAMES]


@pytest.mark.parametrize("path", _all_files(), ids=lambda p: p.stem)
def test_files_read_back_with_bvhio(path):
    """bvhio (independent reader) and our reader agree on joint names and order, frame count, frame
    time, offsets, and world positions on a few frames. bvhio stores float32: ~6e-8 relative, so on
    positions up to a few hundred units we allow 1e-2 units (0.1 mm on the centimetre files)."""
    import bvhio

    ours = read_bvh(path)
    theirs = bvhio.readAsBvh(str(path))
    layout = theirs.Root.layout()
    assert [j.Name for j, _, _ in layout] == list(ours.skeleton.names)
    assert theirs.FrameCount == ours.num_frames
    assert abs(theirs.FrameTime - 1.0 / ours.fps) < 1e-9
    offsets = np.array([[j.Offset.x, j.Offset.y, j.Offset.z] for j, _, _ in layout])
    np.testing.assert_allclose(offsets, ours.skeleton.offsets, atol=1e-4)

    root = bvhio.readAsHierarchy(str(path))
    frames = sorted({0, ours.num_frames // 3, ours.num_frames // 2, ours.num_frames - 1})
    pos = ours.global_transforms()[1]
    for f in frames:
        root.loadPose(f)
        ref = np.array([np.array(j.PositionWorld, dtype=float) for j, _, _ in root.layout()])
        np.testing.assert_allclose(pos[f], ref, atol=1e-2, err_msg=f"{path.name} frame {f}")


def test_rig_files_hold_the_rest_pose():
    """A rig file's zero pose is its rest pose: one frame, every rotation channel 0, the root at its
    OFFSET."""
    for r in RIG_NAMES:
        m = read_bvh(RIGS / f"{r}.bvh")
        assert m.num_frames == 1
        np.testing.assert_allclose(np.abs(m.rotations[..., 3]), 1.0, atol=1e-12)
        np.testing.assert_allclose(m.root_positions[0], m.skeleton.offsets[0], atol=1e-9)


# ----- the generator itself ---------------------------------------------------------------------------

def test_generator_is_deterministic_and_files_are_current(gen, tmp_path):
    """Regenerating every take and rig into a temporary folder gives the committed files byte for byte
    (seeded; also catches files that were not regenerated after a change)."""
    gen.generate(tmp_path)
    for f in sorted(DEMO.glob("capture/*")) + sorted(DEMO.glob("rigs/*")):
        new = tmp_path / f.relative_to(DEMO)
        assert new.read_bytes() == f.read_bytes(), f"{f.relative_to(REPO)} differs from a fresh run"
    assert {p.relative_to(tmp_path) for p in tmp_path.rglob("*.*")} == \
        {p.relative_to(DEMO) for p in DEMO.glob("*/*.*")}


def test_generator_table_matches_the_independent_copy(gen):
    """The generator's table equals this file's copy of Winter's fractions (two copies, one check)."""
    mapping = {"ankle": "ankle_height", "knee": "knee_height", "hip": "hip_height",
               "shoulder": "shoulder_height", "chin": "chin_height", "top": "head_top_height",
               "foot": "foot_length"}
    for k, v in WINTER.items():
        assert gen.WINTER_FRACTIONS[mapping.get(k, k)] == v
    # The table is self-consistent: thigh and shank are the differences of the landmark heights.
    assert abs((WINTER["hip"] - WINTER["knee"]) - WINTER["thigh"]) < 1e-9
    assert abs((WINTER["knee"] - WINTER["ankle"]) - WINTER["shank"]) < 1e-9


def test_two_bone_ik_reaches_and_keeps_lengths(gen):
    """The generator's leg IK: the end lands on reachable targets, both bone lengths are kept, and the
    middle joint bends towards the pole (positive component along it)."""
    rng = np.random.default_rng(3)
    n = 200
    root = rng.normal(size=(n, 3))
    target = root + rng.normal(size=(n, 3)) * 0.4
    pole = rng.normal(size=(n, 3))
    mid, end, hinge = gen.two_bone_ik(root, target, 0.45, 0.44, pole)
    reach = np.linalg.norm(target - root, axis=1) < 0.85
    np.testing.assert_allclose(end[reach], target[reach], atol=1e-9)
    np.testing.assert_allclose(np.linalg.norm(mid - root, axis=1), 0.45, atol=1e-9)
    np.testing.assert_allclose(np.linalg.norm(end - mid, axis=1), 0.44, atol=1e-9)
    u = (target - root) / np.linalg.norm(target - root, axis=1, keepdims=True)
    perp = pole - np.sum(pole * u, axis=1, keepdims=True) * u
    assert np.all(np.sum((mid - root) * perp, axis=1) > 0)
    np.testing.assert_allclose(np.sum(hinge * u, axis=1), 0.0, atol=1e-9)


def test_demo_folder_is_small():
    """The committed demo world stays under 8 MB."""
    total = sum(p.stat().st_size for p in DEMO.rglob("*") if p.is_file() and "__pycache__" not in p.parts)
    assert total < 8 * 1024 * 1024
