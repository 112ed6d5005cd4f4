"""The preview page and plots: the data embedded in the page matches the motion, the page is
self-contained and stays small, a headless browser draws two moving skeletons, the plots are written.

The embedded data are decoded here with our own reading of the documented layout (base64, little-endian
int32 anchor + int16 offsets times the step), not with the page's JavaScript, and compared with forward
kinematics (itself checked against bvhio in test_bvh.py) put into canonical space by hand from the
axes documented in SOURCES.md of the real clips or chosen in the test.
"""

from __future__ import annotations

import base64
import json
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from retarget import quat
from retarget.convention import Convention
from retarget.errors import OptionError
from retarget.io import read_bvh
from retarget.motion import Motion
from retarget.preview import (build_preview, contact_run_pairs, foot_slide, plot_clip, prepare_side,
                              segment_angles, write_preview)
from retarget.skeleton import Skeleton

DATA = Path(__file__).parent / "data"


# ----- helpers ---------------------------------------------------------------------------------------

def embedded(page: str) -> dict:
    """The JSON data of a page, with each side's positions decoded to (F, P, 3) metres."""
    m = re.search(r'<script id="retarget-data" type="application/json">(.*?)</script>', page, re.S)
    assert m, "no data element in the page"
    data = json.loads(m.group(1))
    for s in data["sides"]:
        root = np.frombuffer(base64.b64decode(s["root"]), dtype="<i4").reshape(s["frames"], 3)
        rel = np.frombuffer(base64.b64decode(s["points"]), dtype="<i2").reshape(s["frames"], -1, 3)
        s["decoded"] = np.asarray(s["origin"]) + (root[:, None, :] + rel.astype(np.int64)) * s["step"]
    return data


def humanoid(frames: int = 120, fps: float = 30.0, scale: float = 1.0, speed: float = 1.2) -> Motion:
    """An invented figure in centimetres, +Y up, facing +Z (left is +X), walking forward: legs swing
    about X, knees bend, arms counter-swing. Joint names follow H-Anim-like anatomical words."""
    names, parents, offsets, tips = [], [], [], []

    def add(name, parent, off, tip=None):
        names.append(name)
        parents.append(names.index(parent) if parent else -1)
        offsets.append(np.asarray(off, float) * scale)
        tips.append(np.full(3, np.nan) if tip is None else np.asarray(tip, float) * scale)

    add("pelvis", None, [0, 95, 0])
    add("spine", "pelvis", [0, 12, 0])
    add("chest", "spine", [0, 22, 0])
    add("neck", "chest", [0, 18, 0])
    add("head", "neck", [0, 10, 0], [0, 20, 0])
    for side, sx in (("left", 1), ("right", -1)):
        add(f"{side}_clavicle", "chest", [sx * 4, 14, 0])
        add(f"{side}_upper_arm", f"{side}_clavicle", [sx * 14, 0, 0])
        add(f"{side}_forearm", f"{side}_upper_arm", [sx * 28, 0, 0])
        add(f"{side}_hand", f"{side}_forearm", [sx * 25, 0, 0], [sx * 17, 0, 0])
    for side, sx in (("left", 1), ("right", -1)):
        add(f"{side}_thigh", "pelvis", [sx * 9, -5, 0])
        add(f"{side}_shin", f"{side}_thigh", [0, -43, 0])
        add(f"{side}_foot", f"{side}_shin", [0, -42, 0])
        add(f"{side}_toes", f"{side}_foot", [0, -5, 13], [0, 0, 7])
    skel = Skeleton(tuple(names), np.array(parents), np.array(offsets), tips=np.array(tips))
    t = np.arange(frames) / fps
    phase = 2 * np.pi * 0.9 * t
    rot = np.tile(quat.identity(()), (frames, len(names), 1))
    x = np.array([1.0, 0.0, 0.0])
    z = np.array([0.0, 0.0, 1.0])
    for side, sgn in (("left", 1), ("right", -1)):
        rot[:, names.index(f"{side}_thigh")] = quat.from_axis_angle(x, -0.45 * sgn * np.sin(phase))
        rot[:, names.index(f"{side}_shin")] = quat.from_axis_angle(x, 0.5 * (1 + sgn * np.cos(phase)))
        rot[:, names.index(f"{side}_upper_arm")] = quat.multiply(
            quat.from_axis_angle(z, np.full(frames, -sgn * 1.2)), quat.from_axis_angle(x, 0.3 * sgn * np.sin(phase)))
    rot[:, names.index("spine")] = quat.from_axis_angle(np.array([0.0, 1.0, 0.0]), 0.12 * np.sin(phase))
    root = np.stack([3 * np.sin(phase / 2), 95 * scale + 2 * np.cos(2 * phase), 100 * speed * t], axis=1)
    return Motion(skel, rot, root, fps, source="invented_walk.bvh")


# ----- embedded data ---------------------------------------------------------------------------------

def test_embedded_data_match_the_motion_on_a_real_clip(real_clips):
    # walk_a_cmu43: +Y up, faces +Z, centimetres (SOURCES.md), so canonical = file * 0.01.
    path = next(p for p in real_clips if p.name == "walk_a_cmu43.bvh")
    motion = read_bvh(path)
    target = read_bvh(next(p for p in real_clips if p.name == "walk_bn.bvh"))
    data = embedded(build_preview(motion, target))
    s = data["sides"][0]
    grot, gpos = motion.global_transforms()
    sk = motion.skeleton
    assert s["frames"] == motion.num_frames == 317
    assert s["joints"] == list(sk.names) and len(s["joints"]) == 43
    tip_of = [j for j in range(43) if not np.isnan(sk.tips[j]).any() and np.linalg.norm(sk.tips[j]) > 0]
    assert s["tip_of"] == tip_of
    assert s["parents"] == list(sk.parents) + tip_of
    tips = gpos[:, tip_of] + quat.rotate(grot[:, tip_of], sk.tips[tip_of][None])
    expected = np.concatenate([gpos, tips], axis=1) * 0.01
    # Rounding the anchor and each offset to whole steps: at most half a step per axis, plus float noise.
    assert s["step"] == pytest.approx(0.001)
    assert np.abs(s["decoded"] - expected).max() <= 0.5 * s["step"] + 1e-9
    assert s["fps"] == pytest.approx(1 / 0.00833333)  # the header Frame Time
    # Feet: the ankle (rFoot/lFoot, no toe joint) and its end site.
    assert [s["joints"][q] if q < 43 else "tip" for q in s["feet"]["left"]] == ["lFoot", "tip"]
    # The retargeted side: 22 joints, its own frame count; the static placement root is no bone.
    t = data["sides"][1]
    assert t["frames"] == 273 and len(t["joints"]) == 22
    assert t["joints"][t["anchor"]] == "Hips"
    assert t["joints"].index("Hips") in t["loose"]


def test_axes_and_units_follow_the_given_convention():
    motion = read_bvh(DATA / "mixed.bvh")
    conv = Convention(up="+Z", forward="-X", metres_per_unit=0.01)
    data = embedded(build_preview(motion, motion, source_convention=conv))
    _, gpos = motion.global_transforms()
    p = gpos * 0.01
    # Worked by hand: up +Z -> canonical Y; forward -X -> canonical Z; left = up x forward = -Y -> X.
    expected = np.stack([-p[..., 1], p[..., 2], -p[..., 0]], axis=-1)
    got = data["sides"][0]["decoded"][:, : motion.skeleton.num_joints]
    assert np.abs(got - expected).max() <= 0.0005 + 1e-9
    # The target side had no convention given and no body to detect one from: file axes, as metres (so
    # the figure spans over 32.7 "metres" and the step grows past 1 mm).
    t = data["sides"][1]
    assert t["step"] > 0.001
    assert np.abs(t["decoded"][:, : motion.skeleton.num_joints] - gpos).max() <= 0.5 * t["step"] + 1e-9


def test_far_points_coarsen_the_step_but_still_decode():
    # A 50 m offset does not fit int16 millimetres; the step grows so it does, error stays half a step.
    skel = Skeleton(("a", "b", "c"), np.array([-1, 0, 1]), np.array([[0, 0, 0], [0, 50, 0], [1, 0, 0.0]]))
    rot = Rotation.from_euler("y", np.linspace(0, 90, 5)[:, None], degrees=True).as_quat()
    motion = Motion(skel, np.repeat(rot[:, None], 3, axis=1), np.zeros((5, 3)), 30)
    conv = Convention(metres_per_unit=1.0)
    s = embedded(build_preview(motion, motion, source_convention=conv, target_convention=conv))["sides"][0]
    assert s["step"] > 0.001
    _, gpos = motion.global_transforms()
    assert np.abs(s["decoded"] - gpos).max() <= 0.5 * s["step"] + 1e-9


def test_contacts_are_embedded_as_runs_and_resolve_to_both_feet():
    src = humanoid(90)
    tgt = humanoid(90, scale=1.2)
    left = (np.arange(90) // 15) % 2 == 0
    right = ~left
    right[:3] = False
    data = embedded(build_preview(src, tgt, contacts={"left": left, "right_foot": right}))
    by_key = {c["key"]: c for c in data["contacts"]}
    for key, flags in (("left", left), ("right_foot", right)):
        rebuilt = np.zeros(90, bool)
        for a, b in by_key[key]["runs"]:
            rebuilt[a:b] = True
        assert np.array_equal(rebuilt, flags)
    assert by_key["left"]["source"] == by_key["left"]["target"] == "left"
    # A joint name resolves to the side of the leg that holds it, on both skeletons.
    assert by_key["right_foot"]["source"] == by_key["right_foot"]["target"] == "right"
    names = data["sides"][0]["joints"]
    assert {names[q] for q in data["sides"][0]["feet"]["left"] if q < len(names)} == {"left_foot", "left_toes"}
    assert set(data["contact_numbers"]["left"]) == {"frames in contact", "source ankle travel while planted (cm)",
                                                        "result ankle travel while planted (cm)"}


def test_contact_flags_of_the_wrong_length_are_refused():
    src = humanoid(30)
    with pytest.raises(OptionError, match="'left'.*\\(29,\\).*\\(30,\\)"):
        build_preview(src, src, contacts={"left": np.zeros(29, bool)})


def test_numbers_title_and_self_containment():
    src = humanoid(20)
    nasty = 'walk </script><img src="http://example.invalid/x.png">'
    page = build_preview(src, src, numbers={"pose fidelity": {"mean (deg)": np.float64(3.25), "worst": np.nan},
                                            "note": nasty}, title=nasty)
    data = embedded(page)
    assert data["numbers"] == {"pose fidelity": {"mean (deg)": 3.25, "worst": None}, "note": nasty}
    assert data["title"] == nasty
    assert "<img" not in page and page.count("</script>") == 2  # escaped in the title and in the data
    # Nothing is fetched: no URL, no external script, style sheet, font or image.
    plain = build_preview(src, src, title="invented walk")
    for needle in ("http:", "https:", "src=", "<link", "@import", "url(", "@font-face", "fetch(", "xmlhttp"):
        assert needle not in plain.lower(), needle


def test_ten_thousand_frames_of_sixty_joints_stay_under_15_mb(tmp_path):
    rng = np.random.default_rng(7)
    j, f = 60, 10_000
    parents = np.array([-1] + [int(rng.integers(max(0, i - 4), i)) for i in range(1, j)])
    offsets = rng.normal(0, 0.1, (j, 3))
    tips = np.full((j, 3), np.nan)
    leaves = sorted(set(range(j)) - set(parents))
    tips[leaves] = rng.normal(0, 0.1, (len(leaves), 3))  # every leaf has an end site, as in BVH files
    skel = Skeleton(tuple(f"j{i:02d}" for i in range(j)), parents, offsets, tips=tips)
    t = np.arange(f) / 60.0
    axes = rng.normal(size=(j, 3))
    axes /= np.linalg.norm(axes, axis=1, keepdims=True)
    ang = 0.6 * np.sin(t[:, None] * rng.uniform(1, 3, j) + rng.uniform(0, 6, j))
    rot = quat.from_axis_angle(axes[None], ang)
    root = np.stack([np.sin(t), np.full(f, 1.0), 1.3 * t], axis=1)
    motion = Motion(skel, rot, root, 60.0)
    conv = Convention(metres_per_unit=1.0)
    out = write_preview(tmp_path / "long.html", motion, motion, source_convention=conv, target_convention=conv,
                        contacts={"left": (np.arange(f) // 37) % 2 == 0})
    size = out.stat().st_size
    assert size < 15_000_000, f"{size / 1e6:.1f} MB"
    s = embedded(out.read_text())["sides"][1]
    _, gpos = motion.global_transforms()
    assert s["decoded"].shape == (f, j + len(leaves), 3)
    assert np.abs(s["decoded"][:, :j] - gpos).max() <= 0.5 * s["step"] + 1e-9


def test_ground_is_estimated_when_the_clip_floats_far_from_zero():
    m = humanoid(60)
    lifted = m.replace(root_positions=m.root_positions + np.array([0.0, 107.0, 0.0]))
    low, high = prepare_side(m, Convention(metres_per_unit=0.01)), prepare_side(lifted, Convention(metres_per_unit=0.01))
    assert low.ground == 0.0  # the invented figure's soles stay within 5 cm of zero height
    # Lowest point per frame, 5th percentile, computed here independently.
    grot, gpos = lifted.global_transforms()
    sk = lifted.skeleton
    has = ~np.isnan(sk.tips).any(axis=1)
    tips = gpos[:, has] + quat.rotate(grot[:, has], sk.tips[has][None])
    lowest = np.concatenate([gpos, tips], axis=1)[..., 1].min(axis=1)
    assert high.ground == pytest.approx(np.percentile(lowest, 5) * 0.01, abs=1e-9)


def test_bad_input_names_the_place_and_leaves_no_file(tmp_path):
    from retarget.errors import RetargetError

    m = humanoid(10)
    rot = np.array(m.rotations)
    rot[4, m.skeleton.index("left_shin")] = np.nan
    with pytest.raises(RetargetError, match="frame 4, joint 'left_shin'"):
        build_preview(m.replace(rotations=rot), m)
    with pytest.raises(RetargetError, match="output folder does not exist"):
        write_preview(tmp_path / "nowhere" / "page.html", m, m)
    assert not (tmp_path / "nowhere").exists()


def test_contact_and_pair_adapters():
    from types import SimpleNamespace

    from retarget.preview import contact_flags, mapping_pairs

    flags = np.array([[True, False], [False, True], [True, True]])
    got = contact_flags(SimpleNamespace(flags=flags, feet=("left", "right")))
    assert list(got) == ["left", "right"] and np.array_equal(got["right"], [False, True, True])
    with pytest.raises(OptionError):
        contact_flags(SimpleNamespace(flags=flags, feet=("left",)))
    pairs = [SimpleNamespace(source="hip", target="pelvis"), {"source": "lFoot", "target": "foot_l"}]
    assert mapping_pairs(SimpleNamespace(pairs=pairs)) == [("hip", "pelvis"), ("lFoot", "foot_l")]
    assert mapping_pairs(None) is None


# ----- measures --------------------------------------------------------------------------------------

def test_contact_run_pairs_and_foot_slide_by_hand():
    assert contact_run_pairs(np.array([0, 0, 1, 1, 0, 1], bool)) == [[2, 4], [5, 6]]
    assert contact_run_pairs(np.ones(3, bool)) == [[0, 3]]
    assert contact_run_pairs(np.zeros(3, bool)) == []
    # Steps of 3-4-5 triangles: 5 cm each; only steps with contact on both frames count; height ignored.
    p = np.array([[0, 0, 0], [0.03, 0.5, 0.04], [0.06, 0, 0.08], [0.09, 0, 0.12], [0.12, 0, 0.16]])
    c = np.array([True, True, False, True, True])
    assert foot_slide(p, c) == pytest.approx([0, 0.05, 0.05, 0.05, 0.10])


def test_segment_angles_measure_a_known_bend():
    # Target = source with the second joint bent 30 degrees about an axis across the bone (scipy builds it).
    skel = Skeleton(("a", "b", "c", "d"), np.array([-1, 0, 1, 2]),
                    np.array([[0, 1, 0], [0, 0.4, 0], [0, 0.4, 0], [0, 0.2, 0.0]]))
    f = 10
    rot = np.tile(quat.identity(()), (f, 4, 1))
    src = Motion(skel, rot, np.tile([0, 1.0, 0], (f, 1)), 30)
    bent = rot.copy()
    bent[:, 1] = Rotation.from_rotvec([np.radians(30), 0, 0]).as_quat()
    tgt = src.replace(rotations=bent)
    conv = Convention(metres_per_unit=1.0)
    ang = segment_angles(src, tgt, [("a", "a"), ("b", "b"), ("c", "c"), ("d", "d")],
                         source_convention=conv, target_convention=conv)
    assert set(ang) == {"a", "b", "c"}  # d is a leaf with no mapped joint below
    assert np.allclose(ang["a"], 0.0, atol=1e-6)
    assert np.allclose(ang["b"], 30.0) and np.allclose(ang["c"], 30.0)


# ----- plots -----------------------------------------------------------------------------------------

def test_plots_are_written(tmp_path):
    pytest.importorskip("matplotlib")
    src = humanoid(90)
    tgt = humanoid(90, scale=1.15)
    before = humanoid(90, scale=1.15, speed=1.4)  # its feet slide more than the target's
    flags = (np.arange(90) // 15) % 2 == 0
    pairs = [(n, n) for n in src.skeleton.names]
    written = plot_clip(tmp_path / "plots", src, tgt, before=before, contacts={"left": flags, "right": ~flags},
                        pairs=pairs, stem="walk", title="invented walk")
    assert [p.name for p in written] == ["walk_feet.png", "walk_slide.png", "walk_fidelity.png"]
    for p in written:
        head = p.read_bytes()[:8]
        assert head == b"\x89PNG\r\n\x1a\n" and p.stat().st_size > 15_000, p


# ----- the page in a browser -------------------------------------------------------------------------

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
LEFT_RGB = np.array([0xF2, 0xA9, 0x3B]) / 255  # the page's left-side and right-side bone colours
RIGHT_RGB = np.array([0x3C, 0xC4, 0xCC]) / 255


def _screenshot(page: Path, hash_: str, out: Path, tmp: Path) -> np.ndarray:
    import matplotlib.image as mpimg

    profile = tmp / f"profile-{out.stem}"
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
           "--no-first-run", "--disable-component-update", "--disable-sync", f"--user-data-dir={profile}",
           f"--screenshot={out}", "--window-size=1200,600", "--hide-scrollbars", "--virtual-time-budget=1500",
           page.as_uri() + "#" + hash_]
    subprocess.run(cmd, capture_output=True, timeout=90, check=False)
    assert out.exists(), "chromium wrote no screenshot"
    return mpimg.imread(out)[..., :3]


@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium is not installed (Debian: apt-get install chromium)")
def test_browser_draws_two_moving_skeletons(tmp_path):
    pytest.importorskip("matplotlib")
    src = humanoid(60)
    tgt = humanoid(60, scale=1.2)
    flags = (np.arange(60) // 10) % 2 == 0
    page = write_preview(tmp_path / "page.html", src, tgt, contacts={"left": flags, "right": ~flags},
                         numbers={"pose fidelity (deg)": 2.5}, title="invented walk")
    a = _screenshot(page, "frame=0&play=0&panel=0", tmp_path / "a.png", tmp_path)
    b = _screenshot(page, "frame=20&play=0&panel=0", tmp_path / "b.png", tmp_path)
    assert a.shape == b.shape and a.shape[1] == 1200
    # The stage sits between the title bar and the control bar; keep well inside it.
    rows = slice(60, a.shape[0] - 70)
    w = a.shape[1]
    for name, cols in (("source (left half)", slice(0, w // 2 - 2)), ("retargeted (right half)", slice(w // 2 + 2, w))):
        pa, pb = a[rows, cols], b[rows, cols]
        for colour, what in ((LEFT_RGB, "left-side bones"), (RIGHT_RGB, "right-side bones")):
            near = (np.abs(pa - colour).max(axis=-1) < 0.08).sum()
            assert near > 40, f"{name}: only {near} pixels of the {what} colour"
        changed = (np.abs(pa - pb).max(axis=-1) > 0.1).sum()
        assert changed > 300, f"{name}: only {changed} pixels change between frames 0 and 20"


# ----- command line ----------------------------------------------------------------------------------

def test_preview_command_lists_its_options():
    from click.testing import CliRunner

    from retarget.cli import main

    r = CliRunner().invoke(main, ["preview", "--help"])
    assert r.exit_code == 0, r.output
    for opt in ("--rig", "--mapping", "--output", "--plots"):
        assert opt in r.output


def test_preview_command_end_to_end(real_clips, tmp_path):
    pytest.importorskip("retarget.pipeline", reason="retarget.pipeline (transfer) is not in this checkout yet")
    from click.testing import CliRunner

    from retarget.cli import main

    clip = next(p for p in real_clips if p.name == "walk_bn.bvh")
    rig = next(p for p in real_clips if p.name == "walk_a_cmu43.bvh")  # its zero pose is a T-pose
    out = tmp_path / "walk.html"
    r = CliRunner().invoke(main, ["preview", str(clip), "--rig", str(rig), "-o", str(out),
                                  "--plots", str(tmp_path / "plots")])
    assert r.exit_code == 0, r.output
    data = embedded(out.read_text())
    assert data["sides"][0]["frames"] == data["sides"][1]["frames"] == 273
    assert len(data["sides"][1]["joints"]) == 43
    assert (tmp_path / "plots" / "walk_bn_feet.png").stat().st_size > 15_000
    bad = CliRunner().invoke(main, ["preview", str(tmp_path / "missing.bvh"), "--rig", str(rig), "-o", str(out)])
    assert bad.exit_code == 2 and "Traceback" not in bad.output
