"""BVH reading and writing: bvhio as the independent reader, the format's documented rules, every kind of
bad input, and round trips."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from retarget import BVHError, quat
from retarget.io import parse_bvh, read_bvh, write_bvh
from retarget.io.bvh import format_bvh

DATA = Path(__file__).parent / "data"


def _bvhio_world_positions(path: Path, frames: int) -> dict[str, np.ndarray]:
    import bvhio

    root = bvhio.readAsHierarchy(str(path))
    out: dict[str, list] = {}
    for f in range(frames):
        root.loadPose(f)
        for joint, _, _ in root.layout():
            out.setdefault(joint.Name, []).append(np.array(joint.PositionWorld, dtype=float))
    return {k: np.array(v) for k, v in out.items()}


@pytest.mark.parametrize("name", ["mixed.bvh", "mixed_crlf.bvh"])
def test_world_positions_agree_with_bvhio(name):
    """Mixed rotation orders per joint, 6-channel joints, End Sites (one zero-length), tabs, CRLF,
    scientific notation: our FK equals bvhio's. bvhio keeps float32, whose relative precision (~6e-8)
    over a 2 m figure with a few chained rotations stays well under 1e-4 units; we allow 1e-3 cm."""
    motion = read_bvh(DATA / name)
    ref = _bvhio_world_positions(DATA / name, motion.num_frames)
    pos = motion.global_transforms()[1]
    for j, joint in enumerate(motion.skeleton.names):
        np.testing.assert_allclose(pos[:, j], ref[joint], atol=1e-3, err_msg=joint)


def test_position_channels_replace_the_offset():
    """'head' has OFFSET 0 30 0 and position channels (0, 30, 0), (1, 31, 2), ...: the channel values
    are the local translation, not added to the offset."""
    m = read_bvh(DATA / "mixed.bvh")
    j = m.skeleton.index("head")
    np.testing.assert_allclose(m.translations[:, j], [[0, 30, 0], [1, 31, 2], [2, 32, 4]])


def test_channel_order_is_kept_and_parsed_per_joint():
    m = read_bvh(DATA / "mixed.bvh")
    sk = m.skeleton
    assert sk.rotation_order(0) == "ZYX" and sk.rotation_order(sk.index("spine")) == "XYZ"
    assert sk.rotation_order(sk.index("arm_l")) == "YXZ"
    # Frame 1, spine: X=-15, Y=25, Z=40 in channel order X Y Z.
    expected = quat.from_euler([-15, 25, 40], "XYZ", degrees=True)
    assert quat.angle_between(m.rotations[1, sk.index("spine")], expected) < 1e-12
    # End sites: the hand's is zero-length, the foot's is not.
    np.testing.assert_allclose(sk.tips[sk.index("hand_l")], [0, 0, 0])
    np.testing.assert_allclose(sk.tips[sk.index("foot_l")], [0, -5, 14])
    assert np.isnan(sk.tips[sk.index("spine")]).all()


def test_frame_time_and_override():
    m = read_bvh(DATA / "mixed.bvh")
    # 'Frame Time: 0.0333333' is 30 fps printed to 7 digits: the reader snaps it to the whole rate.
    assert m.fps == 30.0
    assert read_bvh(DATA / "mixed.bvh", fps=120).fps == 120


def test_round_trip_reproduces_world_positions(tmp_path):
    """read -> write -> read: world positions within 1e-6 of the figure's height (6 written decimals)."""
    m = read_bvh(DATA / "mixed.bvh")
    out = write_bvh(tmp_path / "rt.bvh", m)
    back = read_bvh(out)
    assert back.skeleton.names == m.skeleton.names and back.skeleton.channels == m.skeleton.channels
    np.testing.assert_allclose(back.skeleton.offsets, m.skeleton.offsets)
    height = np.ptp(m.global_transforms()[1][..., 1])
    err = np.abs(back.global_transforms()[1] - m.global_transforms()[1]).max()
    assert err <= 1e-6 * height


def test_written_angles_continuous_through_spins(tmp_path):
    """A joint spinning through 720 degrees about its first and last axes while its middle angle sweeps a
    full turn (through gimbal lock at frame 90): written channels never jump by more than the motion
    allows, and the rotations survive."""
    m = read_bvh(DATA / "mixed.bvh")
    f = 361
    t = np.linspace(0, 1, f)[:, None]
    rot = np.repeat(m.rotations[:1], f, axis=0).copy()
    rot[:, 1] = quat.from_euler(np.concatenate([4 * np.pi * t, 2 * np.pi * t, -4 * np.pi * t], 1), "XYZ")
    spun = m.replace(rotations=rot, root_positions=np.repeat(m.root_positions[:1], f, 0),
                     translations=np.repeat(m.translations[:1], f, 0))
    back = read_bvh(write_bvh(tmp_path / "spin.bvh", spun))
    text = (tmp_path / "spin.bvh").read_text().split("Frame Time:")[1].splitlines()[1:]
    values = np.array([[float(v) for v in line.split()] for line in text])
    assert np.abs(np.diff(values, axis=0)).max() < 10.0  # true motion is <= 4 deg per frame per axis
    assert quat.angle_between(back.rotations[:, 1], rot[:, 1]).max() < 1e-6


def test_writer_output_is_never_partial(tmp_path):
    """A failing write leaves neither the destination nor a temporary file behind."""
    m = read_bvh(DATA / "mixed.bvh")
    bad = m.replace(rotations=np.full_like(m.rotations, np.nan))
    target = tmp_path / "x.bvh"
    try:
        write_bvh(target, bad)
    except Exception:
        pass
    # NaN rotations still format ("nan"); what must never happen is a half-written file.
    leftovers = [p.name for p in tmp_path.iterdir() if p.name.endswith(".part")]
    assert leftovers == []


GOOD = (DATA / "mixed.bvh").read_text()


def _bad(text: str, tmp_path: Path) -> BVHError:
    p = tmp_path / "bad.bvh"
    p.write_text(text)
    with pytest.raises(BVHError) as info:
        read_bvh(p)
    assert str(p) in str(info.value)
    return info.value


def test_truncated_motion_block(tmp_path):
    cut = GOOD[: GOOD.rindex("11 92.5")]
    e = _bad(cut, tmp_path)
    assert "truncated" in str(e) and "3" in str(e)


def test_wrong_value_count_names_the_frame(tmp_path):
    lines = GOOD.splitlines()
    lines[-2] = lines[-2] + " 7"
    e = _bad("\n".join(lines) + "\n", tmp_path)
    assert "frame 1 has 28 values, expected 27" in str(e)
    assert e.line == len(lines) - 1


def test_non_numeric_token(tmp_path):
    e = _bad(GOOD.replace("5.5 91.25", "5.5 9l.25"), tmp_path)
    assert "frame 1, channel 1" in str(e) and "9l.25" in str(e)


def test_non_numeric_offset(tmp_path):
    e = _bad(GOOD.replace("OFFSET 28 0 0", "OFFSET 28 x 0"), tmp_path)
    assert "OFFSET" in str(e) and e.line is not None


def test_unbalanced_braces(tmp_path):
    e = _bad(GOOD.replace("\t\t\t}\n\t\t}\n\t}\n\tJOINT leg_l", "\t\t\t}\n\t}\n\tJOINT leg_l", 1), tmp_path)
    assert "unbalanced" in str(e) or "brace" in str(e)


def test_unknown_channel(tmp_path):
    e = _bad(GOOD.replace("Xrotation Yrotation Zrotation", "Xrotation Yrotation Wrotation", 1), tmp_path)
    assert "unknown channel name 'Wrotation'" in str(e) and e.line == 9


def test_duplicate_joint_names(tmp_path):
    e = _bad(GOOD.replace("JOINT foot_l", "JOINT hand_l"), tmp_path)
    assert "duplicate joint name 'hand_l'" in str(e)


def test_empty_and_not_bvh(tmp_path):
    assert "empty" in str(_bad("", tmp_path))
    assert "not a BVH" in str(_bad("{\"asset\": {}}\n", tmp_path))


def test_nan_and_inf(tmp_path):
    e = _bad(GOOD.replace("5.5 91.25", "5.5 nan"), tmp_path)
    assert "frame 1, channel 1" in str(e) and "not finite" in str(e)
    e = _bad(GOOD.replace("11 92.5", "11 inf"), tmp_path)
    assert "frame 2" in str(e)


def test_declared_frames_disagree(tmp_path):
    e = _bad(GOOD.replace("Frames: 3", "Frames: 2"), tmp_path)
    assert "'Frames: 2' declared, but 3" in str(e)


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(BVHError, match="file not found"):
        read_bvh(tmp_path / "nope.bvh")
    with pytest.raises(BVHError, match="folder"):
        read_bvh(tmp_path)


def test_format_matches_parse():
    m = parse_bvh(GOOD)
    again = parse_bvh(format_bvh(m))
    assert np.abs(again.global_transforms()[1] - m.global_transforms()[1]).max() < 1e-5
