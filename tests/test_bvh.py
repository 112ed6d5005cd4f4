"""BVH reading and writing: bvhio as the independent reader, the format's documented rules, every kind of
bad input, and round trips."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from retarget import BVHError, RetargetError, quat
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
    """A write that fails half way (the text pieces stop with an error) leaves neither the destination
    nor a temporary file behind; an existing file stays as it was."""
    from retarget.io.atomic import atomic_write

    target = tmp_path / "x.bvh"
    target.write_text("old")

    def pieces():
        yield b"HIERARCHY\n"
        raise OSError(28, "No space left on device")

    with pytest.raises(RetargetError, match="No space left"):
        atomic_write(target, pieces())
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["x.bvh"]


def test_writer_refuses_what_bvh_cannot_carry(tmp_path):
    """NaN values, or a joint turned or moved where it has no channel for it: a BVHError naming the joint,
    and no file."""
    m = read_bvh(DATA / "mixed.bvh")
    rot = np.array(m.rotations)
    rot[1, 2] = np.nan
    with pytest.raises(BVHError, match="frame 1, joint 'head'"):
        write_bvh(tmp_path / "nan.bvh", m.replace(rotations=rot))
    sk = m.skeleton
    no_rot = sk.__class__(sk.names, sk.parents, sk.offsets, None, sk.tips,
                          tuple(() if n == "hand_l" else c for n, c in zip(sk.names, sk.channels)))
    turned = m.replace(skeleton=no_rot)
    with pytest.raises(BVHError, match="'hand_l' has no rotation channels"):
        write_bvh(tmp_path / "lost.bvh", turned)
    assert list(tmp_path.iterdir()) == []


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
    assert "truncated" in str(e) and "'Frames: 3' declared, 2 frame lines found" in str(e)


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


# ----- the fixed-decimal frame formatter ----------------------------------------------------------------

def _printf_reference(values: np.ndarray) -> bytes:
    """Outside reference: Python's printf-style '%.6f' (correctly rounded fixed notation) of each value
    rounded to 6 decimals, with -0.0 turned to 0.0, one space between values, a newline per row."""
    row = " ".join(["%.6f"] * values.shape[1]) + "\n"
    return ((row * values.shape[0]) % tuple((np.round(values, 6) + 0.0).ravel())).encode("ascii")


def test_frame_text_equals_printf_formatting_on_random_and_edge_values():
    """The vectorised formatter gives byte for byte the text of '%.6f' formatting, for values of every
    magnitude (each width path: below 1000, chunked integer parts up to 1e9, the plain path beyond),
    negatives, ties at the seventh decimal, and values that round to zero from below (no '-0.000000')."""
    from retarget.io.bvh import _fixed6

    rng = np.random.default_rng(11)
    for scale in (1e-7, 1e-6, 1e-3, 1.0, 60.0, 999.0, 1e3, 1e4, 1e6, 1e8, 9e8, 1e9, 1e12):
        v = rng.normal(size=(60, 7)) * scale
        v[::3] = np.round(v[::3], 7)           # exact seventh-decimal ties (in decimal)
        assert _fixed6(v) == _printf_reference(v), scale
    edge = np.array([[0.0, -0.0, -1e-7, -4e-7, -5e-7, -5.000001e-7, 5e-7, 0.5, -0.5, 1e-6, -1e-6, -9.9999996,
                      99.9999995, -999.9999995, 999.9999994, -99.9999996, 1234.7894445, -9999.9999996,
                      999999999.999999, -999999999.9999, 123456789.123456, 1e9, -1e15]])
    assert _fixed6(edge) == _printf_reference(edge)
    assert b"-0.000000" not in _fixed6(edge)
    assert _fixed6(np.zeros((3, 0))) == b"\n\n\n"
    assert _fixed6(np.zeros((0, 4))) == b""


@settings(max_examples=60, deadline=None)
@given(arrays(np.float64, st.tuples(st.integers(1, 4), st.integers(1, 5)),
              elements=st.floats(-2e9, 2e9, allow_nan=False)))
def test_frame_text_equals_printf_formatting_property(values):
    """Property: for any finite values the formatter's bytes equal '%.6f' formatting (reference above)."""
    from retarget.io.bvh import _fixed6

    assert _fixed6(values) == _printf_reference(values)


def test_written_file_is_read_back_by_bvhio(tmp_path):
    """A file from the writer (mixed rotation orders, root travel beyond 1000 units so the wide integer
    path runs) reads in bvhio, an independent reader, to the same world positions as ours. bvhio keeps
    float32: about 2e-3 units at 2e4 units, so 1e-2 is allowed."""
    rng = np.random.default_rng(4)
    m = parse_bvh(GOOD)
    f = 40
    ang = rng.uniform(-400, 400, (f, m.skeleton.num_joints, 3))
    rot = np.stack([quat.from_euler(ang[:, j], "ZXY", degrees=True) for j in range(m.skeleton.num_joints)], 1)
    root = rng.uniform(-2e4, 2e4, (f, 3))
    trans = None if m.translations is None else np.repeat(m.translations[:1], f, axis=0)
    out = write_bvh(tmp_path / "wide.bvh", m.replace(rotations=rot, root_positions=root, translations=trans))
    ours = read_bvh(out).global_transforms()[1]
    theirs = _bvhio_world_positions(out, f)
    for j, name in enumerate(m.skeleton.names):
        np.testing.assert_allclose(theirs[name], ours[:, j], atol=1e-2, err_msg=name)
