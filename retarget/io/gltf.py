"""glTF 2.0 rigs and animations: read a skinned character's skeleton, write clips as glTF animations.

Facts of the format this module relies on (glTF 2.0 specification, Khronos, version 2.0.1; the anchors
in brackets are the specification source's own, the section numbers are recalled from the published
edition):

- 3.4 Coordinate System and Units [#coordinate-system-and-units]: +Y up, +Z forward (the front of an
  asset faces +Z), linear distances in metres, angles in radians.
- 3.5.3 Transformations [#transformations]: a node's rotation is a unit quaternion in the order
  x, y, z, w; the local matrix is T * R * S; a `matrix` must be decomposable into TRS (no shear); the
  global transform is the parent's global transform times the local one.
- 3.7.3 Skins [#skins]: `skin.joints` lists joint nodes that share a common root node (joint or not);
  `inverseBindMatrices` is a MAT4 float accessor, one column-major matrix per joint.
- 3.11 Animations [#animations]: sampler inputs are times in seconds from t = 0, strictly increasing,
  and the input accessor MUST define min and max; outputs are clamped outside the input range;
  rotation outputs are x, y, z, w quaternions (float or normalised integers).
- Appendix C [#appendix-c-interpolation]: STEP holds a key, LINEAR is a lerp for vectors and a
  shortest-path slerp for rotations, CUBICSPLINE is a Hermite spline over (in-tangent, value,
  out-tangent) triples and rotations are normalised afterwards.
- 4 GLB File Format [#glb-file-format-specification]: 12-byte header ("glTF", version 2, length), a
  JSON chunk padded with spaces, then an optional BIN chunk padded with zeros, 4-byte aligned.

How a rig becomes a Skeleton: the joints of the file's skins, plus any node on the way between them
and their common root, in depth-first order from that root. A joint's offset and rest rotation are read
from the node rest pose (node TRS) in the space of the whole scene: the transforms of the nodes above
the common root are folded into the root joint, and uniform scales are folded into the offsets. Joint
names come from the node names (whitespace replaced by "_", unnamed nodes called "node<index>", a
repeated name gets "_<node index>" appended), so the same file always gives the same names.

Choices where the format leaves room (also in DEVELOPERS.md):
- Scale must be uniform on every joint and on the nodes above the root; otherwise GLTFError.
- Inverse bind matrices are checked against the node rest pose; a disagreement is reported with a
  GLTFWarning (Python warnings) that says which pose is used: the node rest pose by default,
  ``rest="bind"`` takes the bind pose instead.
- An animation is sampled at a fixed frame rate: the rate of its keys when they are evenly spaced,
  else 30 frames per second (common practice), unless ``fps`` is given.
- Writing into a copy of a template keeps its meshes, skins, materials, textures and scenes, merges its
  buffers into one (external images are embedded), and replaces its animations with the clips written.
"""

from __future__ import annotations

import base64
import json
import os
import struct
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence
from urllib.parse import unquote

import numpy as np

from .. import quat
from ..errors import GLTFError, RetargetError
from ..motion import Motion
from ..skeleton import Skeleton
from .atomic import atomic_write

__all__ = ["read_gltf", "write_gltf", "write_gltf_rig", "list_animations", "GLTFWarning", "GLTF_EXTENSIONS"]

GLTF_EXTENSIONS = (".gltf", ".glb")

BYTE, UBYTE, SHORT, USHORT, UINT, FLOAT = 5120, 5121, 5122, 5123, 5125, 5126
_COMPONENT = {BYTE: np.int8, UBYTE: np.uint8, SHORT: np.int16, USHORT: np.uint16, UINT: np.uint32,
              FLOAT: np.float32}
_NORMALISED_DIVISOR = {BYTE: 127.0, UBYTE: 255.0, SHORT: 32767.0, USHORT: 65535.0}
_NCOMP = {"SCALAR": 1, "VEC2": 2, "VEC3": 3, "VEC4": 4, "MAT2": 4, "MAT3": 9, "MAT4": 16}
ARRAY_BUFFER, ELEMENT_ARRAY_BUFFER = 34962, 34963
_INTERPOLATIONS = ("LINEAR", "STEP", "CUBICSPLINE")
_GLB_MAGIC, _GLB_JSON, _GLB_BIN = 0x46546C67, 0x4E4F534A, 0x004E4942

# Relative tolerance for "uniform" scale: float32 storage gives about 1e-7, exporters round more.
_SCALE_TOL = 1e-5
# Inverse bind matrices agree with the node pose when every joint lands within this share of the rig's
# size and its axes within this much (float32 matrices are good to about 1e-6).
_BIND_POS_TOL = 1e-4
_BIND_AXIS_TOL = 1e-3
_DEFAULT_FPS = 30.0
_FPS_KEY = "frames_per_second"  # in an animation's extras: the clip's frame rate, as written here


class GLTFWarning(UserWarning):
    """A glTF file was read, but something in it needed a stated choice (which rest pose is used...)."""


# ----- similarity transforms (rotation, translation, uniform scale) ------------------------------------

@dataclass(frozen=True)
class _Xf:
    q: np.ndarray       # (4,) rotation
    t: np.ndarray       # (3,) translation
    s: float = 1.0      # uniform scale

    def then(self, child: "_Xf") -> "_Xf":
        """self * child: the child's transform expressed in self's parent space."""
        return _Xf(quat.multiply(self.q, child.q), self.t + self.s * quat.rotate(self.q, child.t),
                   self.s * child.s)

    def matrix(self) -> np.ndarray:
        m = np.eye(4)
        m[:3, :3] = quat.to_matrix(self.q) * self.s
        m[:3, 3] = self.t
        return m


_IDENTITY = _Xf(np.array([0.0, 0.0, 0.0, 1.0]), np.zeros(3), 1.0)


def _uniform_scale(s: np.ndarray, where: str, path: str) -> float:
    s = np.asarray(s, dtype=np.float64)
    if s.shape != (3,) or not np.all(np.isfinite(s)):
        raise GLTFError(f"{where}: scale must be three finite numbers, got {s.tolist()}", path=path)
    if np.any(s <= 0):
        raise GLTFError(f"{where}: scale {s.tolist()} is not positive (mirrored or collapsed joints are "
                        "not supported)", path=path)
    if s.max() - s.min() > _SCALE_TOL * s.max():
        raise GLTFError(f"{where}: non-uniform scale {s.tolist()}; joints and the nodes above them must "
                        "scale all three axes alike", path=path)
    return float(s.mean())


def _decompose(m: np.ndarray, where: str, path: str) -> _Xf:
    """A 4x4 matrix -> rotation, translation, uniform scale; GLTFError for shear, mirror or non-uniform."""
    if not np.all(np.isfinite(m)):
        raise GLTFError(f"{where}: matrix has values that are not finite", path=path)
    if np.abs(m[3] - np.array([0.0, 0.0, 0.0, 1.0])).max() > 1e-6:
        raise GLTFError(f"{where}: matrix bottom row is {m[3].tolist()}, expected [0, 0, 0, 1]", path=path)
    a = m[:3, :3]
    scales = np.linalg.norm(a, axis=0)
    if np.any(scales <= 1e-12):
        raise GLTFError(f"{where}: matrix collapses an axis (zero scale)", path=path)
    r = a / scales
    if np.linalg.det(r) < 0:
        raise GLTFError(f"{where}: matrix mirrors (negative determinant), not supported", path=path)
    if np.abs(r.T @ r - np.eye(3)).max() > 1e-4:
        raise GLTFError(f"{where}: matrix has shear, so it is not decomposable into TRS", path=path)
    s = _uniform_scale(scales, where, path)
    return _Xf(quat.from_matrix(r), m[:3, 3].copy(), s)


# ----- the document: JSON through pygltflib, buffers and accessors ---------------------------------

def _field(obj, name, default=None):
    """A property of a pygltflib object or of a plain dict (sparse accessors come either way)."""
    if obj is None:
        return default
    if isinstance(obj, dict):
        return obj.get(name, default)
    value = getattr(obj, name, default)
    return default if value is None else value


class _Document:
    """A glTF document opened for reading: the parsed JSON (pygltflib) and lazily decoded buffers."""

    def __init__(self, path: str | os.PathLike):
        import pygltflib

        self.path = Path(path)
        self.label = str(path)
        ext = self.path.suffix.lower()
        if ext not in GLTF_EXTENSIONS:
            raise GLTFError(f"unsupported file type {ext or '(none)'!r}: expected .gltf or .glb", path=self.label)
        if not self.path.is_file():
            raise GLTFError("file not found", path=self.label)
        if ext == ".glb":
            with open(self.path, "rb") as fh:
                head = fh.read(12)
            if len(head) < 12 or struct.unpack("<I", head[:4])[0] != _GLB_MAGIC:
                raise GLTFError("not a binary glTF file: the first four bytes are not 'glTF'", path=self.label)
            version = struct.unpack("<I", head[4:8])[0]
            if version != 2:
                raise GLTFError(f"GLB container version {version}, expected 2", path=self.label)
        try:
            g = pygltflib.GLTF2.load(str(self.path))
        except Exception as exc:  # pygltflib raises whatever its JSON or struct parsing raises
            raise GLTFError(f"cannot parse the glTF document: {exc}", path=self.label) from None
        if g is None:
            raise GLTFError("cannot parse the glTF document", path=self.label)
        version = str(_field(g.asset, "version", ""))
        if not version.startswith("2."):
            raise GLTFError(f"asset version {version or '(missing)'!r}, expected 2.x", path=self.label)
        self.g = g
        self._buffers: dict[int, bytes] = {}

    def raw_json(self) -> dict:
        """The document's JSON exactly as stored (pygltflib's own output adds default values)."""
        data = self.path.read_bytes()
        if self.path.suffix.lower() == ".glb":
            length, kind = struct.unpack_from("<II", data, 12)
            if kind != _GLB_JSON:
                raise self.error("the first GLB chunk is not JSON")
            data = data[20:20 + length]
        try:
            return json.loads(data)
        except ValueError as exc:
            raise self.error(f"cannot parse the glTF document: {exc}") from None

    def error(self, message: str) -> GLTFError:
        return GLTFError(message, path=self.label)

    def buffer(self, i: int, where: str) -> bytes:
        if i in self._buffers:
            return self._buffers[i]
        bufs = self.g.buffers or []
        if not isinstance(i, int) or not 0 <= i < len(bufs):
            raise self.error(f"{where}: buffer {i} does not exist")
        b = bufs[i]
        uri = b.uri
        if uri is None:
            blob = self.g.binary_blob()
            if i != 0 or blob is None:
                raise self.error(f"buffer {i} has no uri and is not the GLB binary chunk")
            data = bytes(blob)
        elif uri.startswith("data:"):
            head, _, payload = uri.partition(",")
            if ";base64" not in head:
                raise self.error(f"buffer {i}: data URI is not base64")
            try:
                data = base64.b64decode(payload, validate=False)
            except ValueError as exc:
                raise self.error(f"buffer {i}: bad base64 data ({exc})") from None
        else:
            f = self.path.parent / unquote(uri)
            if not f.is_file():
                raise self.error(f"buffer {i}: file {uri!r} not found next to the document")
            data = f.read_bytes()
        if len(data) < (b.byteLength or 0):
            raise self.error(f"buffer {i} holds {len(data)} bytes, its byteLength says {b.byteLength}")
        self._buffers[i] = data
        return data

    def view(self, vi: int, where: str) -> tuple[memoryview, int | None]:
        views = self.g.bufferViews or []
        if not isinstance(vi, int) or not 0 <= vi < len(views):
            raise self.error(f"{where}: bufferView {vi} does not exist")
        bv = views[vi]
        data = self.buffer(bv.buffer, f"bufferView {vi}")
        start = bv.byteOffset or 0
        end = start + (bv.byteLength or 0)
        if end > len(data):
            raise self.error(f"bufferView {vi} ends at byte {end}, past its buffer's {len(data)} bytes")
        return memoryview(data)[start:end], bv.byteStride

    def accessor(self, i: int, where: str) -> np.ndarray:
        """(count, components) float64 values of an accessor (normalised integers decoded as the
        specification's section 3.11 table says; sparse substitution applied)."""
        accs = self.g.accessors or []
        if not isinstance(i, int) or not 0 <= i < len(accs):
            raise self.error(f"{where}: accessor {i} does not exist")
        a = accs[i]
        label = f"{where}: accessor {i}"
        ct, count = a.componentType, a.count
        nc = _NCOMP.get(a.type)
        if ct not in _COMPONENT or nc is None or not isinstance(count, int) or count < 1:
            raise self.error(f"{label}: componentType {ct!r}, type {a.type!r}, count {count!r} is not a "
                             "valid accessor")
        dt = np.dtype(_COMPONENT[ct]).newbyteorder("<")
        if a.type in ("MAT2", "MAT3") and dt.itemsize < 4:
            raise self.error(f"{label}: {a.type} of {dt.itemsize}-byte components is not supported")
        elem = dt.itemsize * nc
        if a.bufferView is None:
            out = np.zeros((count, nc), dtype=dt)
        else:
            data, stride = self.view(a.bufferView, label)
            stride = stride or elem
            off = a.byteOffset or 0
            need = off + stride * (count - 1) + elem
            if need > len(data):
                raise self.error(f"{label}: needs {need} bytes of bufferView {a.bufferView}, which has "
                                 f"{len(data)}")
            out = np.ndarray((count, nc), dtype=dt, buffer=data, offset=off,
                             strides=(stride, dt.itemsize)).copy()
        sparse = a.sparse
        if sparse is not None:
            sc = int(_field(sparse, "count", 0))
            ind, val = _field(sparse, "indices"), _field(sparse, "values")
            ict = _field(ind, "componentType")
            if ict not in (UBYTE, USHORT, UINT) or sc < 1 or sc > count:
                raise self.error(f"{label}: sparse block is not valid")
            idt = np.dtype(_COMPONENT[ict]).newbyteorder("<")
            raw, _ = self.view(_field(ind, "bufferView"), f"{label} sparse indices")
            ioff = int(_field(ind, "byteOffset", 0))
            raw_v, _ = self.view(_field(val, "bufferView"), f"{label} sparse values")
            voff = int(_field(val, "byteOffset", 0))
            if ioff + sc * idt.itemsize > len(raw) or voff + sc * elem > len(raw_v):
                raise self.error(f"{label}: sparse block runs past its bufferView")
            idx = np.frombuffer(raw, dtype=idt, count=sc, offset=ioff).astype(np.int64)
            if np.any(idx >= count) or np.any(np.diff(idx) <= 0):
                raise self.error(f"{label}: sparse indices must increase strictly and stay below {count}")
            out[idx] = np.frombuffer(raw_v, dtype=dt, count=sc * nc, offset=voff).reshape(sc, nc)
        values = out.astype(np.float64)
        if a.normalized and ct in _NORMALISED_DIVISOR:
            values = np.maximum(values / _NORMALISED_DIVISOR[ct], -1.0)
        if not np.all(np.isfinite(values)):
            raise self.error(f"{label}: values that are not finite")
        return values

    def node_transform(self, n: int) -> _Xf:
        node = self.g.nodes[n]
        where = f"node {n} ({node.name!r})" if node.name else f"node {n}"
        if node.matrix is not None and len(node.matrix) == 16:
            m = np.asarray(node.matrix, dtype=np.float64).reshape(4, 4).T  # stored column-major
            return _decompose(m, where, self.label)
        t = np.zeros(3) if node.translation is None else np.asarray(node.translation, dtype=np.float64)
        q = np.array([0.0, 0.0, 0.0, 1.0]) if node.rotation is None else np.asarray(node.rotation, np.float64)
        if t.shape != (3,) or not np.all(np.isfinite(t)):
            raise self.error(f"{where}: translation must be three finite numbers")
        if q.shape != (4,) or not np.all(np.isfinite(q)) or np.linalg.norm(q) < 1e-6:
            raise self.error(f"{where}: rotation must be a unit quaternion x, y, z, w")
        s = 1.0 if node.scale is None else _uniform_scale(node.scale, where, self.label)
        return _Xf(quat.normalize(q), t, s)


# ----- rig: which nodes form the skeleton, and its rest pose ---------------------------------------

@dataclass
class _Rig:
    skeleton: Skeleton
    nodes: list[int]            # node index of each skeleton joint
    above: _Xf                  # world transform of the root joint's parent node (identity if none)
    local: list[_Xf]            # node rest TRS of each joint (the file's values)
    node_rotations: np.ndarray  # (J, 4) node-pose local rotations, root folded with `above`
    node_offsets: np.ndarray    # (J, 3) node-pose offsets in skeleton units (scales folded), root folded
    parent_scale: np.ndarray    # (J,) global uniform scale of each joint's parent (of `above` for the root)
    size: float                 # extent of the rest pose, skeleton units (for tolerances)


def _display(node, n: int) -> str:
    return f"node {n} ({node.name!r})" if node.name else f"node {n}"


def _joint_names(doc: _Document, order: list[int]) -> tuple[str, ...]:
    used: set[str] = set()
    names = []
    for n in order:
        raw = doc.g.nodes[n].name or ""
        base = "_".join(raw.split()) or f"node{n}"
        name, k = base, 1
        if name in used:
            name = f"{base}_{n}"
        while name in used:
            k += 1
            name = f"{base}_{n}_{k}"
        used.add(name)
        names.append(name)
    return tuple(names)


def _build_rig(doc: _Document, skin: int | None = None, rest: str = "nodes") -> _Rig:
    if rest not in ("nodes", "bind"):
        raise GLTFError(f"rest must be 'nodes' or 'bind', got {rest!r}", path=doc.label)
    g = doc.g
    nodes = g.nodes or []
    count = len(nodes)
    if count == 0:
        raise doc.error("the document has no nodes, so no skeleton")
    parent = [-1] * count
    for i, nd in enumerate(nodes):
        for c in nd.children or []:
            if not isinstance(c, int) or not 0 <= c < count:
                raise doc.error(f"{_display(nd, i)} lists child {c}, which does not exist")
            if parent[c] != -1 or c == i:
                raise doc.error(f"node {c} has more than one parent (nodes {parent[c]} and {i}); the node "
                                "hierarchy must be a set of trees (specification 3.5.2)")
            parent[c] = i
    reached = [i for i in range(count) if parent[i] < 0]
    for i in reached:  # grows while it is walked: every node below a root
        reached.extend(nodes[i].children or [])
    if len(reached) < count:
        stuck = min(set(range(count)) - set(reached))
        raise doc.error(f"the node hierarchy has a cycle through node {stuck} (specification 3.5.2: the "
                        "hierarchy must be a set of trees)")

    def up_chain(i: int) -> list[int]:
        out = [i]
        while parent[out[-1]] >= 0:
            out.append(parent[out[-1]])
            if len(out) > count:
                raise doc.error(f"the node hierarchy has a cycle through node {i}")
        return out

    skins = g.skins or []
    skin_ids: list[int] = []
    if skins:
        if skin is None:
            skin_ids = list(range(len(skins)))
        elif not isinstance(skin, int) or not 0 <= skin < len(skins):
            raise doc.error(f"skin {skin} does not exist (the file has {len(skins)})")
        else:
            skin_ids = [skin]
        joints: list[int] = []
        for k in skin_ids:
            js = skins[k].joints or []
            if not js:
                raise doc.error(f"skin {k} lists no joints")
            for j in js:
                if not isinstance(j, int) or not 0 <= j < count:
                    raise doc.error(f"skin {k} lists joint node {j}, which does not exist")
                if j not in joints:
                    joints.append(j)
    else:
        if skin is not None:
            raise doc.error(f"skin {skin} does not exist (the file has no skins)")
        joints = _unskinned_joints(doc, parent)

    chains = {j: up_chain(j) for j in joints}
    common = set(chains[joints[0]])
    for j in joints[1:]:
        common &= set(chains[j])
    if not common:
        raise doc.error("the skin joints have no common root node (specification 3.7.3.2)"
                        + ("; read one skin at a time with skin=<index>" if len(skin_ids) > 1 else ""))
    root = next(n for n in chains[joints[0]] if n in common)
    members: set[int] = set()
    for j in joints:
        for n in chains[j]:
            members.add(n)
            if n == root:
                break
    order: list[int] = []
    stack = [root]
    while stack:
        n = stack.pop()
        order.append(n)
        stack.extend(reversed([c for c in nodes[n].children or [] if c in members]))
    index = {n: k for k, n in enumerate(order)}
    parents = np.array([-1] + [index[parent[n]] for n in order[1:]], dtype=np.int64)

    above = _IDENTITY
    for n in reversed(up_chain(root)[1:]):
        above = above.then(doc.node_transform(n))
    local = [doc.node_transform(n) for n in order]
    world: list[_Xf] = []
    for k, xf in enumerate(local):
        world.append((above if parents[k] < 0 else world[parents[k]]).then(xf))
    size = _extent(np.array([w.t for w in world]))

    _check_bind(doc, skin_ids, world, index, size)
    node_rot, node_off = _local_from_world(world, parents)
    parent_scale = np.array([above.s if p < 0 else world[p].s for p in parents])
    if rest == "bind":
        world = _bind_world(doc, skin_ids, world, index)
    rest_rot, offsets = _local_from_world(world, parents)

    tips = np.full((len(order), 3), np.nan)
    for k, n in enumerate(order):
        if any(parents == k):
            continue
        for c in nodes[n].children or []:
            cn = nodes[c]
            if c in members or cn.mesh is not None or cn.camera is not None or cn.skin is not None:
                continue
            t = doc.node_transform(c).t * world[k].s
            if np.linalg.norm(t) > 1e-9 * max(size, 1e-9):
                tips[k] = t
                break
    skeleton = Skeleton(_joint_names(doc, order), parents, offsets, rest_rot, tips, None, doc.label)
    return _Rig(skeleton, order, above, local, node_rot, node_off, parent_scale, size)


def _extent(pos: np.ndarray) -> float:
    ext = float(np.max(pos.max(axis=0) - pos.min(axis=0))) if len(pos) else 0.0
    return ext if ext > 0 else 1.0


def _local_from_world(world: list[_Xf], parents: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rest rotations (J, 4) and offsets (J, 3) of a skeleton whose joints sit at these world poses:
    offsets are in the parent's rotated (unscaled) frame, so scales fold into them."""
    rot = np.empty((len(world), 4))
    off = np.empty((len(world), 3))
    for k, w in enumerate(world):
        p = parents[k]
        if p < 0:
            rot[k], off[k] = w.q, w.t
        else:
            inv = quat.conjugate(world[p].q)
            rot[k] = quat.multiply(inv, w.q)
            off[k] = quat.rotate(inv, w.t - world[p].t)
    return quat.normalize(rot), off


def _unskinned_joints(doc: _Document, parent: list[int]) -> list[int]:
    """No skin: the largest tree of plain nodes (no mesh, camera) hanging from one root node."""
    nodes = doc.g.nodes
    best: list[int] = []
    for r in [i for i in range(len(nodes)) if parent[i] < 0]:
        if nodes[r].mesh is not None or nodes[r].camera is not None:
            continue
        tree, stack = [], [r]
        while stack:
            n = stack.pop()
            tree.append(n)
            stack.extend(c for c in reversed(nodes[n].children or [])
                         if nodes[c].mesh is None and nodes[c].camera is None)
        if len(tree) > len(best):
            best = tree
    if not best:
        raise doc.error("no skin and no node tree to read as a skeleton")
    return best


def _inverse_binds(doc: _Document, k: int) -> np.ndarray | None:
    """(N, 4, 4) inverse bind matrices of skin k, or None when the skin has none."""
    sk = doc.g.skins[k]
    if sk.inverseBindMatrices is None:
        return None
    where = f"skin {k} inverseBindMatrices"
    acc = doc.g.accessors[sk.inverseBindMatrices] if isinstance(sk.inverseBindMatrices, int) and \
        0 <= sk.inverseBindMatrices < len(doc.g.accessors or []) else None
    if acc is None or acc.type != "MAT4" or acc.componentType != FLOAT:
        raise doc.error(f"{where}: expected an accessor of MAT4 floats (specification 3.7.3.1)")
    m = doc.accessor(sk.inverseBindMatrices, where).reshape(-1, 4, 4).transpose(0, 2, 1)
    if len(m) < len(sk.joints):
        raise doc.error(f"{where}: {len(m)} matrices for {len(sk.joints)} joints")
    return m


def _check_bind(doc: _Document, skin_ids: list[int], world: list[_Xf], index: dict[int, int],
                size: float) -> None:
    """Warn when inverse bind matrices disagree with the node rest pose (they should invert each joint's
    global transform when the node pose is the bind pose)."""
    bad: list[tuple[int, str]] = []
    total = 0
    deltas = []
    for k in skin_ids:
        ibm = _inverse_binds(doc, k)
        if ibm is None:
            continue
        for i, n in enumerate(doc.g.skins[k].joints):
            d = world[index[n]].matrix() @ ibm[i]
            deltas.append(d)
            total += 1
            pos = float(np.abs(d[:3, 3]).max()) / size
            axis = float(np.abs(d[:3, :3] - np.eye(3)).max())
            if pos > _BIND_POS_TOL or axis > _BIND_AXIS_TOL:
                bad.append((index[n], f"{_display(doc.g.nodes[n], n)} (position off by {pos * size:.4g} "
                                      f"units, axes by {axis:.3g})"))
    if not bad:
        return
    bad = sorted(set(bad))  # hierarchy order: the first one listed is where the difference starts
    listed = ", ".join(b[1] for b in bad[:4]) + (f" and {len(bad) - 4} more" if len(bad) > 4 else "")
    common = all(np.abs(d - deltas[0]).max() < 1e-4 * max(1.0, np.abs(deltas[0]).max()) for d in deltas)
    how = (" (they agree with it up to one common transform, so the mesh was bound in another space)"
           if common else "")
    warnings.warn(GLTFWarning(
        f"{doc.label}: inverse bind matrices disagree with the node rest pose at {len(bad)} of {total} "
        f"joints{how}: {listed}. The node rest pose (node TRS) is used as the rest pose; "
        "read with rest='bind' to use the bind pose instead."), stacklevel=4)


def _bind_world(doc: _Document, skin_ids: list[int], world: list[_Xf], index: dict[int, int]) -> list[_Xf]:
    out = list(world)
    found = False
    for k in skin_ids:
        ibm = _inverse_binds(doc, k)
        if ibm is None:
            continue
        found = True
        for i, n in enumerate(doc.g.skins[k].joints):
            out[index[n]] = _decompose(np.linalg.inv(ibm[i]), f"skin {k} bind pose of joint node {n}",
                                       doc.label)
    if not found:
        raise doc.error("rest='bind' needs inverse bind matrices, and no skin has them")
    return out


# ----- reading animations ---------------------------------------------------------------------------

def _animation_index(doc: _Document, animation) -> int | None:
    anims = doc.g.animations or []
    if animation is False:
        return None
    if animation is None:
        return 0 if anims else None
    if isinstance(animation, bool):
        raise doc.error("animation must be None, False, an index or a name")
    if isinstance(animation, int):
        if not 0 <= animation < len(anims):
            raise doc.error(f"animation {animation} does not exist (the file has {len(anims)})")
        return animation
    names = [a.name for a in anims]
    if animation not in names:
        raise doc.error(f"no animation named {animation!r}; the file has {_names_text(names)}")
    return names.index(animation)


def _names_text(names: list) -> str:
    return ", ".join(repr(n) if n else f"animation{i}" for i, n in enumerate(names)) or "none"


def _sample(times: np.ndarray, values: np.ndarray, interp: str, t: np.ndarray, rotation: bool) -> np.ndarray:
    """Sampler output at times t (F,), as Appendix C of the specification defines it; (F, k)."""
    n = len(times)
    if interp == "CUBICSPLINE":
        trip = values.reshape(n, 3, -1)
        a, v, b = trip[:, 0], trip[:, 1], trip[:, 2]
    else:
        v = values
    if n == 1:
        out = np.broadcast_to(v[0], (len(t), v.shape[1])).copy()
        return quat.normalize(out) if rotation else out
    # A requested time that is a key time up to float32 storage takes the key's value as-is (Appendix C).
    near = np.clip(np.searchsorted(times, t), 1, n - 1)
    near = np.where(np.abs(times[near - 1] - t) < np.abs(times[near] - t), near - 1, near)
    t = np.where(np.abs(times[near] - t) <= 2 * np.finfo(np.float32).eps * np.abs(t), times[near], t)
    k = np.clip(np.searchsorted(times, t, side="right") - 1, 0, n - 2)
    td = times[k + 1] - times[k]
    u = np.clip((t - times[k]) / td, 0.0, 1.0)
    if interp == "STEP":
        out = np.where((t >= times[-1])[:, None], v[-1], v[k])
    elif interp == "LINEAR":
        out = quat.slerp(v[k], v[k + 1], u) if rotation else (1 - u)[:, None] * v[k] + u[:, None] * v[k + 1]
    else:
        u2, u3 = u * u, u * u * u
        out = ((2 * u3 - 3 * u2 + 1)[:, None] * v[k] + (td * (u3 - 2 * u2 + u))[:, None] * b[k]
               + (-2 * u3 + 3 * u2)[:, None] * v[k + 1] + (td * (u3 - u2))[:, None] * a[k + 1])
    return quat.normalize(out) if rotation else out


def _frame_rate(inputs: list[np.ndarray], stated) -> float:
    """The keys' own rate when they are evenly spaced (the rate we state in the animation's extras when
    it agrees, else the nearest whole number when within 1e-4), the stated rate when the keys cannot
    tell (one key), else 30."""
    stated = float(stated) if isinstance(stated, (int, float)) and np.isfinite(stated) and stated > 0 else None
    longest = max(inputs, key=len, default=np.zeros(1))
    if len(longest) < 2:
        return stated or _DEFAULT_FPS
    steps = np.diff(longest)
    mean = (longest[-1] - longest[0]) / (len(longest) - 1)
    if np.abs(steps - mean).max() > 1e-3 * mean + 1e-5:
        return _DEFAULT_FPS
    fps = 1.0 / mean
    if stated is not None and abs(stated - fps) < 1e-4 * fps:
        return stated
    return float(round(fps)) if abs(fps - round(fps)) < 1e-4 * fps else float(fps)


def _read_animation(doc: _Document, rig: _Rig, ai: int, fps: float | None) -> Motion:
    anim = doc.g.animations[ai]
    label = f"animation {ai}" + (f" ({anim.name!r})" if anim.name else "")
    joint_of = {n: k for k, n in enumerate(rig.nodes)}
    samplers = anim.samplers or []
    chans: dict[tuple[int, str], tuple[np.ndarray, np.ndarray, str]] = {}
    for ci, ch in enumerate(anim.channels or []):
        node, path = _field(ch.target, "node"), _field(ch.target, "path")
        if node is None or node not in joint_of or path not in ("translation", "rotation", "scale"):
            continue
        where = f"{label} channel {ci}"
        if not isinstance(ch.sampler, int) or not 0 <= ch.sampler < len(samplers):
            raise doc.error(f"{where}: sampler {ch.sampler} does not exist")
        smp = samplers[ch.sampler]
        interp = smp.interpolation or "LINEAR"
        if interp not in _INTERPOLATIONS:
            raise doc.error(f"{where}: interpolation {interp!r}, expected one of {', '.join(_INTERPOLATIONS)}")
        times = doc.accessor(smp.input, f"{where} input")
        if times.shape[1] != 1:
            raise doc.error(f"{where} input: accessor {smp.input} must be SCALAR times")
        times = times[:, 0]
        if times[0] < 0 or np.any(np.diff(times) <= 0):
            raise doc.error(f"{where} input: accessor {smp.input} times must be >= 0 and increase strictly")
        values = doc.accessor(smp.output, f"{where} output")
        width = 4 if path == "rotation" else 3
        rows = len(times) * (3 if interp == "CUBICSPLINE" else 1)
        if values.shape != (rows, width):
            raise doc.error(f"{where} output: accessor {smp.output} has {values.shape[0]} x {values.shape[1]}"
                            f" values, expected {rows} x {width} for {len(times)} {interp} keys of {path}")
        key = (joint_of[node], path)
        if key in chans:
            raise doc.error(f"{where}: node {node} {path} is animated twice in one animation")
        chans[key] = (times, values, interp)
    sk = rig.skeleton
    j = sk.num_joints
    if fps is None:
        fps = _frame_rate([c[0] for c in chans.values()], _field(anim.extras, _FPS_KEY))
    if not (np.isfinite(fps) and fps > 0):
        raise doc.error(f"frame rate must be a positive number, got {fps}")
    end = max((c[0][-1] for c in chans.values()), default=0.0)
    frames = int(np.ceil(end * fps - 1e-3)) + 1
    t = np.arange(frames) / fps
    rot = np.empty((frames, j, 4))
    trans = np.empty((frames, j, 3))
    for k in range(j):
        local = rig.local[k]
        q = np.broadcast_to(local.q, (frames, 4))
        tr = np.broadcast_to(local.t, (frames, 3))
        if (k, "rotation") in chans:
            q = _sample(*chans[(k, "rotation")], t, rotation=True)
        if (k, "translation") in chans:
            tr = _sample(*chans[(k, "translation")], t, rotation=False)
        if (k, "scale") in chans:
            sc = _sample(*chans[(k, "scale")], t, rotation=False)
            if np.abs(sc - local.s).max() > _SCALE_TOL * max(local.s, 1e-12):
                raise doc.error(f"{label}: {_display(doc.g.nodes[rig.nodes[k]], rig.nodes[k])} animates "
                                "scale away from its rest value; animated scale is not supported")
        if k == 0:
            a = rig.above
            rot[:, 0] = quat.multiply(a.q, q)
            trans[:, 0] = a.t + a.s * quat.rotate(a.q, tr)
        else:
            rot[:, k] = q
            trans[:, k] = tr * rig.parent_scale[k]
    extra = np.abs(trans[:, 1:] - sk.offsets[1:]).max() if j > 1 else 0.0
    translations = trans if extra > 1e-5 * rig.size else None
    return Motion(sk, rot, trans[:, 0], fps, translations, source=doc.label)


def read_gltf(path: str | os.PathLike, animation: int | str | None | bool = None, fps: float | None = None,
              rest: str = "nodes", skin: int | None = None) -> Motion:
    """Read a glTF 2.0 rig (.gltf or .glb) as a Motion on its Skeleton.

    animation: None reads the file's first animation, or the node rest pose (one frame) when it has
        none; an index or a name picks one; False ignores animations.
    fps: frame rate at which the animation is sampled; default: the keys' own rate when they are evenly
        spaced, else 30.
    rest: "nodes" takes the node rest pose (node TRS) as the skeleton's rest pose; "bind" takes the
        pose the inverse bind matrices describe.
    skin: the skin whose joints form the skeleton; default: all skins (their joints must share a root).

    The skeleton's rest_rotations are the joints' rest rotations (bone-aligned axes stay as they are);
    Motion.rotations are full local rotations. Inverse bind matrices that disagree with the node rest
    pose raise a GLTFWarning through Python's warnings. Bad files raise GLTFError naming the file and
    the node, skin, accessor or animation.
    """
    doc = _Document(path)
    rig = _build_rig(doc, skin, rest)
    ai = _animation_index(doc, animation)
    if ai is None:
        sk = rig.skeleton
        translations = None
        if np.abs(rig.node_offsets[1:] - sk.offsets[1:]).max(initial=0.0) > 1e-5 * rig.size:
            translations = rig.node_offsets[None]
        return Motion(sk, rig.node_rotations[None], rig.node_offsets[None, 0], fps or _DEFAULT_FPS,
                      translations, source=doc.label)
    return _read_animation(doc, rig, ai, fps)


def list_animations(path: str | os.PathLike) -> list[str]:
    """Names of a glTF file's animations in file order ("animation<i>" for unnamed ones)."""
    doc = _Document(path)
    return [a.name or f"animation{i}" for i, a in enumerate(doc.g.animations or [])]


# ----- writing ---------------------------------------------------------------------------------------

class _Blob:
    """The output's single binary buffer, with the bufferViews and accessors that point into it."""

    def __init__(self, doc: dict, data: bytes | bytearray = b""):
        self.doc = doc
        self.data = bytearray(data)

    def view(self, raw: bytes, target: int | None = None) -> int:
        self.data.extend(b"\0" * (-len(self.data) % 4))
        bv = {"buffer": 0, "byteOffset": len(self.data), "byteLength": len(raw)}
        if target is not None:
            bv["target"] = target
        self.data.extend(raw)
        views = self.doc.setdefault("bufferViews", [])
        views.append(bv)
        return len(views) - 1

    def accessor(self, values: np.ndarray, ctype: int, atype: str, target: int | None = None,
                 bounds: bool = True) -> int:
        dt = np.dtype(_COMPONENT[ctype]).newbyteorder("<")
        arr = np.ascontiguousarray(np.asarray(values).reshape(len(values), -1), dtype=dt)
        if arr.shape[1] != _NCOMP[atype]:
            raise ValueError(f"{atype} accessor needs {_NCOMP[atype]} components, got {arr.shape[1]}")
        acc = {"bufferView": self.view(arr.tobytes(), target), "componentType": ctype,
               "count": int(arr.shape[0]), "type": atype}
        if bounds:
            cast = float if ctype == FLOAT else int
            acc["min"] = [cast(v) for v in arr.min(axis=0)]
            acc["max"] = [cast(v) for v in arr.max(axis=0)]
        accs = self.doc.setdefault("accessors", [])
        accs.append(acc)
        return len(accs) - 1


@dataclass
class _Targets:
    """Where each joint of the motions lands in the output document."""
    names: tuple[str, ...]
    parents: np.ndarray
    nodes: list[int]
    above: _Xf
    node_t: np.ndarray          # (J, 3) node rest translations, file values
    parent_scale: np.ndarray    # (J,)
    size: float


def _clip_list(motions) -> list[tuple[str, Motion]]:
    if isinstance(motions, Motion):
        name = Path(motions.source).stem if motions.source else "clip"
        return [(name, motions)]
    out = []
    for item in motions:
        if isinstance(item, Motion):
            item = (Path(item.source).stem if item.source else f"clip{len(out)}", item)
        name, m = item
        if not isinstance(m, Motion):
            raise TypeError("motions must be a Motion or a sequence of (name, Motion)")
        out.append((str(name), m))
    return out


def _gltf_space_convention(skeleton: Skeleton, motion: Motion | None, convention):
    """The convention to convert from: given, or detected (up always; forward when names or geometry
    say it; units when the height fits one unit), so the output is +Y up, +Z forward, metres."""
    from ..convention import Convention, detect_convention

    if convention is not None:
        return convention
    try:
        conv = detect_convention(skeleton, motion)
    except RetargetError:
        return Convention()
    up = conv.up_vector
    if conv.forward_evidence == "none":
        # No evidence of facing: turn up onto +Y along the shortest arc and keep the rest.
        r0 = quat.to_matrix(quat.between_vectors(up, np.array([0.0, 1.0, 0.0])))
        fw = r0.T @ np.array([0.0, 0.0, 1.0])
        k = int(np.argmax(np.abs(fw)))
        conv = Convention(conv.up, ("+" if fw[k] > 0 else "-") + "XYZ"[k], conv.metres_per_unit, conv.units)
    if conv.metres_per_unit is None:
        conv = Convention(conv.up, conv.forward, 1.0, "m")
    return conv


def _convert_skeleton(sk: Skeleton, qr: np.ndarray, s: float) -> Skeleton:
    offsets = sk.offsets * s
    offsets[0] = s * quat.rotate(qr, sk.offsets[0])
    rest = np.array(sk.rest_rotations)
    rest[0] = quat.multiply(qr, rest[0])
    return Skeleton(sk.names, sk.parents, offsets, rest, sk.tips * s, sk.channels, sk.source)


def _convert_motion(m: Motion, sk: Skeleton, qr: np.ndarray, s: float) -> Motion:
    rot = np.array(m.rotations)
    rot[:, 0] = quat.multiply(qr, rot[:, 0])
    root = s * quat.rotate(qr, m.root_positions)
    tr = None if m.translations is None else np.array(m.translations) * s
    if tr is not None:
        tr[:, 0] = root
    return Motion(sk, rot, root, m.fps, tr, source=m.source)


def _to_gltf_space(skeleton: Skeleton, clips: list[tuple[str, Motion]], convention):
    conv = _gltf_space_convention(skeleton, clips[0][1] if clips else None, convention)
    r = conv.file_to_canonical()
    s = float(conv.metres_per_unit or 1.0)
    if np.allclose(r, np.eye(3)) and s == 1.0:
        return skeleton, clips
    qr = quat.from_matrix(r)
    sk = _convert_skeleton(skeleton, qr, s)
    return sk, [(name, _convert_motion(m, sk, qr, s)) for name, m in clips]


def _rig_document(sk: Skeleton, mesh: bool) -> tuple[dict, _Blob, _Targets]:
    """A document holding a skeleton as nodes and a skin (and a box mesh bound to it when asked)."""
    doc: dict = {"asset": {"version": "2.0", "generator": "retarget"}, "scene": 0}
    blob = _Blob(doc)
    nodes = []
    for j, name in enumerate(sk.names):
        node: dict = {"name": name}
        if np.any(sk.offsets[j] != 0):
            node["translation"] = [float(v) for v in sk.offsets[j]]
        q = quat.normalize(sk.rest_rotations[j])
        if np.abs(q - quat.identity()).max() > 0:
            node["rotation"] = [float(v) for v in q]
        if sk.children[j]:
            node["children"] = [int(c) for c in sk.children[j]]
        nodes.append(node)
    for j in range(len(sk)):  # end sites as plain (non-joint) child nodes of their leaf joints
        if not np.isnan(sk.tips[j]).any():
            nodes[j].setdefault("children", []).append(len(nodes))
            nodes.append({"name": f"{sk.names[j]}_end", "translation": [float(v) for v in sk.tips[j]]})
    rot, pos = sk.rest_global
    m = np.zeros((len(sk), 4, 4))
    rt = np.swapaxes(quat.to_matrix(rot), -1, -2)
    m[:, :3, :3] = rt
    m[:, :3, 3] = -np.einsum("jab,jb->ja", rt, pos)
    m[:, 3, 3] = 1.0
    ibm = blob.accessor(m.transpose(0, 2, 1).reshape(len(sk), 16), FLOAT, "MAT4", bounds=False)
    doc["skins"] = [{"name": "skeleton", "joints": list(range(len(sk))), "inverseBindMatrices": ibm,
                     "skeleton": 0}]
    scene_nodes = [0]
    if mesh:
        from .gltf_rig import box_mesh

        body = box_mesh(sk)
        attrs = {"POSITION": blob.accessor(body.positions, FLOAT, "VEC3", ARRAY_BUFFER),
                 "NORMAL": blob.accessor(body.normals, FLOAT, "VEC3", ARRAY_BUFFER),
                 "JOINTS_0": blob.accessor(body.joints, UBYTE if len(sk) < 256 else USHORT, "VEC4",
                                           ARRAY_BUFFER, bounds=False),
                 "WEIGHTS_0": blob.accessor(body.weights, FLOAT, "VEC4", ARRAY_BUFFER, bounds=False)}
        index_type = USHORT if len(body.positions) < 65536 else UINT
        indices = blob.accessor(body.indices, index_type, "SCALAR", ELEMENT_ARRAY_BUFFER)
        doc["materials"] = [{"name": "body_grey", "pbrMetallicRoughness": {
            "baseColorFactor": [0.62, 0.64, 0.68, 1.0], "metallicFactor": 0.0, "roughnessFactor": 0.85}}]
        doc["meshes"] = [{"name": "body", "primitives": [
            {"attributes": attrs, "indices": indices, "material": 0, "mode": 4}]}]
        nodes.append({"name": "body", "mesh": 0, "skin": 0})
        scene_nodes.append(len(nodes) - 1)
    doc["nodes"] = nodes
    doc["scenes"] = [{"name": "rig", "nodes": scene_nodes}]
    targets = _Targets(sk.names, sk.parents, list(range(len(sk))), _IDENTITY, np.array(sk.offsets),
                       np.ones(len(sk)), _extent(pos))
    return doc, blob, targets


def _image_mime(data: bytes, uri: str) -> str:
    if data[:8] == b"\x89PNG\r\n\x1a\n":
        return "image/png"
    if data[:3] == b"\xff\xd8\xff":
        return "image/jpeg"
    return {"png": "image/png", "jpg": "image/jpeg", "jpeg": "image/jpeg", "webp": "image/webp",
            "ktx2": "image/ktx2"}.get(uri.rsplit(".", 1)[-1].lower(), "application/octet-stream")


def _template_document(template: str | os.PathLike) -> tuple[dict, _Blob, _Targets]:
    """A copy of the template's JSON with one merged buffer and no animations, and its rig's targets."""
    src = _Document(template)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", GLTFWarning)
        rig = _build_rig(src)
    doc = src.raw_json()
    data = bytearray()
    starts = []
    for i, b in enumerate(doc.get("buffers", [])):
        data.extend(b"\0" * (-len(data) % 16))
        starts.append(len(data))
        data.extend(src.buffer(i, "template")[: int(b.get("byteLength", 0))])
    for bv in doc.get("bufferViews", []):
        bv["byteOffset"] = int(bv.get("byteOffset", 0)) + starts[int(bv["buffer"])]
        bv["buffer"] = 0
    blob = _Blob(doc, data)
    for i, im in enumerate(doc.get("images", [])):
        uri = im.get("uri")
        if uri and not uri.startswith("data:"):
            f = src.path.parent / unquote(uri)
            if not f.is_file():
                raise src.error(f"image {i}: file {uri!r} not found next to the document")
            raw = f.read_bytes()
            im.pop("uri")
            im["bufferView"] = blob.view(raw)
            im["mimeType"] = im.get("mimeType") or _image_mime(raw, uri)
    doc.pop("animations", None)
    doc.pop("buffers", None)
    doc.setdefault("asset", {})["generator"] = "retarget"
    sk = rig.skeleton
    targets = _Targets(sk.names, sk.parents, list(rig.nodes), rig.above,
                       np.array([xf.t for xf in rig.local]), rig.parent_scale, rig.size)
    return doc, blob, targets


def _add_animation(blob: _Blob, name: str, motion: Motion, tg: _Targets, where: str) -> None:
    sk = motion.skeleton
    f = motion.num_frames
    if f < 1:
        raise GLTFError(f"clip {name!r} has no frames", path=where)
    index = {n: k for k, n in enumerate(tg.names)}
    for j, n in enumerate(sk.names):
        if n not in index:
            raise GLTFError(f"clip {name!r}: joint {n!r} is not a joint of the rig", path=where)
        p = sk.parents[j]
        want = tg.parents[index[n]]
        got = -1 if p < 0 else index[sk.names[p]]
        if want != got:
            have = "none" if want < 0 else repr(tg.names[want])
            raise GLTFError(f"clip {name!r}: joint {n!r} has parent "
                            f"{'none' if p < 0 else repr(sk.names[p])} in the clip but {have} in the rig",
                            path=where)
    times = (np.arange(f) / motion.fps).astype(np.float32)
    t_in = blob.accessor(times, FLOAT, "SCALAR")
    channels, samplers = [], []
    trans = motion.local_translations()
    a = tg.above
    inv_a = quat.conjugate(a.q)

    def channel(values: np.ndarray, atype: str, node: int, path: str) -> None:
        samplers.append({"input": t_in, "output": blob.accessor(values, FLOAT, atype), "interpolation": "LINEAR"})
        channels.append({"sampler": len(samplers) - 1, "target": {"node": node, "path": path}})

    for j, n in enumerate(sk.names):
        k = index[n]
        q = motion.rotations[:, j]
        t = trans[:, j]
        if k == 0:
            q = quat.multiply(inv_a, q)
            t = quat.rotate(inv_a, t - a.t) / a.s
        else:
            t = t / tg.parent_scale[k]
        channel(quat.make_continuous(quat.normalize(q), axis=0), "VEC4", tg.nodes[k], "rotation")
        if k == 0 or np.abs(t - tg.node_t[k]).max() > 1e-6 * tg.size:
            channel(t, "VEC3", tg.nodes[k], "translation")
    blob.doc.setdefault("animations", []).append({"name": name, "channels": channels, "samplers": samplers,
                                                  "extras": {_FPS_KEY: motion.fps}})


def _encode(path: Path, doc: dict, blob: _Blob) -> bytes:
    data = bytes(blob.data) + b"\0" * (-len(blob.data) % 4)
    if path.suffix.lower() == ".glb":
        if data:
            doc["buffers"] = [{"byteLength": len(data)}]
        text = json.dumps(doc, separators=(",", ":"), ensure_ascii=False).encode("utf-8")
        text += b" " * (-len(text) % 4)
        out = [struct.pack("<II", len(text), _GLB_JSON), text]
        if data:
            out += [struct.pack("<II", len(data), _GLB_BIN), data]
        body = b"".join(out)
        return struct.pack("<III", _GLB_MAGIC, 2, 12 + len(body)) + body
    if data:
        doc["buffers"] = [{"byteLength": len(data),
                           "uri": "data:application/octet-stream;base64," + base64.b64encode(data).decode()}]
    return json.dumps(doc, indent=1, ensure_ascii=False).encode("utf-8")


def _check_out(path: str | os.PathLike) -> Path:
    out = Path(path)
    if out.suffix.lower() not in GLTF_EXTENSIONS:
        raise GLTFError(f"output must end in .gltf or .glb, got {out.suffix or '(none)'!r}", path=str(out))
    return out


def write_gltf(path: str | os.PathLike, motions: Motion | Sequence[tuple[str, Motion]],
               template: str | os.PathLike | None = None, *, convention=None, mesh: bool = False) -> Path:
    """Write clips as named glTF animations, atomically; .glb is binary, .gltf embeds its buffer.

    motions: one Motion (named after its source file) or a sequence of (name, Motion), all on the same
        skeleton (same joint names and parents).
    template: a .gltf/.glb rig whose meshes, skins, materials and scenes are copied; the clips' joints
        are matched to its joints by name (names as read_gltf gives them) and must keep its hierarchy.
        The template's own animations are not copied. Without a template the file holds the skeleton
        as nodes with a skin (and, with mesh=True, a box per bone bound to it).
    convention: without a template, the Convention of the clips' space, converted into glTF's +Y up,
        +Z forward, metres; None detects it (see DEVELOPERS.md). Ignored with a template: the clips are
        taken to be on the template's rig, in its space.

    Each clip: one time accessor (seconds, min/max set), a LINEAR rotation channel per joint (unit
    quaternions x, y, z, w, signs continuous from frame to frame), a translation channel for the root
    and for any joint whose translation leaves its rest value.
    """
    out = _check_out(path)
    clips = _clip_list(motions)
    if not clips:
        raise GLTFError("nothing to write: no clips given", path=str(out))
    names = [n for n, _ in clips]
    if len(set(names)) != len(names):
        raise GLTFError(f"clip names must be unique, got {names}", path=str(out))
    first = clips[0][1].skeleton
    for name, m in clips[1:]:
        if m.skeleton.names != first.names or not np.array_equal(m.skeleton.parents, first.parents):
            raise GLTFError(f"clip {name!r} is on another skeleton than clip {names[0]!r}", path=str(out))
    if template is not None:
        doc, blob, targets = _template_document(template)
    else:
        sk, clips = _to_gltf_space(first, clips, convention)
        doc, blob, targets = _rig_document(sk, mesh)
    for name, m in clips:
        _add_animation(blob, name, m, targets, str(out))
    return atomic_write(out, _encode(out, doc, blob))


def write_gltf_rig(path: str | os.PathLike, skeleton: Skeleton, *, mesh: bool = True, convention=None) -> Path:
    """Write a skeleton as a glTF rig without animations: joint nodes, a skin, and with mesh=True a
    simple skinned body (one box per bone). convention as in write_gltf."""
    out = _check_out(path)
    sk, _ = _to_gltf_space(skeleton, [], convention)
    doc, blob, _ = _rig_document(sk, mesh)
    return atomic_write(out, _encode(out, doc, blob))
