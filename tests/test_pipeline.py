"""One clip end to end through files, the API and `retarget apply`, on same-body ground truth, the demo
rigs and the real recorded clips (skipped when absent). Files are read back with our reader, which is
checked against bvhio elsewhere (tests/test_bvh.py)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from retarget import Result, RetargetReport, quat, retarget_clip
from retarget.align import positions_to_canonical
from retarget.chains import analyze_body
from retarget.cli import main
from retarget.convention import detect_convention
from retarget.errors import OptionError
from retarget.io import read_bvh, write_bvh
from retarget.motion import Motion

from bodies import (DROPPED, build_rig, capture_spec, character_spec, render, segment_angles, summary,
                    truth_pairs, walk)

REPO = Path(__file__).resolve().parents[1]
DEMO_RIGS = sorted((REPO / "demo_clips" / "rigs").glob("*.bvh"))


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """A capture-style walk and a character rig written as BVH files, with the truth rendering."""
    d = tmp_path_factory.mktemp("pipe")
    a, b = build_rig(capture_spec()), build_rig(character_spec())
    local, root = walk(90, twist_only=DROPPED)
    clip, rig = d / "walk.bvh", d / "hero.bvh"
    write_bvh(clip, render(a, local, root))
    write_bvh(rig, Motion.rest(b.skeleton))
    names = [(a.skeleton.names[s], b.skeleton.names[t]) for s, t in truth_pairs(a, b)]
    return dict(a=a, b=b, clip=clip, rig=rig, names=names, truth=render(b, local, root), dir=d)


def test_files_in_rig_layout_out(files):
    """Through files: the output keeps the rig's names, offsets and channel layout, and every segment
    meets the targets against the truth (values pass through 6-decimal BVH text). The contact fix is off:
    it deliberately moves legs away from the plain transfer, and is tested on its own below."""
    res = retarget_clip(files["clip"], files["rig"], files["names"], contact_fix=False)
    assert isinstance(res, Result) and isinstance(res.report, RetargetReport)
    rig = read_bvh(files["rig"]).skeleton
    out = res.motion
    assert out.skeleton.names == rig.names and out.skeleton.channels == rig.channels
    assert np.allclose(out.skeleton.offsets, rig.offsets)
    mean, worst = summary(segment_angles(out, files["b"], files["truth"], files["b"]))
    assert mean <= 0.5 and worst <= 3.0
    rep = res.report
    assert rep.pairs == len(files["names"]) and rep.frames == 90
    assert set(rep.unmapped_target) == {"upperarm_twist_l", "upperarm_twist_r", "lowerarm_twist_l",
                                        "lowerarm_twist_r"}
    assert rep.source.up == "+Z" and rep.target.forward == "+X" and rep.source.reference_pose == "rest"
    assert rep.direction_error_max_deg < 1e-3
    assert rep.contact_fix.startswith("not applied") and rep.contacts is not None and not rep.contacts.fixed
    json.loads(rep.model_dump_json())


def test_options(files):
    """Frame range, output frame rate, in place and convention overrides reach the result; unknown or
    invalid options are OptionErrors naming the option."""
    res = retarget_clip(files["clip"], files["rig"], files["names"], frames=(10, 70), fps=60.0, in_place=True,
                        contact_fix=False)
    assert res.report.source_frames == (10, 70) and res.report.fps == 60.0
    # 60 source frames span 59 source frame times; at 60 fps that is floor(59 * 60 / source fps) + 1
    # frames (the file's Frame Time is printed to 8 decimals, so the source rate is not exactly 30).
    assert res.motion.num_frames == int(np.floor(59 * 60.0 / res.report.source_fps + 1e-9)) + 1
    assert res.report.in_place
    assert res.report.contact_fix == "not applied: switched off (measured only)"
    flipped = retarget_clip(files["clip"], files["rig"], files["names"], rig_forward="-X")
    assert flipped.report.target.forward == "-X"
    with pytest.raises(OptionError, match="speed"):
        retarget_clip(files["clip"], files["rig"], files["names"], speed=2)
    with pytest.raises(OptionError, match="fps"):
        retarget_clip(files["clip"], files["rig"], files["names"], fps=-1)


def test_cli_apply_writes_the_same_clip_and_a_report(files):
    """`retarget apply` writes the API's result (to 6 decimals) and a JSON report, prints a short summary
    with the foot-contact figures, and exits 0."""
    out, rep = files["dir"] / "out.bvh", files["dir"] / "out.json"
    api = retarget_clip(files["clip"], files["rig"])
    r = CliRunner().invoke(main, ["apply", str(files["clip"]), "--rig", str(files["rig"]), "-o", str(out),
                                  "--report", str(rep)])
    assert r.exit_code == 0, r.output
    assert "wrote" in r.output and "foot contacts: applied" in r.output and "cm/s ->" in r.output
    back = read_bvh(out)
    assert quat.angle_between(back.rotations, api.motion.rotations).max() < 1e-5
    assert json.loads(rep.read_text())["pairs"] == api.report.pairs


def test_cli_refusals_leave_no_file(files):
    """Bad input: one line on stderr, exit 2, no traceback, no output file."""
    out = files["dir"] / "never.bvh"
    runner = CliRunner()
    for args in (["--frames", "9:3"], ["--frames", "x"], ["--rig-up", "W"], ["-m", str(files["dir"] / "no.yaml")]):
        r = runner.invoke(main, ["apply", str(files["clip"]), "--rig", str(files["rig"]), "-o", str(out), *args])
        assert r.exit_code == 2, (args, r.output)
        assert r.output.startswith("error: ") and r.output.count("\n") == 1 and "Traceback" not in r.output
        assert not out.exists()
    r = runner.invoke(main, ["apply", str(files["clip"]), "--rig", str(files["dir"] / "missing.bvh"), "-o", str(out)])
    assert r.exit_code == 2 and "not found" in r.output and not out.exists()


def _plausible(motion: Motion) -> tuple[float, float]:
    """Share of frames with both ankles below the pelvis, and with the head above it (canonical up)."""
    body = analyze_body(motion.skeleton, motion)
    conv = detect_convention(motion.skeleton, motion, body)
    _, p = motion.global_transforms()
    p = positions_to_canonical(p, conv)
    pelvis = p[:, body.pelvis, 1]
    feet = np.maximum(p[:, body.legs["left"].end, 1], p[:, body.legs["right"].end, 1])
    return float(np.mean(feet < pelvis)), float(np.mean(p[:, body.head, 1] > pelvis))


@pytest.mark.skipif(not DEMO_RIGS, reason="demo rigs absent")
@pytest.mark.parametrize("rig", DEMO_RIGS, ids=lambda p: p.stem)
def test_demo_takes_onto_demo_rigs(rig):
    """Every demo capture take onto each demo rig, matched automatically: no NaN, spans follow the
    source (the issue's targets), feet stay below the pelvis and the head above it."""
    for clip in sorted((REPO / "demo_clips" / "capture").glob("*.bvh")):
        res = retarget_clip(clip, rig, contact_fix=False)
        assert np.isfinite(res.motion.rotations).all() and np.isfinite(res.motion.root_positions).all()
        assert res.report.direction_error_mean_deg <= 0.5 and res.report.direction_error_max_deg <= 3.0
        assert min(_plausible(res.motion)) > 0.99, clip.name


def test_demo_take_onto_a_degenerate_rig(real_clips):
    """A real clip's skeleton whose zero pose is a line (every joint with position channels, the hips
    moving under a static root) used as the rig: the rig's bone frames come from one of its frames, the
    hips carry the path in their own position channels, the pose is upright."""
    rig = next((c for c in real_clips if c.name == "walk_bn.bvh"), None)
    if rig is None:
        pytest.skip("walk_bn.bvh absent")
    res = retarget_clip(REPO / "demo_clips" / "capture" / "walk.bvh", rig, contact_fix=False)
    assert res.report.target.reference_pose.startswith("frame ")
    assert res.motion.translations is not None and np.ptp(res.motion.root_positions, axis=0).max() == 0.0
    assert min(_plausible(res.motion)) > 0.99


@pytest.mark.skipif(not DEMO_RIGS, reason="demo rigs absent")
def test_real_clips_onto_demo_rigs(real_clips):
    """Every real recorded clip (three skeleton conventions, degenerate rest poses, zero-length bones,
    unknown units) onto both demo rigs: no error, no NaN, feet below the pelvis and head above it on
    at least 95 percent of frames (kicks, dances and jumps have a few frames of raised feet or
    crouches)."""
    for clip in real_clips:
        source = read_bvh(clip)
        for rig in DEMO_RIGS:
            res = retarget_clip(source, rig, contact_fix=False)
            assert np.isfinite(res.motion.rotations).all() and np.isfinite(res.motion.root_positions).all()
            feet, head = _plausible(res.motion)
            assert feet > 0.95 and head > 0.95, (clip.name, rig.name, feet, head)


def test_mapping_file_and_given_pairs(files):
    """A saved mapping file (the matcher's YAML) drives `apply -m` to the same clip as the automatic
    match; given name pairs come back as a Mapping with confidence 1."""
    from retarget.mapping import Mapping, save_mapping

    auto = retarget_clip(files["clip"], files["rig"], contact_fix=False)
    path = files["dir"] / "map.yaml"
    save_mapping(auto.mapping, path)
    out = files["dir"] / "mapped.bvh"
    r = CliRunner().invoke(main, ["apply", str(files["clip"]), "--rig", str(files["rig"]), "-m", str(path),
                                  "-o", str(out), "--no-contact-fix"])
    assert r.exit_code == 0, r.output
    assert "foot contacts: not applied: switched off" in r.output
    assert quat.angle_between(read_bvh(out).rotations, auto.motion.rotations).max() < 1e-5
    given = retarget_clip(files["clip"], files["rig"], files["names"])
    assert isinstance(given.mapping, Mapping) and all(p.confidence == 1.0 for p in given.mapping.pairs)


GLTF_TWINS = [(p, p.with_suffix(".glb")) for p in DEMO_RIGS if p.with_suffix(".glb").exists()]


@pytest.mark.parametrize("bvh,glb", GLTF_TWINS, ids=lambda p: p.name)
def test_gltf_rig_gives_the_bvh_twins_motion(bvh, glb):
    """A demo character as a glTF rig (bone-aligned joint frames, so rest rotations are not the
    identity) and as a BVH rig (identity rest rotations): the same world motion, within 0.01 mm (the
    BVH's 6 decimals of metres)."""
    clip = REPO / "demo_clips" / "capture" / "walk.bvh"
    outs = []
    for rig in (bvh, glb):
        m = retarget_clip(clip, rig, contact_fix=False).motion
        _, p = m.global_transforms()
        outs.append((m.skeleton.names, positions_to_canonical(p, detect_convention(m.skeleton))))
    (na, pa), (nb, pb) = outs
    assert set(na) == set(nb)
    assert np.abs(pa - pb[:, [nb.index(n) for n in na]]).max() < 1e-5
