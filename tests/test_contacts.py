"""Foot contacts: two-bone IK, detection against the demo takes' planned stance, locking, metrics.

Outside references: the law of cosines (two-bone IK, a hand-worked 3-4-5 triangle); the demo takes'
ground-truth contact flags (the generator's planned stance phases, demo_clips/README.md); the demo box
height (30 cm, same README); the height-weighted foot skate v * (2 - 2^(h/H)) of Zhang, Starke, Komura
and Saito (2018), worked by hand; the real clips' documented frame rates (../shared/real_clips/SOURCES.md).
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from retarget import quat
from retarget.chains import Limb, analyze_body
from retarget.contacts import (ContactReport, ContactSettings, FootContacts, carry_contacts, contact_runs,
                               contacts_from_flags, detect_contacts, fix_contacts, measure_contacts,
                               two_bone_ik)
from retarget.convention import Convention, detect_convention
from retarget.errors import OptionError, RetargetError, SkeletonError
from retarget.io import read_bvh
from retarget.motion import Motion
from retarget.skeleton import Skeleton

REPO = Path(__file__).resolve().parents[1]
CAPTURE = REPO / "demo_clips" / "capture"
TAKES = ["walk", "walk_curve", "jog", "turn", "jump", "crouch_pick", "box_step", "idle"]
FEET = ("left", "right")


# ----- helpers -----------------------------------------------------------------------------------------

@lru_cache(maxsize=None)
def demo_take(name: str):
    """(motion, legs, convention, ground-truth flags (F, 2) in FEET order) of a demo capture take."""
    path = CAPTURE / f"{name}.bvh"
    if not path.exists():
        pytest.skip(f"demo take {path} is absent")
    motion = read_bvh(path)
    truth = np.loadtxt(CAPTURE / f"{name}.contacts.csv", delimiter=",", skiprows=1, dtype=int)
    assert truth.shape == (motion.num_frames, 3) and np.array_equal(truth[:, 0], np.arange(motion.num_frames))
    body = analyze_body(motion.skeleton, motion)
    return motion, body.legs, detect_convention(motion.skeleton, motion, body), truth[:, 1:].astype(bool)


def ordered(contacts: FootContacts) -> np.ndarray:
    return contacts.flags[:, [contacts.feet.index(f) for f in FEET]]


def f1_score(found: np.ndarray, truth: np.ndarray) -> float:
    tp = np.sum(found & truth)
    return 2.0 * tp / (2.0 * tp + np.sum(found & ~truth) + np.sum(~found & truth))


def knee_angles(motion, legs) -> np.ndarray:
    """(F, K) flexion of each knee in degrees: angle between thigh (hip->knee) and shin (knee->ankle)."""
    _, pos = motion.global_transforms()
    out = []
    for name in FEET:
        leg = legs[name]
        u, v = pos[:, leg.mid] - pos[:, leg.root], pos[:, leg.end] - pos[:, leg.mid]
        out.append(np.degrees(np.arctan2(np.linalg.norm(np.cross(u, v), axis=-1), np.sum(u * v, axis=-1))))
    return np.stack(out, axis=1)


def scaled(motion: Motion, legs_by: float = 1.0, root_by: float = 1.0) -> Motion:
    """A retargeting-like change: every bone scaled (other proportions), the root path scaled."""
    sk = motion.skeleton
    return motion.replace(skeleton=sk.with_rest(offsets=sk.offsets * legs_by, tips=sk.tips * legs_by),
                          root_positions=motion.root_positions * root_by,
                          translations=None if motion.translations is None else motion.translations * legs_by)


# ----- two-bone IK ---------------------------------------------------------------------------------------

def test_ik_hand_worked_three_four_five():
    """Thigh 3, shin 4, target 5 away: the law of cosines gives a right angle at the knee
    (9 + 16 - 25 = 0) and cos = (9 + 25 - 16) / 30 = 0.6 at the hip, so the knee lands at
    3 * (0.6 along the leg, 0.8 towards the pole) = (0, -1.8, 2.4) with the pole forward (+Z)."""
    hip = np.zeros(3)
    knee = np.array([0.0, -3.0, 0.0])
    bend = np.radians(10.0)  # shin swung back: the knee points forward
    ankle = knee + 4.0 * np.array([0.0, -np.cos(bend), -np.sin(bend)])
    target = np.array([0.0, -5.0, 0.0])
    sol = two_bone_ik(hip, knee, ankle, target)
    np.testing.assert_allclose(sol.knee, [0.0, -1.8, 2.4], atol=1e-12)
    np.testing.assert_allclose(sol.ankle, target, atol=1e-12)
    # The turns are rotations that carry the old bones onto the new ones.
    np.testing.assert_allclose(hip + quat.rotate(sol.hip_turn, knee - hip), sol.knee, atol=1e-12)
    moved_shin = quat.rotate(sol.hip_turn, quat.rotate(sol.knee_turn, ankle - knee))
    np.testing.assert_allclose(sol.knee + moved_shin, sol.ankle, atol=1e-12)
    inner = np.degrees(np.arccos(np.dot(hip - sol.knee, sol.ankle - sol.knee) / 12.0))
    assert inner == pytest.approx(90.0, abs=1e-9)


def test_ik_target_at_ankle_changes_nothing():
    rng = np.random.default_rng(3)
    hip = rng.normal(size=(50, 3))
    knee = hip + rng.normal(size=(50, 3))
    ankle = knee + rng.normal(size=(50, 3))
    sol = two_bone_ik(hip, knee, ankle, ankle.copy())
    assert np.all(quat.angle_between(sol.hip_turn, quat.identity((50,))) < 1e-6)
    assert np.all(quat.angle_between(sol.knee_turn, quat.identity((50,))) < 1e-6)
    np.testing.assert_allclose(sol.knee, knee, atol=1e-9)


@settings(max_examples=60, deadline=None)
@given(a=st.floats(0.2, 1.0), b=st.floats(0.2, 1.0), flex=st.floats(0.05, 2.5), reach=st.floats(0.0, 1.0),
       yaw=st.floats(-3.0, 3.0), pitch=st.floats(-1.2, 1.2))
def test_ik_law_of_cosines_property(a, b, flex, reach, yaw, pitch):
    """Any reachable target is met exactly; bone lengths stay; the knee's interior angle obeys
    c^2 = a^2 + b^2 - 2ab cos(angle); the knee stays on the side it bent to."""
    hip = np.array([0.1, 1.0, -0.2])
    knee = hip + a * np.array([0.0, -1.0, 0.0])
    ankle = knee + b * np.array([0.0, -np.cos(flex), -np.sin(flex)])
    lo, hi = abs(a - b) * 1.001 + 1e-6, (a + b) * 0.999
    c = lo + reach * (hi - lo)
    d = np.array([np.cos(pitch) * np.sin(yaw), -np.cos(pitch) * np.cos(yaw), np.sin(pitch)])
    target = hip + c * d
    sol = two_bone_ik(hip, knee, ankle, target)
    np.testing.assert_allclose(sol.ankle, target, atol=1e-9)
    assert np.linalg.norm(sol.knee - hip) == pytest.approx(a, abs=1e-9)
    assert np.linalg.norm(sol.ankle - sol.knee) == pytest.approx(b, abs=1e-9)
    cos_inner = np.dot(hip - sol.knee, sol.ankle - sol.knee) / (a * b)
    assert c * c == pytest.approx(a * a + b * b - 2 * a * b * cos_inner, abs=1e-9)


def test_ik_out_of_reach_points_at_target_and_respects_max_reach():
    hip, knee, ankle = np.zeros(3), np.array([0.0, -0.5, 0.05]), np.array([0.0, -1.0, 0.0])
    target = np.array([0.3, -2.0, 0.0])
    full = two_bone_ik(hip, knee, ankle, target)
    capped = two_bone_ik(hip, knee, ankle, target, max_reach=0.9)
    a, b = np.linalg.norm(knee - hip), np.linalg.norm(ankle - knee)
    direction = target / np.linalg.norm(target)
    np.testing.assert_allclose(full.ankle, direction * (a + b), atol=1e-6)
    np.testing.assert_allclose(capped.ankle, direction * 0.9, atol=1e-9)


def test_ik_straight_leg_bends_towards_bend_axis():
    """A straight leg has no bend plane of its own: bend_axis (direction of thigh x shin for a normal
    bend) decides it. With +X as that axis and the leg along -Y, the knee must come forward (+Z)."""
    hip, knee, ankle = np.zeros(3), np.array([0.0, -0.5, 0.0]), np.array([0.0, -1.0, 0.0])
    sol = two_bone_ik(hip, knee, ankle, np.array([0.0, -0.8, 0.0]), bend_axis=np.array([1.0, 0.0, 0.0]))
    assert sol.knee[2] > 0.1
    normal = np.cross(sol.knee - hip, sol.ankle - sol.knee)
    assert normal[0] > 0
    np.testing.assert_allclose(sol.ankle, [0.0, -0.8, 0.0], atol=1e-9)


# ----- metrics on a hand-built figure -------------------------------------------------------------------

def sliding_figure(height: float, speed: float, frames: int = 20, fps: float = 30.0):
    """Two straight legs (0.45 m thigh, 0.45 m shin) whose toe tips sit ``height`` above y = 0, the
    whole figure sliding along +X at ``speed`` m/s; Y up, +Z forward, metres."""
    names = ("root", "hip_l", "knee_l", "ankle_l", "hip_r", "knee_r", "ankle_r")
    parents = [-1, 0, 1, 2, 0, 4, 5]
    offsets = np.array([[0, 0, 0], [0.1, 0, 0], [0, -0.45, 0], [0, -0.45, 0],
                        [-0.1, 0, 0], [0, -0.45, 0], [0, -0.45, 0]], dtype=float)
    tips = np.full((7, 3), np.nan)
    tips[[3, 6]] = [0.0, -0.08, 0.15]  # toe tip 8 cm under and 15 cm ahead of the ankle
    sk = Skeleton(names, parents, offsets, tips=tips)
    t = np.arange(frames) / fps
    root = np.stack([speed * t, np.full(frames, 0.98 + height), np.zeros(frames)], axis=1)
    motion = Motion(sk, quat.identity((frames, 7)), root, fps)
    legs = {"left": Limb("left", (1, 2, 3), 1, 2, 3), "right": Limb("right", (4, 5, 6), 4, 5, 6)}
    return motion, legs, Convention(up="+Y", forward="+Z", metres_per_unit=1.0)


@pytest.mark.parametrize("height", [0.01, -0.004, 0.03])
def test_skate_penetration_and_weighted_skate_by_hand(height):
    """Slide 0.5 m/s at 30 fps = 1/60 m per frame. Weighted skate (Zhang et al. 2018, H = 2.5 cm):
    at h = 1 cm, 2 - 2^(0.4) = 0.68049 (2^0.4 = 1.31951), so 0.34025 m/s; under the support (h < 0,
    counted as 0) the weight is 1 and the depth is penetration; at h = 3 cm >= H the weight is 0."""
    motion, legs, conv = sliding_figure(height, 0.5)
    f = motion.num_frames
    contacts = FootContacts(FEET, np.ones((f, 2), bool), np.zeros((f, 2)), motion.fps, [0.9, 0.9], 0.0)
    m = measure_contacts(motion, legs, contacts, conv)
    np.testing.assert_allclose(m.skate[1:], 0.5 / 30.0, rtol=1e-12)
    assert np.all(np.isnan(m.skate[0]))
    expected = {0.01: 0.5 * (2.0 - 1.3195079107728942), -0.004: 0.5, 0.03: 0.0}[height]
    np.testing.assert_allclose(m.weighted_skate[1:], expected, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(m.penetration, max(0.0, -height), atol=1e-12)
    summary = m.summary()
    assert summary["skate_cm_s"] == pytest.approx(50.0)
    assert summary["skate_leg_per_frame"] == pytest.approx((0.5 / 30.0) / 0.9)


def test_bad_settings_and_frame_counts_are_refused():
    motion, legs, conv = sliding_figure(0.0, 0.0)
    contacts = detect_contacts(motion, legs, conv)
    with pytest.raises(OptionError, match="height_exit"):
        fix_contacts(motion, legs, contacts, conv, {"height_enter": 0.1, "height_exit": 0.05})
    with pytest.raises(OptionError, match="blend"):
        detect_contacts(motion, legs, conv, {"blend": -1.0})
    with pytest.raises(RetargetError, match="cover 20 frames but the clip has 10"):
        fix_contacts(motion.slice(0, 10), legs, contacts, conv)
    with pytest.raises(SkeletonError, match="foot 'left' has no leg"):
        measure_contacts(motion, {"right": legs["right"]}, contacts, conv)


def test_standing_still_is_one_contact_per_foot_and_fix_changes_nothing_visible():
    """A figure standing still: each foot is planted throughout, nothing slides, the fix keeps the pose
    (IK with the target at the ankle is the identity)."""
    motion, legs, conv = sliding_figure(0.0, 0.0, frames=40)
    contacts = detect_contacts(motion, legs, conv)
    assert contacts.flags.all() and contacts.segments("left") == [(0, 40)]
    np.testing.assert_allclose(contacts.support, 0.0, atol=1e-12)
    fixed, report = fix_contacts(motion, legs, contacts, conv)
    _, before = motion.global_transforms()
    _, after = fixed.global_transforms()
    # The legs here are perfectly straight; IK keeps reach a hair (1e-9 of the leg) short of full
    # extension, which bends the knee by about 1e-5 m: 0.1 mm is the tolerance.
    np.testing.assert_allclose(after, before, atol=1e-4)
    assert report.overall.skate_after_leg_per_frame == pytest.approx(0.0, abs=1e-12)


# ----- detection on the demo takes ------------------------------------------------------------------------

@pytest.mark.parametrize("take", TAKES)
def test_detection_f1_on_demo_takes(take):
    """Per-frame F1 against the generator's planned stance phases: target 0.95 (the issue's figure)."""
    motion, legs, conv, truth = demo_take(take)
    found = ordered(detect_contacts(motion, legs, conv))
    assert f1_score(found, truth) >= 0.95, f"{take}: F1 {f1_score(found, truth):.3f}"


def test_detection_ignores_floor_height_units_and_axes():
    """Raising the whole take 0.37 m and rewriting it in metres gives the same flags: heights are read
    over each contact's own support, and lengths in leg lengths."""
    motion, legs, conv, truth = demo_take("walk")
    base = ordered(detect_contacts(motion, legs, conv))
    up = conv.up_vector
    raised = motion.replace(root_positions=motion.root_positions + 37.0 * up)
    assert np.array_equal(ordered(detect_contacts(raised, legs, conv)), base)
    sk = motion.skeleton
    metres = motion.replace(skeleton=sk.with_rest(offsets=sk.offsets / 100, tips=sk.tips / 100),
                            root_positions=motion.root_positions / 100)
    conv_m = conv.with_overrides(metres_per_unit=1.0)
    assert np.array_equal(ordered(detect_contacts(metres, legs, conv_m)), base)


def test_detection_is_robust_to_capture_noise():
    """White jitter of 2 mm (standard deviation) on the root each frame at 120 fps - more than the
    demo's own, about the real CMU clips' level - keeps F1 above 0.9 on the walk."""
    motion, legs, conv, truth = demo_take("walk")
    rng = np.random.default_rng(11)
    noisy = motion.replace(root_positions=motion.root_positions + rng.normal(0.0, 0.2, motion.root_positions.shape))
    assert f1_score(ordered(detect_contacts(noisy, legs, conv)), truth) >= 0.9


def test_box_step_finds_two_support_levels_30_cm_apart():
    """demo_clips/README.md: a 30 cm box. Supports are measured per contact, not as one floor."""
    motion, legs, conv, _ = demo_take("box_step")
    contacts = detect_contacts(motion, legs, conv)
    levels = np.array([contacts.support[s, k] for k in range(2) for s, _ in contacts.segments(k)])
    floor, box = levels[levels < levels.min() + 0.1], levels[levels > levels.min() + 0.1]
    assert len(floor) == 4 and len(box) == 2
    assert np.ptp(floor) < 0.005 and np.ptp(box) < 0.005
    assert box.mean() - floor.mean() == pytest.approx(0.30, abs=0.01)


def test_jump_flight_has_no_contact():
    motion, legs, conv, truth = demo_take("jump")
    found = ordered(detect_contacts(motion, legs, conv))
    flight = ~truth.any(axis=1)
    assert flight.sum() > 40 and not found[flight].any()


def test_contacts_from_flags_measures_supports():
    motion, legs, conv, truth = demo_take("walk")
    c = contacts_from_flags(motion, legs, conv, truth, FEET)
    assert np.array_equal(c.flags, truth)
    assert np.all(np.isfinite(c.support[truth])) and np.all(np.isnan(c.support[~truth]))
    with pytest.raises(RetargetError, match="expected"):
        contacts_from_flags(motion, legs, conv, truth[:-1], FEET)


# ----- fixing ------------------------------------------------------------------------------------------

PERTURBATIONS = [(1.0, 0.8), (1.0, 1.2), (1.2, 1.0), (0.8, 1.0)]


@pytest.mark.parametrize("take", TAKES)
def test_fix_on_perturbed_takes_meets_targets(take):
    """The capture take with proportions that no longer fit its root path (root path x0.8 or x1.2, or
    every bone x1.2 or x0.8), fixed with contacts detected on the original take; measured on the
    ground-truth contacts: skate <= 1 per mille of leg length per frame, penetration <= 1 mm under the
    ground-truth supports carried to the target, no knee jump over 10 degrees a frame that the input
    does not have, frames further than the blend window from any contact bit for bit unchanged, and the
    foot's global orientation kept wherever the leg was changed."""
    motion, legs, conv, truth = demo_take(take)
    detected = detect_contacts(motion, legs, conv)
    truth_contacts = contacts_from_flags(motion, legs, conv, truth, FEET)
    blend = ContactSettings().frames(ContactSettings().blend, motion.fps, 0)
    for legs_by, root_by in PERTURBATIONS:
        target = scaled(motion, legs_by, root_by)
        fixed, report = fix_contacts(target, legs, detected, conv)
        assert isinstance(report, ContactReport) and report.fixed
        truth_t = carry_contacts(truth_contacts, target, legs, conv)
        after = measure_contacts(fixed, legs, truth_t, conv).summary()
        label = f"{take} bones x{legs_by} root x{root_by}"
        assert after["skate_leg_per_frame"] <= 1e-3, label
        assert after["penetration_max_cm"] <= 0.1, label

        k_in, k_out = np.diff(knee_angles(target, legs), axis=0), np.diff(knee_angles(fixed, legs), axis=0)
        assert not np.any((np.abs(k_out) > 10.0) & (np.abs(k_in) <= 10.0)), label

        near = np.zeros(motion.num_frames, bool)
        for k in range(2):
            for s, e in zip(*contact_runs(detected.flags[:, k])):
                near[max(0, s - blend):e + blend] = True
        assert np.array_equal(fixed.rotations[~near], target.rotations[~near]), label
        assert np.array_equal(fixed.root_positions[~near], target.root_positions[~near]), label

        grot_in, _ = target.global_transforms()
        grot_out, _ = fixed.global_transforms()
        for name in FEET:
            end = legs[name].end
            assert np.all(quat.angle_between(grot_in[:, end], grot_out[:, end]) < 1e-9), label


def test_fix_report_numbers_match_metrics():
    motion, legs, conv, _ = demo_take("walk")
    contacts = detect_contacts(motion, legs, conv)
    target = scaled(motion, 1.0, 1.2)
    fixed, report = fix_contacts(target, legs, contacts, conv)
    carried = carry_contacts(contacts, target, legs, conv)
    before = measure_contacts(target, legs, carried, conv).summary()
    after = measure_contacts(fixed, legs, carried, conv).summary()
    assert report.overall.skate_before_cm_s == pytest.approx(before["skate_cm_s"], rel=1e-9)
    assert report.overall.skate_after_cm_s == pytest.approx(after["skate_cm_s"], rel=1e-9, abs=1e-9)
    assert report.overall.contact_frames == int(contacts.flags.sum())
    assert report.overall.skate_before_cm_s > 10 * report.overall.skate_after_cm_s
    assert report.skate_height_cm == 2.5
    assert report.root_lowered_max_cm > 0  # the root path x1.2 lifts the hips: legs must be helped
    assert ContactReport.model_validate_json(report.model_dump_json()) == report


def test_carry_relevels_supports_by_leg_ratio():
    """The box (30 cm on the source) is 36 cm for a figure scaled x1.2: levels scale with leg length."""
    motion, legs, conv, _ = demo_take("box_step")
    contacts = detect_contacts(motion, legs, conv)
    carried = carry_contacts(contacts, scaled(motion, 1.2, 1.2), legs, conv)
    src = np.array([contacts.support[s, 0] for s, _ in contacts.segments(0)])
    dst = np.array([carried.support[s, 0] for s, _ in carried.segments(0)])
    np.testing.assert_allclose(dst - dst[0], 1.2 * (src - src[0]), atol=1e-9)
    assert dst[1] - dst[0] == pytest.approx(0.36, abs=0.012)


# ----- real clips ---------------------------------------------------------------------------------------

# SOURCES.md: the _cmu31 files say 30 fps in their header but were captured at 120.
TRUE_FPS = {"jump_a_cmu31.bvh": 120.0, "jump_b_cmu31.bvh": 120.0}
WALKING_OR_STANDING = ("walk_a_cmu43", "walk_veer_cmu43", "steps_uneven_cmu43", "crouch_jump_cmu43",
                       "walk_bn", "walk_turn_left_bn", "kick_bn", "jump_a_cmu31", "jump_b_cmu31")


def test_real_clips_fix_without_failure_and_cut_skate(real_clips):
    """Every real clip goes through detection and fixing (in place, and with bones x0.8 as a retarget
    would change them); on walking and standing clips the skate after is at most 20 % of before."""
    for path in real_clips:
        motion = read_bvh(path, fps=TRUE_FPS.get(path.name))
        body = analyze_body(motion.skeleton, motion)
        conv = detect_convention(motion.skeleton, motion, body)
        contacts = detect_contacts(motion, body.legs, conv)
        for target in (motion, scaled(motion, 0.8, 1.0)):
            fixed, report = fix_contacts(target, body.legs, contacts, conv)
            assert np.all(np.isfinite(fixed.rotations)) and np.all(np.isfinite(fixed.root_positions)), path.name
            if path.stem in WALKING_OR_STANDING:
                o = report.overall
                assert o.contact_frames > 0.2 * motion.num_frames, path.name
                assert o.skate_after_leg_per_frame <= 0.2 * o.skate_before_leg_per_frame, path.name


def test_real_jump_top_is_not_a_contact(real_clips):
    """At the top of a jump every point is slow for a moment; the hips fall like a thrown body there, so
    no contact may sit more than 10 cm over the clip's lowest support."""
    paths = [p for p in real_clips if p.name in TRUE_FPS]
    if not paths:
        pytest.skip("no jump clips")
    for path in paths:
        motion = read_bvh(path, fps=TRUE_FPS[path.name])
        body = analyze_body(motion.skeleton, motion)
        conv = detect_convention(motion.skeleton, motion, body)
        contacts = detect_contacts(motion, body.legs, conv)
        assert np.nanmax(contacts.support) - contacts.ground < 0.10, path.name


def test_plant_feet_fixes_or_only_measures():
    """The one-call contact step: with fix=False the clip comes back untouched and the report says so."""
    from retarget.contacts import plant_feet

    motion, legs, conv, _ = demo_take("walk")
    target = scaled(motion, 1.0, 0.8)
    same, report, contacts = plant_feet(motion, legs, conv, target, legs, conv, fix=False)
    assert same is target and not report.fixed and report.overall.skate_after_cm_s is None
    assert report.overall.skate_before_cm_s > 5.0
    fixed, report2, _ = plant_feet(motion, legs, conv, target, legs, conv)
    assert report2.fixed and report2.overall.skate_after_cm_s < 0.01 * report2.overall.skate_before_cm_s
    assert report2.overall.skate_before_cm_s == pytest.approx(report.overall.skate_before_cm_s)


# ----- the filters (numpy versions of scipy's) ----------------------------------------------------------

def test_savitzky_golay_matches_scipy_savgol_filter():
    """The contact step's Savitzky-Golay smoothing and slope equal scipy.signal.savgol_filter with
    mode='interp' (the outside reference: same least-squares windows, same polynomial fit at the ends),
    for short and long signals and every window the step uses; 1e-10 of the signal's size is rounding."""
    from scipy.signal import savgol_filter

    from retarget.contacts import _savgol

    rng = np.random.default_rng(2)
    for n in (3, 4, 7, 50, 600):
        for w in (3, 5, 9, 13, 31):
            if w > n:
                continue
            p = np.cumsum(rng.normal(size=(n, 2, 3)), axis=0) * 10.0
            for deriv in (0, 1):
                ref = savgol_filter(p, w, min(2, w - 1), deriv=deriv, axis=0, mode="interp")
                np.testing.assert_allclose(_savgol(p, w, deriv), ref, atol=1e-10 * np.abs(p).max())


def test_envelope_matches_scipy_running_maximum_then_mean():
    """The root-drop envelope equals scipy.ndimage's maximum_filter1d then uniform_filter1d (edges
    repeating the end values), kept at or above the need."""
    from scipy.ndimage import maximum_filter1d, uniform_filter1d

    from retarget.contacts import _envelope

    rng = np.random.default_rng(6)
    for n in (1, 2, 9, 200):
        for radius in (1, 2, 5):
            need = np.maximum(0.0, rng.normal(size=n))
            size = 2 * radius + 1
            ref = np.maximum(uniform_filter1d(maximum_filter1d(need, size=size, mode="nearest"), size=size,
                                              mode="nearest"), need)
            np.testing.assert_allclose(_envelope(need, radius), ref, atol=1e-12)
