"""glTF 2.0 rigs and animations (retarget.io.gltf, retarget.io.gltf_rig).

Outside references:
- The glTF 2.0 specification (Khronos, version 2.0.1), cited by section beside each check: 3.4 Coordinate
  System and Units, 3.5.3 Transformations, 3.6.2 Accessors, 3.7.3 Skins, 3.7.4 Instantiation, 3.11
  Animations, Appendix C (interpolation), 4 GLB File Format. The titles and rules were read in the
  specification's source; the section numbers are recalled from the published edition.
- The Khronos glTF validator (npm package gltf-validator) on every kind of file we write; those tests
  skip, saying why, when Node.js or the package is absent.
- scipy.spatial.transform (Rotation, Slerp) and scipy.interpolate.CubicHermiteSpline for quaternion
  order, composition and the interpolation formulas; bvhio as an independent BVH reader.
- Files are checked by a small GLB/JSON parser written here, not by the reader under test.

Tolerances: glTF stores floats as IEEE single precision (section 3.6.2.2), relative precision 2^-24
(about 6e-8). A stored unit quaternion is off by at most a few 1e-8 per component, i.e. under 1e-7 rad;
we allow 1e-6 rad. Positions through a chain of about ten joints stay within 1e-6 of the figure's height.
"""

from __future__ import annotations

import base64
import json
import shutil
import struct
import subprocess
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation, Slerp

from retarget import GLTFError, Motion, Skeleton, quat
from retarget.convention import Convention
from retarget.io import read_bvh, read_motion, write_bvh, write_motion
from retarget.io.gltf import GLTFWarning, _sample, list_animations, read_gltf, write_gltf, write_gltf_rig
from retarget.io.gltf_rig import bone_aligned, box_mesh, rebase_rest

HERE = Path(__file__).resolve().parent
VALIDATE = HERE / "validate_gltf.mjs"
VALIDATOR_DIR = HERE / ".node" / "node_modules" / "gltf-validator"
AS_IS = Convention()  # +Y up, +Z forward, metres: write without conversion


# ----- an invented test figure (Y up, faces +Z, left +X, metres) -------------------------------------

NAMES = ("hips", "spine", "chest", "neck", "head",
         "shoulder_l", "elbow_l", "wrist_l", "shoulder_r", "elbow_r", "wrist_r",
         "thigh_l", "knee_l", "ankle_l", "toe_l", "thigh_r", "knee_r", "ankle_r", "toe_r")
PARENTS = (-1, 0, 1, 2, 3, 2, 5, 6, 2, 8, 9, 0, 11, 12, 13, 0, 15, 16, 17)
POSITIONS = np.array([
    [0, 0.95, 0], [0, 1.10, 0], [0, 1.30, 0], [0, 1.50, 0], [0, 1.60, 0],
    [0.18, 1.45, 0], [0.46, 1.45, 0], [0.72, 1.45, 0], [-0.18, 1.45, 0], [-0.46, 1.45, 0], [-0.72, 1.45, 0],
    [0.09, 0.90, 0], [0.09, 0.50, 0.01], [0.09, 0.08, 0], [0.09, 0.02, 0.14],
    [-0.09, 0.90, 0], [-0.09, 0.50, 0.01], [-0.09, 0.08, 0], [-0.09, 0.02, 0.14]])
TIPS = {"head": [0, 0.16, 0], "wrist_l": [0.18, 0, 0], "wrist_r": [-0.18, 0, 0],
        "toe_l": [0, 0, 0.06], "toe_r": [0, 0, 0.06]}
HEIGHT = 1.76


def figure(scale: float = 1.0, basis: np.ndarray | None = None) -> Skeleton:
    """The figure as a BVH-style skeleton (identity rest rotations); basis (3, 3) maps working axes to the
    file's axes, scale converts metres to file units."""
    b = np.eye(3) if basis is None else basis
    pos = POSITIONS @ b.T * scale
    parents = np.array(PARENTS)
    offsets = pos.copy()
    offsets[1:] = pos[1:] - pos[parents[1:]]
    tips = np.full((len(NAMES), 3), np.nan)
    for n, t in TIPS.items():
        tips[NAMES.index(n)] = np.array(t) @ b.T * scale
    return Skeleton(NAMES, parents, offsets, None, tips)


def clip(sk: Skeleton, frames: int = 48, fps: float = 24.0, seed: int = 0) -> Motion:
    """Smooth, large rotations on every joint (up to about 100 degrees) and a root walking forward."""
    rng = np.random.default_rng(seed)
    t = np.arange(frames) / fps
    amp = rng.uniform(0.3, 0.9, (len(sk), 3))
    freq = rng.uniform(0.5, 1.5, (len(sk), 3))
    phase = rng.uniform(0, 2 * np.pi, (len(sk), 3))
    ang = amp * np.sin(2 * np.pi * freq * t[:, None, None] + phase)
    rot = quat.from_euler(ang, "ZXY")
    root = sk.offsets[0] + np.stack([0.05 * np.sin(t), 0.02 * np.cos(3 * t), 0.8 * t], axis=1) * \
        np.linalg.norm(sk.offsets[1])  # scaled to the file's units through a bone length
    return Motion(sk, rot, root, fps)


# ----- an independent reader of what we write -------------------------------------------------------

def load_raw(path: Path) -> tuple[dict, bytes]:
    """(JSON, buffer 0 bytes) of a .glb or .gltf, parsed here from the format's layout (section 4)."""
    data = path.read_bytes()
    if path.suffix == ".glb":
        magic, version, length = struct.unpack_from("<III", data, 0)
        assert magic == 0x46546C67 and version == 2 and length == len(data)
        jlen, jtype = struct.unpack_from("<II", data, 12)
        assert jtype == 0x4E4F534A and jlen % 4 == 0
        doc = json.loads(data[20:20 + jlen])
        bin_ = b""
        if 20 + jlen < len(data):
            blen, btype = struct.unpack_from("<II", data, 20 + jlen)
            assert btype == 0x004E4942 and blen % 4 == 0
            bin_ = data[28 + jlen:28 + jlen + blen]
        return doc, bin_
    doc = json.loads(data)
    uri = doc["buffers"][0]["uri"]
    assert uri.startswith("data:application/octet-stream;base64,")
    return doc, base64.b64decode(uri.split(",", 1)[1])


def raw_accessor(doc: dict, blob: bytes, i: int) -> np.ndarray:
    a = doc["accessors"][i]
    bv = doc["bufferViews"][a["bufferView"]]
    n = {"SCALAR": 1, "VEC3": 3, "VEC4": 4, "MAT4": 16}[a["type"]]
    dt = {5126: "<f4", 5121: "u1", 5123: "<u2", 5125: "<u4"}[a["componentType"]]
    off = bv.get("byteOffset", 0) + a.get("byteOffset", 0)
    return np.frombuffer(blob, dtype=dt, count=a["count"] * n, offset=off).reshape(a["count"], n)


def raw_world(doc: dict) -> dict[str, tuple[Rotation, np.ndarray]]:
    """Node name -> world rest (rotation, position) from node TRS (section 3.5.3: T * R * S, parent first),
    composed with scipy's Rotation."""
    out = {}

    def visit(i, rot, pos):
        n = doc["nodes"][i]
        r_local = Rotation.from_quat(n.get("rotation", [0, 0, 0, 1]))
        p = pos + rot.apply(np.array(n.get("translation", [0, 0, 0]), dtype=float))
        r = rot * r_local
        out[n.get("name", str(i))] = (r, p)
        for c in n.get("children", []):
            visit(c, r, p)

    for root in doc["scenes"][doc.get("scene", 0)]["nodes"]:
        visit(root, Rotation.identity(), np.zeros(3))
    return out


# ----- the Khronos validator -------------------------------------------------------------------------

def validate(path: Path) -> dict:
    if shutil.which("node") is None:
        pytest.skip("Node.js is not installed, so the Khronos glTF validator cannot run (CI installs it)")
    if not VALIDATOR_DIR.is_dir():
        pytest.skip("the glTF validator is not installed: npm install --no-save --prefix tests/.node "
                    "gltf-validator@2.0.0-dev.3.10")
    r = subprocess.run(["node", str(VALIDATE), str(path)], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


def assert_valid(path: Path) -> None:
    report = validate(path)
    issues = report["issues"]
    problems = [m for m in issues["messages"] if m["severity"] <= 1]
    assert issues["numErrors"] == 0 and issues["numWarnings"] == 0, json.dumps(problems, indent=1)


@pytest.fixture(scope="module")
def rig_and_clip():
    """The figure as a bone-aligned glTF-style rig, and a clip on it (same world motion as on the BVH)."""
    bvh_sk = figure()
    m = clip(bvh_sk)
    sk = bone_aligned(bvh_sk)
    return sk, rebase_rest(m, sk), m


@pytest.fixture()
def rig_file(tmp_path, rig_and_clip):
    sk, _, _ = rig_and_clip
    path = tmp_path / "figure.glb"
    write_gltf_rig(path, sk, mesh=True, convention=AS_IS)
    return path


# ----- validator on every kind of file written ------------------------------------------------------

@pytest.mark.parametrize("ext", [".glb", ".gltf"])
def test_validator_reports_no_errors_on_every_kind_of_output(tmp_path, rig_and_clip, rig_file, ext):
    """Skeleton-only clip file, skeleton + box mesh, rig without animation, several clips copied into a
    template (mesh, skin, material kept), and a Z-up centimetre skeleton converted on writing: the
    validator finds no error and no warning in any of them."""
    sk, m, _ = rig_and_clip
    files = []
    files.append(write_gltf(tmp_path / f"clip{ext}", [("walk", m)], convention=AS_IS))
    files.append(write_gltf(tmp_path / f"clip_mesh{ext}", [("walk", m)], convention=AS_IS, mesh=True))
    files.append(write_gltf_rig(tmp_path / f"rig{ext}", sk, convention=AS_IS))
    clips = [("walk", m), ("short", m.slice(5, 20)), ("still", m.slice(3, 4))]
    files.append(write_gltf(tmp_path / f"copy{ext}", clips, template=rig_file))
    zup = figure(100.0, np.array([[1, 0, 0], [0, 0, -1], [0, 1, 0]]))
    files.append(write_gltf(tmp_path / f"zup{ext}", clip(zup), mesh=True))
    for f in files:
        assert_valid(f)


def test_template_copy_keeps_mesh_skin_material(tmp_path, rig_and_clip, rig_file):
    """A clip written into a copy of the rig keeps the rig's mesh, skin (joints, inverse bind matrices)
    and material byte for byte, and its animation targets the rig's joint nodes."""
    sk, m, _ = rig_and_clip
    out = write_gltf(tmp_path / "out.gltf", [("walk", m)], template=rig_file)
    src, sblob = load_raw(rig_file)
    dst, dblob = load_raw(out)
    assert dst["materials"] == src["materials"] and dst["meshes"] == src["meshes"]
    assert dst["skins"][0]["joints"] == src["skins"][0]["joints"]
    for key in ("POSITION", "JOINTS_0", "WEIGHTS_0"):
        i = src["meshes"][0]["primitives"][0]["attributes"][key]
        np.testing.assert_array_equal(raw_accessor(src, sblob, i), raw_accessor(dst, dblob, i))
    i = src["skins"][0]["inverseBindMatrices"]
    np.testing.assert_array_equal(raw_accessor(src, sblob, i), raw_accessor(dst, dblob, i))
    joints = set(src["skins"][0]["joints"])
    targets = {c["target"]["node"] for c in dst["animations"][0]["channels"]}
    assert targets == joints


# ----- facts from the specification -----------------------------------------------------------------

def test_written_space_is_y_up_z_forward_metres(tmp_path):
    """Section 3.4: +Y up, the front faces +Z, metres. A skeleton in Z up, facing -Y, centimetres is
    written (convention detected from its geometry and names); the file's own node transforms put the
    head 1.76 m above the toes along +Y, the toes ahead of the ankles along +Z, and the left wrist
    (name side) on +X (section 3.4: -X is right)."""
    zup = figure(100.0, np.array([[1, 0, 0], [0, 0, -1], [0, 1, 0]]))
    out = write_gltf_rig(tmp_path / "zup.glb", zup, mesh=False)
    doc, _ = load_raw(out)
    w = raw_world(doc)
    floor = min(w[n][1][1] for n in ("toe_l", "toe_r"))
    assert w["head"][1][1] - floor == pytest.approx(1.60 - 0.02, abs=1e-9)  # metres, not centimetres
    assert w["head_end"][1][1] - floor == pytest.approx(HEIGHT - 0.02, abs=1e-9)  # end site kept
    assert w["toe_l"][1][2] - w["ankle_l"][1][2] == pytest.approx(0.14, abs=1e-9)
    assert w["wrist_l"][1][0] == pytest.approx(0.72, abs=1e-9)


def test_quaternions_are_stored_x_y_z_w(tmp_path):
    """Section 3.5.3 and 3.11: rotations are x, y, z, w with w the scalar. A joint turned 90 degrees about
    X stores (sin 45, 0, 0, cos 45); scipy's Rotation (scalar-last) reads it back as that turn."""
    sk = figure()
    m = Motion.rest(sk, frames=2, fps=10.0)
    rot = np.array(m.rotations)
    j = NAMES.index("knee_l")
    rot[1, j] = quat.from_axis_angle(np.array([1.0, 0, 0]), np.pi / 2)
    out = write_gltf(tmp_path / "q.glb", m.replace(rotations=rot), convention=AS_IS)
    doc, blob = load_raw(out)
    anim = doc["animations"][0]
    ch = next(c for c in anim["channels"] if c["target"] == {"node": j, "path": "rotation"})
    q = raw_accessor(doc, blob, anim["samplers"][ch["sampler"]]["output"])[1]
    np.testing.assert_allclose(q, [np.sqrt(0.5), 0, 0, np.sqrt(0.5)], atol=1e-7)
    np.testing.assert_allclose(Rotation.from_quat(q).as_rotvec(), [np.pi / 2, 0, 0], atol=1e-6)


def test_animation_channels_follow_the_specification(tmp_path, rig_and_clip):
    """Section 3.11: sampler input = times in seconds (frame / fps) starting at 0, strictly increasing,
    FLOAT, with min and max that equal the data; LINEAR interpolation; rotation outputs VEC4 unit
    quaternions, translation VEC3; each (node, path) targeted once. Signs are continuous (consecutive
    keys have a non-negative dot product), so LINEAR (Appendix C, shortest-path slerp) does not flip."""
    _, m, _ = rig_and_clip
    out = write_gltf(tmp_path / "a.glb", [("walk", m)], convention=AS_IS)
    doc, blob = load_raw(out)
    anim = doc["animations"][0]
    assert anim["name"] == "walk"
    targets = [(c["target"]["node"], c["target"]["path"]) for c in anim["channels"]]
    assert len(set(targets)) == len(targets)
    assert sum(p == "rotation" for _, p in targets) == len(NAMES)
    assert (0, "translation") in targets
    for c in anim["channels"]:
        s = anim["samplers"][c["sampler"]]
        assert s["interpolation"] == "LINEAR"
        acc_in = doc["accessors"][s["input"]]
        times = raw_accessor(doc, blob, s["input"])[:, 0]
        assert acc_in["componentType"] == 5126 and acc_in["type"] == "SCALAR"
        assert acc_in["min"] == [float(times.min())] and acc_in["max"] == [float(times.max())]
        np.testing.assert_allclose(times, np.arange(m.num_frames) / m.fps, rtol=1e-7)
        assert times[0] == 0 and np.all(np.diff(times) > 0)
        out_acc = doc["accessors"][s["output"]]
        vals = raw_accessor(doc, blob, s["output"])
        if c["target"]["path"] == "rotation":
            assert out_acc["type"] == "VEC4"
            np.testing.assert_allclose(np.linalg.norm(vals, axis=1), 1.0, atol=1e-6)
            assert np.all(np.sum(vals[1:] * vals[:-1], axis=1) >= 0)
        else:
            assert out_acc["type"] == "VEC3"


def test_skin_weights_and_bind_matrices(tmp_path, rig_file):
    """Section 3.7.3: JOINTS_0 unsigned byte/short VEC4 within the skin, WEIGHTS_0 float VEC4 summing to
    1, inverse bind matrices MAT4 float (column-major), each the inverse of its joint's global rest
    transform, with the fourth row (0, 0, 0, 1)."""
    doc, blob = load_raw(rig_file)
    prim = doc["meshes"][0]["primitives"][0]
    j = raw_accessor(doc, blob, prim["attributes"]["JOINTS_0"])
    w = raw_accessor(doc, blob, prim["attributes"]["WEIGHTS_0"])
    assert doc["accessors"][prim["attributes"]["JOINTS_0"]]["componentType"] in (5121, 5123)
    assert j.max() < len(doc["skins"][0]["joints"])
    np.testing.assert_allclose(w.sum(axis=1), 1.0, atol=1e-7)
    ibm = raw_accessor(doc, blob, doc["skins"][0]["inverseBindMatrices"]).reshape(-1, 4, 4).transpose(0, 2, 1)
    world = raw_world(doc)
    for k, node in enumerate(doc["skins"][0]["joints"]):
        r, p = world[doc["nodes"][node]["name"]]
        m = np.eye(4)
        m[:3, :3], m[:3, 3] = r.as_matrix(), p
        np.testing.assert_allclose(m @ ibm[k], np.eye(4), atol=1e-6)
        np.testing.assert_array_equal(ibm[k][3], [0, 0, 0, 1])


def test_linear_and_cubic_sampling_follow_appendix_c():
    """Appendix C: LINEAR rotations are the shortest-path slerp (checked against scipy's Slerp, with the
    second key's sign flipped to show the short path is taken); LINEAR vectors a lerp; STEP holds the
    previous key; CUBICSPLINE is the Hermite spline with tangents scaled by the key interval (checked
    against scipy's CubicHermiteSpline); outside the keys the ends are held (section 3.11)."""
    from scipy.interpolate import CubicHermiteSpline

    times = np.array([0.0, 0.4, 1.0])
    r = Rotation.from_rotvec([[0, 0, 0], [0, 1.0, 0], [1.2, 0.3, 0]])
    keys = r.as_quat()
    keys[1] *= -1
    t = np.linspace(-0.2, 1.3, 31)
    got = _sample(times, keys, "LINEAR", t, rotation=True)
    ref = Slerp(times, r)(np.clip(t, 0, 1.0)).as_quat()
    np.testing.assert_allclose(quat.angle_between(got, ref), 0, atol=1e-9)
    vec = np.array([[0.0, 1, 2], [1, 1, 0], [3, -1, 2]])
    np.testing.assert_allclose(_sample(times, vec, "LINEAR", t, rotation=False),
                               np.stack([np.interp(t, times, vec[:, k]) for k in range(3)], 1), atol=1e-12)
    step = _sample(times, vec, "STEP", t, rotation=False)
    np.testing.assert_array_equal(step, vec[np.clip(np.searchsorted(times, t, side="right") - 1, 0, 2)])
    rng = np.random.default_rng(1)
    tangents_in, tangents_out = rng.normal(size=(3, 3)), rng.normal(size=(3, 3))
    packed = np.stack([tangents_in, vec, tangents_out], axis=1).reshape(9, 3)
    inside = np.linspace(0, 1.0, 25)
    got = _sample(times, packed, "CUBICSPLINE", inside, rotation=False)
    for k in range(2):  # per segment: Hermite with tangents b_k (out of k) and a_{k+1} (into k + 1)
        seg = (inside >= times[k]) & (inside <= times[k + 1])
        spline = CubicHermiteSpline(times[k:k + 2], vec[k:k + 2], np.stack([tangents_out[k], tangents_in[k + 1]]))
        np.testing.assert_allclose(got[seg], spline(inside[seg]), atol=1e-12)


# ----- rest rotations: same rig as BVH and as glTF ---------------------------------------------------

def test_bvh_rig_and_bone_aligned_gltf_rig_move_alike(tmp_path, rig_and_clip):
    """The figure written as BVH (identity rest rotations) and as glTF with bone-aligned axes (each
    joint's +Y along its bone, so rest rotations far from identity), each read back by our readers: every
    joint's world position agrees within 1e-6 of the figure's height on every frame."""
    sk, m_aligned, m_bvh = rig_and_clip
    write_bvh(tmp_path / "figure.bvh", m_bvh)
    from_bvh = read_bvh(tmp_path / "figure.bvh")
    out = write_gltf(tmp_path / "figure.glb", [("walk", m_aligned)], convention=AS_IS)
    from_gltf = read_gltf(out)
    assert from_gltf.skeleton.names == from_bvh.skeleton.names
    rest_angles = quat.angle_between(from_gltf.skeleton.rest_rotations, quat.identity((len(NAMES),)))
    assert np.degrees(rest_angles.max()) > 90  # really bone-aligned, not identity
    rot, pos = from_gltf.skeleton.rest_global
    for j, c in enumerate(from_gltf.skeleton.children):
        if c:  # local +Y runs along the bone to the first child
            d = (pos[c[0]] - pos[j]) / np.linalg.norm(pos[c[0]] - pos[j])
            np.testing.assert_allclose(quat.rotate(rot[j], [0, 1.0, 0]), d, atol=1e-9)
    p_bvh = from_bvh.global_transforms()[1]
    p_gltf = from_gltf.global_transforms()[1]
    err = np.abs(p_bvh - p_gltf).max() / HEIGHT
    assert err < 1e-6, err


def test_gltf_rig_still_writes_bvh_that_bvhio_reads(tmp_path, rig_file, rig_and_clip):
    """A glTF rig read as a Motion keeps a default BVH channel layout: written as BVH (full local
    rotations, zero pose = identity) and read by bvhio, its world positions equal ours (bvhio keeps
    float32; BVH text keeps 6 decimals of degrees, about 2e-8 rad; 1e-5 m over a 1.76 m figure)."""
    import bvhio

    _, m, _ = rig_and_clip
    out = write_gltf(tmp_path / "w.glb", [("walk", m.slice(0, 6))], template=rig_file)
    g = read_gltf(out)
    write_bvh(tmp_path / "w.bvh", g)
    root = bvhio.readAsHierarchy(str(tmp_path / "w.bvh"))
    pos = g.global_transforms()[1]
    for f in range(g.num_frames):
        root.loadPose(f)
        for joint, _, _ in root.layout():
            np.testing.assert_allclose(joint.PositionWorld, pos[f, g.skeleton.index(joint.Name)], atol=1e-5)


def test_bone_aligned_rebase_is_exact_in_memory(rig_and_clip):
    """rebase_rest changes local rotations only by constants: world positions agree to float64 rounding,
    and world rotations differ by each joint's constant rest change."""
    sk, m_aligned, m_bvh = rig_and_clip
    g0, p0 = m_bvh.global_transforms()
    g1, p1 = m_aligned.global_transforms()
    assert np.abs(p0 - p1).max() < 1e-12
    c = quat.multiply(quat.conjugate(g0), g1)
    np.testing.assert_allclose(quat.angle_between(c, sk.rest_global[0][None]), 0, atol=1e-7)


# ----- round trips ------------------------------------------------------------------------------------

def test_round_trip_rotations_several_clips(tmp_path, rig_and_clip, rig_file):
    """Three named clips written into one file (into a copy of the rig and as skeleton only, .glb and
    .gltf), each read back by name: every rotation within 1e-6 rad of what was written (relative angle),
    root positions within 1e-6 of the height, frame rate and frame count kept."""
    sk, m, _ = rig_and_clip
    other = clip(bone_aligned(figure()), frames=31, fps=30.0, seed=5)
    other = Motion(sk, other.rotations, other.root_positions, other.fps)
    clips = [("walk", m), ("other", other), ("still", m.slice(7, 8))]
    for out in (write_gltf(tmp_path / "a.glb", clips, template=rig_file),
                write_gltf(tmp_path / "b.gltf", clips, convention=AS_IS)):
        assert list_animations(out) == ["walk", "other", "still"]
        for name, src in clips:
            back = read_gltf(out, animation=name)
            assert back.num_frames == src.num_frames and back.fps == src.fps
            ang = quat.angle_between(back.rotations, src.rotations)
            assert ang.max() < 1e-6, (name, ang.max())
            assert np.abs(back.root_positions - src.root_positions).max() < 1e-6 * HEIGHT


@settings(max_examples=15, deadline=None)
@given(st.integers(0, 2**31 - 1), st.sampled_from([24.0, 30.0, 60.0, 120.0]), st.integers(1, 40))
def test_round_trip_any_rotations(tmp_path_factory, seed, fps, frames):
    """Property: uniformly random rotations on every joint (any sign, any angle) survive a write and a
    read within 1e-6 rad; the frame rate of evenly spaced keys is recovered exactly."""
    rng = np.random.default_rng(seed)
    sk = bone_aligned(figure())
    rot = Rotation.random(frames * len(NAMES), random_state=rng.integers(2**31)).as_quat()
    rot *= np.where(rng.random((len(rot), 1)) < 0.5, -1, 1)
    m = Motion(sk, rot.reshape(frames, len(NAMES), 4), rng.normal(size=(frames, 3)), fps)
    out = write_gltf(tmp_path_factory.mktemp("rt") / "r.glb", m, convention=AS_IS)
    back = read_gltf(out, fps=None if frames > 1 else fps)
    assert back.fps == fps and back.num_frames == frames
    assert quat.angle_between(back.rotations, m.rotations).max() < 1e-6


def test_armature_transform_and_uniform_scale_fold_into_the_root(tmp_path, rig_and_clip):
    """A rig stored in centimetres under an 'Armature' node that turns it -90 degrees about X and scales
    by 0.01 (a common export layout): read back, the skeleton stands in the scene's metres like the
    original; a clip written into a copy and read again reproduces the world motion."""
    sk, m, _ = rig_and_clip
    plain = write_gltf_rig(tmp_path / "plain.gltf", sk, mesh=True, convention=AS_IS)
    doc, blob = load_raw(plain)
    turn = Rotation.from_euler("x", -90, degrees=True)
    nodes = doc["nodes"]
    for n in nodes:  # joints in centimetres, turned +90 about X so the armature's -90 undoes it
        if "translation" in n:
            n["translation"] = list(np.array(n["translation"]) * 100)
    root = nodes[0]
    root["translation"] = list(turn.inv().apply(root["translation"]))
    root["rotation"] = list((turn.inv() * Rotation.from_quat(root.get("rotation", [0, 0, 0, 1]))).as_quat())
    nodes.append({"name": "Armature", "children": [0], "rotation": list(turn.as_quat()), "scale": [0.01] * 3})
    body = next(i for i, n in enumerate(nodes) if n.get("mesh") is not None)
    doc["scenes"][0]["nodes"] = [len(nodes) - 1, body]
    # Joint world transforms now carry the 0.01 scale, so the inverse bind matrices carry its inverse.
    acc = doc["accessors"][doc["skins"][0]["inverseBindMatrices"]]
    ibm = raw_accessor(doc, blob, doc["skins"][0]["inverseBindMatrices"]).reshape(-1, 4, 4).transpose(0, 2, 1)
    ibm = np.diag([100.0, 100.0, 100.0, 1.0]) @ ibm
    start = doc["bufferViews"][acc["bufferView"]].get("byteOffset", 0) + acc.get("byteOffset", 0)
    raw = ibm.transpose(0, 2, 1).astype("<f4").tobytes()
    blob = blob[:start] + raw + blob[start + len(raw):]
    doc["buffers"][0]["uri"] = "data:application/octet-stream;base64," + base64.b64encode(blob).decode()
    path = tmp_path / "armature.gltf"
    path.write_text(json.dumps(doc))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the bind matrices still match: no warning
        rest = read_gltf(path)
    np.testing.assert_allclose(rest.skeleton.rest_global[1], sk.rest_global[1], atol=1e-9)
    out = write_gltf(tmp_path / "out.glb", [("walk", m)], template=path)
    back = read_gltf(out)
    assert np.abs(back.global_transforms()[1] - m.global_transforms()[1]).max() < 1e-6 * HEIGHT
    raw, _ = load_raw(out)
    arm = next(n for n in raw["nodes"] if n.get("name") == "Armature")
    assert arm["scale"] == [0.01] * 3  # the file keeps its layout; only the joints are animated


# ----- reading rules and bad input ----------------------------------------------------------------------

def _edited(tmp_path: Path, source: Path, edit, name: str = "edited.gltf") -> Path:
    doc, blob = load_raw(source)
    edit(doc)
    doc["buffers"] = [{"byteLength": len(blob),
                       "uri": "data:application/octet-stream;base64," + base64.b64encode(blob).decode()}]
    out = tmp_path / name
    out.write_text(json.dumps(doc))
    return out


def test_non_uniform_scale_is_a_clear_error(tmp_path, rig_file):
    """Section 3.5.3 allows any scale; a joint's non-uniform scale cannot be a rest offset, so reading
    refuses it and names the file and the node."""
    def edit(doc):
        doc["nodes"][NAMES.index("elbow_l")]["scale"] = [1.0, 2.0, 1.0]
    bad = _edited(tmp_path, rig_file, edit)
    with pytest.raises(GLTFError) as e:
        read_gltf(bad)
    msg = str(e.value)
    assert str(bad) in msg and "elbow_l" in msg and "non-uniform scale" in msg


def test_uniform_scale_folds_into_offsets(tmp_path, rig_file, rig_and_clip):
    """A uniform scale of 2 on the chest doubles every offset below it (section 3.5.3: T * R * S)."""
    sk, _, _ = rig_and_clip

    def edit(doc):
        doc["nodes"][NAMES.index("chest")]["scale"] = [2.0, 2.0, 2.0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", GLTFWarning)  # the bind matrices now disagree, tested below
        got = read_gltf(_edited(tmp_path, rig_file, edit)).skeleton
    below = [NAMES.index(n) for n in ("neck", "shoulder_l", "shoulder_r", "head", "elbow_l")]
    np.testing.assert_allclose(got.offsets[below], 2 * sk.offsets[below], atol=1e-9)
    np.testing.assert_allclose(got.offsets[NAMES.index("chest")], sk.offsets[NAMES.index("chest")], atol=1e-9)


def test_bind_matrix_mismatch_warns_and_says_which_pose(tmp_path, rig_file, rig_and_clip):
    """Section 3.7.3: inverse bind matrices bring the mesh into each joint's space at bind time. When a
    node's rest rotation no longer matches them, reading warns (GLTFWarning through Python warnings),
    names the joint and says the node rest pose is used; rest='bind' uses the bind pose instead."""
    sk, _, _ = rig_and_clip
    j = NAMES.index("elbow_r")

    def edit(doc):
        doc["nodes"][j]["rotation"] = list(Rotation.from_rotvec([0, 0, 0.5]).as_quat())
    bad = _edited(tmp_path, rig_file, edit)
    with pytest.warns(GLTFWarning, match=r"node rest pose \(node TRS\) is used") as rec:
        m = read_gltf(bad)
    assert "elbow_r" in str(rec[0].message)
    assert quat.angle_between(m.skeleton.rest_rotations[j], sk.rest_rotations[j]) > 0.4
    with pytest.warns(GLTFWarning):
        bind = read_gltf(bad, rest="bind", animation=False)
    np.testing.assert_allclose(bind.skeleton.rest_global[1], sk.rest_global[1], atol=1e-6)
    assert quat.angle_between(bind.skeleton.rest_rotations[j], sk.rest_rotations[j]) < 1e-6


def test_names_are_unique_and_deterministic(tmp_path, rig_file):
    """Unnamed nodes become node<index>; a repeated name gets _<node index>; whitespace becomes '_'."""
    def edit(doc):
        del doc["nodes"][NAMES.index("knee_l")]["name"]
        doc["nodes"][NAMES.index("knee_r")]["name"] = " knee  right"
        doc["nodes"][NAMES.index("ankle_r")]["name"] = "spine"
    p = _edited(tmp_path, rig_file, edit)
    a = read_gltf(p).skeleton.names
    assert a == read_gltf(p).skeleton.names
    assert a[NAMES.index("knee_l")] == f"node{NAMES.index('knee_l')}"
    assert a[NAMES.index("knee_r")] == "knee_right"
    assert a[NAMES.index("ankle_r")] == f"spine_{NAMES.index('ankle_r')}"


def test_rig_without_animation_reads_as_its_rest_pose(rig_file, rig_and_clip):
    """No animation: one frame holding the node rest pose; offsets, rest rotations and end-site tips as
    written."""
    sk, _, _ = rig_and_clip
    m = read_motion(rig_file)
    assert m.num_frames == 1
    np.testing.assert_allclose(m.skeleton.offsets, sk.offsets, atol=1e-12)
    assert quat.angle_between(m.skeleton.rest_rotations, sk.rest_rotations).max() < 1e-12
    np.testing.assert_allclose(m.rotations[0], m.skeleton.rest_rotations, atol=1e-12)
    # End sites travel as plain child nodes of the leaf joints (not skin joints) and come back as tips.
    np.testing.assert_allclose(m.skeleton.tips, sk.tips, atol=1e-12)
    assert np.isnan(sk.tips).sum() == 3 * (len(NAMES) - len(TIPS))


def test_write_motion_dispatch_and_no_half_files(tmp_path, rig_file, rig_and_clip):
    """write_motion/read_motion follow the extension (a template for glTF); a clip whose joints are not the
    rig's fails with a GLTFError naming the joint and leaves no file behind."""
    sk, m, _ = rig_and_clip
    write_motion(tmp_path / "a.glb", m, template=rig_file)
    assert read_motion(tmp_path / "a.glb").num_frames == m.num_frames
    wrong = Motion(sk.renamed([n.upper() if n == "elbow_l" else n for n in NAMES]), m.rotations,
                   m.root_positions, m.fps)
    with pytest.raises(GLTFError, match="'ELBOW_L' is not a joint of the rig"):
        write_motion(tmp_path / "b.glb", wrong, template=rig_file)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.glb", "figure.glb"]


@pytest.mark.parametrize("content,expected", [
    (b"not json", "cannot parse"),
    (b'{"asset": {"version": "1.0"}}', "asset version '1.0'"),
    (b'{"asset": {"version": "2.0"}}', "no nodes"),
    (b'{"asset": {"version": "2.0"}, "nodes": [{"children": [5]}]}', "lists child 5"),
    (b'{"asset": {"version": "2.0"}, "nodes": [{"children": [1]}, {"children": [0]}]}', "cycle"),
    (b'{"asset": {"version": "2.0"}, "nodes": [{}], "skins": [{"joints": [3]}]}', "joint node 3"),
])
def test_bad_documents_name_the_file_and_the_place(tmp_path, content, expected):
    p = tmp_path / "bad.gltf"
    p.write_bytes(content)
    with pytest.raises(GLTFError) as e:
        read_gltf(p)
    assert expected in str(e.value) and str(p) in str(e.value)


def test_bad_glb_and_missing_animation(tmp_path, rig_file):
    p = tmp_path / "bad.glb"
    p.write_bytes(b"GLTF" + bytes(20))
    with pytest.raises(GLTFError, match="first four bytes"):
        read_gltf(p)
    with pytest.raises(GLTFError, match="no animation named 'run'"):
        read_gltf(rig_file, animation="run")


def test_box_mesh_is_closed_and_faces_outwards(rig_and_clip):
    """Each box is closed (every edge shared by exactly two triangles) and its triangles wind
    counter-clockwise seen from outside (section 3.7.4: with a positive determinant, front faces wind
    counter-clockwise), i.e. along the stored normal."""
    sk, _, _ = rig_and_clip
    body = box_mesh(sk)
    tri = body.indices.reshape(-1, 3)
    p = body.positions
    n = np.cross(p[tri[:, 1]] - p[tri[:, 0]], p[tri[:, 2]] - p[tri[:, 0]])
    assert np.all(np.sum(n * body.normals[tri[:, 0]], axis=1) > 0)
    # Faces carry their own vertices, so close the boxes on positions rather than indices.
    keys = np.round(p, 9)
    edges: dict = {}
    for a, b, c in tri:
        for u, v in ((a, b), (b, c), (c, a)):
            k = tuple(sorted((tuple(keys[u]), tuple(keys[v]))))
            edges[k] = edges.get(k, 0) + 1
    assert set(edges.values()) <= {2, 4}  # diagonals are shared by the two triangles of a face


def test_inspect_reads_a_gltf_rig(rig_file):
    """The command line's inspect takes a glTF rig like a BVH one."""
    from click.testing import CliRunner

    from retarget.cli import main

    r = CliRunner().invoke(main, ["inspect", str(rig_file)])
    assert r.exit_code == 0, r.output
    assert "hips" in r.output and "knee_l" in r.output


# ----- the demo characters as glTF ------------------------------------------------------------------------

DEMO_RIGS = HERE.parent / "demo_clips" / "rigs"
DEMO_SPACES = {"brannoc_stocky": Convention("+Y", "+Z", 1.0, "m"),
               "quillon_lanky": Convention("+Y", "-X", 0.01, "cm")}  # as demo_clips/README.md states


@pytest.mark.parametrize("name", sorted(DEMO_SPACES))
def test_demo_characters_as_gltf(name):
    """Each demo character's .glb (written by demo_clips/generate.py) passes the validator, reads without
    warnings, and holds the BVH rig's joints at the same rest positions turned into glTF's space (section
    3.4: +Y up, faces +Z, metres), with bone-aligned axes and a skinned mesh."""
    glb, bvh = DEMO_RIGS / f"{name}.glb", DEMO_RIGS / f"{name}.bvh"
    if not glb.is_file():
        pytest.skip(f"{glb} has not been generated")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        g = read_gltf(glb)
    b = read_bvh(bvh)
    conv = DEMO_SPACES[name]
    assert g.skeleton.names == b.skeleton.names
    want = b.skeleton.rest_global[1] @ conv.file_to_canonical().T * conv.metres_per_unit
    # BVH text keeps 6 decimals per offset (5e-7 file units each, summed over about 10 joints of a
    # chain): 1e-5 m covers a rig in metres.
    np.testing.assert_allclose(g.skeleton.rest_global[1], want, atol=1e-5)
    doc, _ = load_raw(glb)
    assert doc["meshes"][0]["primitives"][0]["attributes"].keys() >= {"POSITION", "JOINTS_0", "WEIGHTS_0"}
    assert quat.angle_between(g.skeleton.rest_rotations[1:], quat.identity((len(g.skeleton) - 1,))).max() > 1
    assert_valid(glb)


def test_hand_written_file_with_less_common_encodings(tmp_path):
    """A file written by hand here with what our writer never produces: a root node given as a column-major
    `matrix` (section 3.5.3), a STEP rotation channel stored as normalised signed shorts (section 3.11:
    f = max(c / 32767, -1)), a CUBICSPLINE translation channel whose output is a sparse accessor with no
    bufferView (section 3.6.2.3: zeros, then the listed elements replaced), sampled at 4 fps."""
    q_keys = Rotation.from_rotvec([[0, 0, 0], [0.9, 0, 0], [0, 0, -1.3]]).as_quat()
    shorts = np.round(q_keys * 32767).astype("<i2")
    v_keys = np.array([[0, 1, 0], [0.2, 1.4, 0], [0, 1.0, 0.6]], dtype="<f4")
    times = np.array([0, 0.5, 1.0], dtype="<f4")
    sparse_idx = np.array([1, 4, 7], dtype="<u1")  # the values of (in-tangent, value, out-tangent) triples
    parts = [times.tobytes(), shorts.tobytes(), sparse_idx.tobytes() + b"\0", v_keys.tobytes()]
    offsets = np.cumsum([0] + [len(p) for p in parts])
    blob = b"".join(parts)
    root_turn = Rotation.from_euler("y", 90, degrees=True)
    m = np.eye(4)
    m[:3, :3], m[:3, 3] = root_turn.as_matrix(), [1, 2, 3]
    doc = {
        "asset": {"version": "2.0"},
        "scene": 0, "scenes": [{"nodes": [0]}],
        "nodes": [{"name": "base", "matrix": list(m.T.reshape(16)), "children": [1]},
                  {"name": "arm", "translation": [0, 1, 0]}],
        "skins": [{"joints": [0, 1]}],
        "buffers": [{"byteLength": len(blob),
                     "uri": "data:application/octet-stream;base64," + base64.b64encode(blob).decode()}],
        "bufferViews": [{"buffer": 0, "byteOffset": int(o), "byteLength": len(p)} for o, p in zip(offsets, parts)],
        "accessors": [
            {"bufferView": 0, "componentType": 5126, "count": 3, "type": "SCALAR", "min": [0], "max": [1]},
            {"bufferView": 1, "componentType": 5122, "normalized": True, "count": 3, "type": "VEC4"},
            {"componentType": 5126, "count": 9, "type": "VEC3",
             "sparse": {"count": 3, "indices": {"bufferView": 2, "componentType": 5121},
                        "values": {"bufferView": 3}}}],
        "animations": [{"channels": [{"sampler": 0, "target": {"node": 1, "path": "rotation"}},
                                     {"sampler": 1, "target": {"node": 1, "path": "translation"}}],
                        "samplers": [{"input": 0, "output": 1, "interpolation": "STEP"},
                                     {"input": 0, "output": 2, "interpolation": "CUBICSPLINE"}]}],
    }
    path = tmp_path / "hand.gltf"
    path.write_text(json.dumps(doc))
    got = read_gltf(path, fps=4.0)
    assert got.num_frames == 5 and got.skeleton.names == ("base", "arm")
    assert quat.angle_between(got.rotations[:, 0], root_turn.as_quat()).max() < 1e-12
    step = q_keys[[0, 0, 1, 1, 2]]  # t = 0, 0.25, 0.5, 0.75, 1.0 hold the previous key
    assert quat.angle_between(got.rotations[:, 1], step).max() < 1e-4  # 1/32767 quantisation
    # Zero tangents: the Hermite basis gives the mean of the two keys half-way between them.
    want_t = np.array([v_keys[0], (v_keys[0] + v_keys[1]) / 2, v_keys[1], (v_keys[1] + v_keys[2]) / 2, v_keys[2]])
    np.testing.assert_allclose(got.translations[:, 1], want_t, atol=1e-6)
    pos = got.global_transforms()[1]
    np.testing.assert_allclose(pos[:, 1], [1, 2, 3] + root_turn.apply(want_t), atol=1e-6)
    # Without a skin, the node tree is read as the skeleton (a skeleton-only file from elsewhere).
    del doc["skins"]
    path.write_text(json.dumps(doc))
    assert read_gltf(path, fps=4.0).skeleton.names == ("base", "arm")
