"""BVH reading and writing.

The HIERARCHY block is parsed as text, line by line, so every error can name its line. The MOTION block
is parsed by one numpy call. Channel semantics follow the format as commonly documented: rotation channels
compose intrinsically in the order listed (R = R_first @ R_second @ R_third), position channels replace
the joint's OFFSET (they are not added to it), angles are in degrees.
"""

from __future__ import annotations

import io
import os
import re
import warnings
from pathlib import Path

import numpy as np

from .. import quat
from ..errors import BVHError
from ..motion import Motion
from ..skeleton import POSITION_CHANNELS, ROTATION_CHANNELS, Skeleton
from .atomic import atomic_write

__all__ = ["read_bvh", "read_bvh_skeleton", "write_bvh", "format_bvh", "parse_bvh"]

_VALID_CHANNELS = set(POSITION_CHANNELS) | set(ROTATION_CHANNELS)


def _number(tok: str, path: str, line: int, what: str) -> float:
    try:
        value = float(tok)
    except ValueError:
        raise BVHError(f"{what}: expected a number, found {tok!r}", path=path, line=line) from None
    if not np.isfinite(value):
        raise BVHError(f"{what}: value {tok!r} is not finite", path=path, line=line)
    return value


class _Hierarchy:
    def __init__(self) -> None:
        self.names: list[str] = []
        self.parents: list[int] = []
        self.offsets: list[list[float]] = []
        self.channels: list[tuple[str, ...]] = []
        self.tips: list[list[float] | None] = []


def _parse_hierarchy(lines: list[str], path: str) -> tuple[_Hierarchy, int]:
    """Parse from 'HIERARCHY' to 'MOTION'. Returns the hierarchy and the index of the MOTION line."""
    h = _Hierarchy()
    i = 0
    n = len(lines)
    while i < n and not lines[i].strip():
        i += 1
    if i >= n:
        raise BVHError("empty file: expected 'HIERARCHY'", path=path)
    if lines[i].split()[0].upper() != "HIERARCHY":
        raise BVHError(f"not a BVH file: expected 'HIERARCHY', found {lines[i].strip()[:40]!r}",
                       path=path, line=i + 1)
    i += 1
    stack: list[int] = []       # open joints; -2 marks an End Site block
    pending: int | None = None  # joint (or -2) declared, waiting for '{'
    pending_line = 0
    roots = 0
    while i < n:
        raw = lines[i]
        toks = raw.split()
        lineno = i + 1
        i += 1
        if not toks:
            continue
        key = toks[0]
        ukey = key.upper()
        # A '{' may follow a keyword on the same line ("JOINT Hips {").
        if ukey in ("ROOT", "JOINT"):
            if pending is not None:
                raise BVHError("expected '{' after the previous joint", path=path, line=lineno)
            if ukey == "ROOT":
                if stack:
                    raise BVHError("ROOT inside another joint: unbalanced braces", path=path, line=lineno)
                roots += 1
                if roots > 1:
                    raise BVHError("a second ROOT: only one skeleton per file is supported", path=path,
                                   line=lineno)
            elif not stack or stack[-1] < 0:
                raise BVHError("JOINT outside a joint block: unbalanced braces", path=path, line=lineno)
            rest = [t for t in toks[1:] if t != "{"]
            if not rest:
                raise BVHError(f"{key} without a name", path=path, line=lineno)
            name = " ".join(rest)
            if name in h.names:
                raise BVHError(f"duplicate joint name {name!r}", path=path, line=lineno)
            h.names.append(name)
            h.parents.append(stack[-1] if stack else -1)
            h.offsets.append([0.0, 0.0, 0.0])
            h.channels.append(())
            h.tips.append(None)
            pending, pending_line = len(h.names) - 1, lineno
            if toks[-1] == "{":
                stack.append(pending)
                pending = None
        elif ukey == "END":
            if not stack or stack[-1] < 0:
                raise BVHError("End Site outside a joint block: unbalanced braces", path=path, line=lineno)
            if pending is not None:
                raise BVHError("expected '{' after the previous joint", path=path, line=lineno)
            pending, pending_line = -2, lineno
            if toks[-1] == "{":
                stack.append(-2)
                pending = None
        elif key == "{":
            if pending is None:
                raise BVHError("'{' without a ROOT, JOINT or End Site before it", path=path, line=lineno)
            stack.append(pending)
            pending = None
        elif key == "}":
            if pending is not None:
                raise BVHError("'}' where '{' was expected", path=path, line=lineno)
            if not stack:
                raise BVHError("unbalanced braces: '}' with no open block", path=path, line=lineno)
            stack.pop()
        elif ukey == "OFFSET":
            if not stack:
                raise BVHError("OFFSET outside a joint block", path=path, line=lineno)
            if len(toks) != 4:
                raise BVHError(f"OFFSET needs 3 numbers, found {len(toks) - 1}", path=path, line=lineno)
            vals = [_number(t, path, lineno, "OFFSET") for t in toks[1:]]
            if stack[-1] == -2:
                owner = _open_joint(stack)
                if h.tips[owner] is None:
                    h.tips[owner] = vals
            else:
                h.offsets[stack[-1]] = vals
        elif ukey == "CHANNELS":
            if not stack or stack[-1] < 0:
                raise BVHError("CHANNELS outside a joint block", path=path, line=lineno)
            if len(toks) < 2:
                raise BVHError("CHANNELS needs a count", path=path, line=lineno)
            try:
                count = int(toks[1])
            except ValueError:
                raise BVHError(f"CHANNELS count must be an integer, found {toks[1]!r}", path=path,
                               line=lineno) from None
            names = toks[2:]
            if len(names) != count:
                raise BVHError(f"CHANNELS declares {count} channels but lists {len(names)}", path=path,
                               line=lineno)
            for c in names:
                if c not in _VALID_CHANNELS:
                    raise BVHError(f"unknown channel name {c!r}: expected one of X/Y/Z followed by "
                                   "'position' or 'rotation'", path=path, line=lineno)
            if len(set(names)) != len(names):
                raise BVHError("a channel is listed twice", path=path, line=lineno)
            h.channels[stack[-1]] = tuple(names)
        elif ukey == "MOTION":
            if stack or pending is not None:
                raise BVHError(f"unbalanced braces: {len(stack)} block(s) still open at MOTION", path=path,
                               line=lineno)
            if not h.names:
                raise BVHError("no ROOT before MOTION", path=path, line=lineno)
            return h, i - 1
        else:
            raise BVHError(f"unexpected {key!r} in HIERARCHY: expected ROOT, JOINT, End Site, OFFSET, "
                           "CHANNELS, braces or MOTION", path=path, line=lineno)
    if stack or pending is not None:
        raise BVHError(f"unbalanced braces: file ends with {len(stack) + (pending is not None)} block(s) open",
                       path=path, line=pending_line or n)
    raise BVHError("no MOTION section: the file ends after the hierarchy", path=path, line=n)


def _open_joint(stack: list[int]) -> int:
    for s in reversed(stack):
        if s >= 0:
            return s
    raise AssertionError("End Site with no joint")


def _parse_header_value(line: str, label: str, path: str, lineno: int) -> str:
    head, sep, value = line.partition(":")
    if not sep or head.strip().lower().replace(" ", "") != label.lower().replace(" ", ""):
        raise BVHError(f"expected '{label}: ...', found {line.strip()[:40]!r}", path=path, line=lineno)
    return value.strip()


def _diagnose_rows(text: str, first_line: int, ncols: int, path: str) -> None:
    """Slow path, only after the fast parse failed: find the first bad frame line and say what is wrong."""
    frame = 0
    for k, raw in enumerate(text.splitlines()):
        toks = raw.split()
        if not toks:
            continue
        lineno = first_line + k
        if len(toks) != ncols:
            raise BVHError(f"frame {frame} has {len(toks)} values, expected {ncols} (one per channel)",
                           path=path, line=lineno)
        for c, t in enumerate(toks):
            try:
                float(t)
            except ValueError:
                raise BVHError(f"frame {frame}, channel {c}: expected a number, found {t!r}", path=path,
                               line=lineno) from None
        frame += 1


def read_bvh(path: str | os.PathLike, fps: float | None = None) -> Motion:
    """Read a BVH file into a Motion.

    path: the file. fps: overrides the file's Frame Time (some exporters write a wrong one).
    Raises BVHError naming the file and line for anything malformed.
    """
    path = str(path)
    # Only the text up to the motion header is parsed in Python; numpy reads the numbers from the file
    # itself. So read the head until the 'Frame Time' line and a little beyond.

    def enough(data: bytes) -> bool:
        k = data.find(b"Frame Time")
        nl = data.find(b"\n", k) if k >= 0 else -1
        return nl >= 0 and len(data) >= nl + 4096

    data = _read_head(path, enough)
    k = data.find(b"Frame Time")
    nl = data.find(b"\n", k) if k >= 0 else -1
    if nl >= 0 and re.search(rb"\S", data[nl + 1: nl + 4096]) is not None:
        return parse_bvh(data[: nl + 1].decode("utf-8", errors="replace"), path=path, fps=fps,
                         _from_file=True, _full=lambda: _read_text(path))
    return parse_bvh(_read_text(path), path=path, fps=fps)


def _read_text(path: str) -> str:
    return _read_head(path, lambda data: False).decode("utf-8", errors="replace")


def _read_head(path: str, enough) -> bytes:
    """The file's bytes from the start, read in growing blocks until ``enough(data)`` or the end; file
    problems become BVHErrors naming the file."""
    try:
        with open(path, "rb") as fh:
            data = fh.read(1 << 16)
            if b"\x00" in data[:4096]:
                raise BVHError("not a BVH file: binary content", path=path)
            while not enough(data):
                more = fh.read(max(1 << 16, len(data)))
                if not more:
                    break
                data += more
            return data
    except FileNotFoundError:
        raise BVHError("file not found", path=path) from None
    except IsADirectoryError:
        raise BVHError("is a folder, expected a BVH file", path=path) from None
    except OSError as exc:
        raise BVHError(f"cannot read: {exc.strerror}", path=path) from None


def parse_bvh(text: str, path: str = "<string>", fps: float | None = None, _from_file: bool = False,
              _full=None) -> Motion:
    """Parse BVH text (see read_bvh).

    With _from_file, ``text`` may stop after the 'Frame Time' line: numpy reads the frame lines from
    ``path`` itself (faster than from a string buffer) and ``_full()`` gives the whole text when an error
    needs diagnosing."""
    # Split off the motion data without splitting every frame line in Python.
    m = re.search(r"^[ \t]*MOTION[ \t]*\r?$", text, flags=re.MULTILINE | re.IGNORECASE)
    head_text = text if m is None else text[: m.end()]
    lines = head_text.splitlines()
    h, motion_idx = _parse_hierarchy(lines, path)
    # The 'Frames:' and 'Frame Time:' lines follow MOTION; find them without splitting the frame lines.
    header: list[tuple[str, int]] = []
    end = len(text)
    pos = end if m is None else text.find("\n", m.end()) + 1 or end
    lineno = motion_idx + 2
    while len(header) < 2:
        if pos >= end:
            raise BVHError("motion block truncated: expected 'Frames:' and 'Frame Time:' lines", path=path,
                           line=lineno)
        nl = text.find("\n", pos)
        nl = end if nl < 0 else nl
        line = text[pos:nl]
        if line.strip():
            header.append((line, lineno))
        pos = nl + 1
        lineno += 1
    body_start_line = lineno
    frames_str = _parse_header_value(header[0][0], "Frames", path, header[0][1])
    try:
        declared = int(frames_str)
    except ValueError:
        raise BVHError(f"Frames must be a whole number, found {frames_str!r}", path=path,
                       line=header[0][1]) from None
    if declared < 0:
        raise BVHError(f"Frames must not be negative, found {declared}", path=path, line=header[0][1])
    ft_str = _parse_header_value(header[1][0], "Frame Time", path, header[1][1])
    frame_time = _number(ft_str, path, header[1][1], "Frame Time")
    if fps is None:
        if frame_time <= 0:
            raise BVHError(f"Frame Time must be positive, found {ft_str!r} (pass fps to override)", path=path,
                           line=header[1][1])
        fps = 1.0 / frame_time
        # Frame Time is usually printed with 6-8 digits (0.0333333): snap to a whole rate when within
        # that rounding, so 30 fps reads as 30, not 30.00003.
        if abs(fps - round(fps)) < 1e-5 * fps:
            fps = float(round(fps))
    body = path if _from_file else io.StringIO(text[pos:])
    has_data = _from_file or re.compile(r"\S").search(text, pos) is not None

    counts = [len(c) for c in h.channels]
    ncols = int(sum(counts))
    if ncols == 0:
        values = np.zeros((declared, 0))
        rows = declared
    elif not has_data:
        values = np.zeros((0, ncols))
        rows = 0
    else:
        try:
            # At most one row more than declared: enough to tell that there are too many, and a known
            # size lets numpy fill one array instead of growing it.
            # Each value takes at least two characters, so the data cannot hold more rows than this:
            # a huge declared count must not reserve memory the file could never fill.
            size = os.path.getsize(path) if _from_file else len(text) - pos
            cap = min(declared + 1, size // (2 * ncols) + 1)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UserWarning)  # blank lines at the end are fine
                values = np.loadtxt(body, dtype=np.float64, ndmin=2, comments=None,
                                    skiprows=body_start_line - 1 if _from_file else 0, max_rows=cap)
        except ValueError:
            _diagnose_rows(_body_text(text, _full, pos), body_start_line, ncols, path)
            raise BVHError("motion block could not be parsed", path=path, line=body_start_line) from None
        if values.shape[1] != ncols:
            _diagnose_rows(_body_text(text, _full, pos), body_start_line, ncols, path)
            raise BVHError(f"frames have {values.shape[1]} values, expected {ncols}", path=path,
                           line=body_start_line)
        rows = values.shape[0]
    if rows != declared:
        if rows < declared:
            raise BVHError(f"motion block truncated: 'Frames: {declared}' declared, {rows} frame lines found",
                           path=path, line=header[0][1])
        rows = sum(1 for line in _body_text(text, _full, pos).splitlines() if line.strip())
        raise BVHError(f"'Frames: {declared}' declared, but {rows} frame lines found", path=path,
                       line=header[0][1])
    # One pass without a temporary: a sum of finite values is finite unless it overflows.
    if values.size and not np.isfinite(np.add.reduce(values, axis=None)):
        bad = ~np.isfinite(values)
        if bad.any():
            frame, col = np.argwhere(bad)[0]
            raise BVHError(f"frame {frame}, channel {col}: value is not finite ({values[frame, col]})",
                           path=path, line=body_start_line + int(frame))
    return _to_motion(h, values, float(fps), path)


def _body_text(text: str, full, pos: int) -> str:
    return (full() if full is not None else text)[pos:]


def read_bvh_skeleton(path: str | os.PathLike) -> Skeleton:
    """Only the hierarchy of a BVH file, without reading its frames."""
    path = str(path)
    motion_line = re.compile(rb"^[ \t]*MOTION[ \t]*\r?$", flags=re.MULTILINE | re.IGNORECASE)
    data = _read_head(path, lambda d: motion_line.search(d) is not None)
    text = data.decode("utf-8", errors="replace")
    m = re.search(r"^[ \t]*MOTION[ \t]*\r?$", text, flags=re.MULTILINE | re.IGNORECASE)
    h, _ = _parse_hierarchy((text if m is None else text[: m.end()]).splitlines(), path)
    return _skeleton(h, path)


def _skeleton(h: _Hierarchy, path: str) -> Skeleton:
    tips = np.array([t if t is not None else [np.nan] * 3 for t in h.tips], dtype=np.float64)
    return Skeleton(tuple(h.names), np.array(h.parents), np.array(h.offsets), None, tips, tuple(h.channels),
                    source=path)


_READ_BLOCK = 1 << 16  # rotations converted per block of frames while reading


def _to_motion(h: _Hierarchy, values: np.ndarray, fps: float, path: str) -> Motion:
    n = len(h.names)
    skeleton = _skeleton(h, path)
    f = values.shape[0]
    # Stored component-major: each joint's x, y, z and w one contiguous row over the frames.
    planes = np.empty((n, 4, f))
    rotations = planes.transpose(2, 0, 1)
    offsets = skeleton.offsets
    translations = None
    animated_positions = [j for j in range(1, n) if skeleton.has_position_channels(j)]
    if animated_positions:
        translations = np.broadcast_to(offsets, (f, n, 3)).copy()
    root_positions = np.broadcast_to(offsets[0], (f, 3)).copy()
    # Column of each channel, then one Euler conversion per distinct rotation order (all its joints at
    # once), in blocks of frames so the rows being read and written stay in the CPU cache; position
    # channels copied in place.
    starts = np.concatenate([[0], np.cumsum([len(c) for c in h.channels])]).astype(int)
    groups: dict[str, tuple[list[int], list[list[int]]]] = {}
    for j, chans in enumerate(h.channels):
        rot_cols = [int(starts[j]) + k for k, c in enumerate(chans) if c in ROTATION_CHANNELS]
        if rot_cols:
            order = "".join(c[0] for c in chans if c in ROTATION_CHANNELS)
            joints, cols = groups.setdefault(order, ([], []))
            joints.append(j)
            cols.append(rot_cols)
        else:
            rotations[:, j] = (0.0, 0.0, 0.0, 1.0)
        target = root_positions if j == 0 else (translations[:, j] if translations is not None else None)
        for k, c in enumerate(chans):
            if c in POSITION_CHANNELS and target is not None:
                target[:, "XYZ".index(c[0])] = values[:, starts[j] + k]
    # Per rotation order, runs of evenly spaced joints whose angle columns are evenly spaced too (every
    # joint but the root on one order, or orders taking turns): their angles are read and their
    # rotations written through strided views. Channels in another layout are gathered by index.
    plan = []
    for order, (joints, cols) in groups.items():
        k = len(order)
        runs: list[list[int]] = []  # [first joint, joint step, first column, column step, count]
        for j, cs in zip(joints, cols):
            if cs != list(range(cs[0], cs[0] + k)):
                plan.append((order, [j], np.array([cs]), 1, k))
                continue
            run = runs[-1] if runs else None
            if run is not None and run[4] == 1 and j > run[0] and cs[0] - run[2] >= k:
                run[1], run[3], run[4] = j - run[0], cs[0] - run[2], 2
            elif run is not None and j == run[0] + run[1] * run[4] and cs[0] == run[2] + run[3] * run[4]:
                run[4] += 1
            else:
                runs.append([j, 1, cs[0], k, 1])
        for j0, sj, c0, sc, count in runs:
            plan.append((order, slice(j0, j0 + sj * (count - 1) + 1, sj), (c0, sc), count, k))
    rotating = sum(len(js) for js, _ in groups.values())
    step = max(1, _READ_BLOCK // max(rotating, 1))
    values = np.ascontiguousarray(values)
    row_bytes = values.strides[0]
    for f0 in range(0, f, step):
        rows = min(step, f - f0)
        for order, jsel, csel, count, k in plan:
            if isinstance(jsel, slice):
                c0, sc = csel
                angles = np.ndarray((rows, count, k), np.float64, values, f0 * row_bytes + c0 * 8,
                                    (row_bytes, sc * 8, 8))
                quat.from_euler(angles, order, degrees=True, out=rotations[f0: f0 + rows, jsel])
            else:
                rotations[f0: f0 + rows, jsel] = quat.from_euler(values[f0: f0 + rows, csel], order,
                                                                 degrees=True)
    if translations is not None:
        translations[:, 0] = root_positions
    planes.setflags(write=False)
    return Motion(skeleton, planes.transpose(2, 0, 1), root_positions, fps, translations, source=path)


# ----- writing -------------------------------------------------------------------------------------

def _fmt(x: float) -> str:
    s = f"{x:.6f}".rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s


def _hierarchy_text(sk: Skeleton) -> list[str]:
    out = ["HIERARCHY"]
    kids = sk.children

    def emit(j: int, depth: int) -> None:
        ind = "\t" * depth
        kw = "ROOT" if sk.parents[j] < 0 else "JOINT"
        out.append(f"{ind}{kw} {sk.names[j]}")
        out.append(f"{ind}{{")
        out.append(f"{ind}\tOFFSET {' '.join(_fmt(v) for v in sk.offsets[j])}")
        chans = sk.channels[j]
        out.append(f"{ind}\tCHANNELS {len(chans)}" + ("" if not chans else " " + " ".join(chans)))
        for c in kids[j]:
            emit(c, depth + 1)
        if not np.isnan(sk.tips[j]).any():
            out.append(f"{ind}\tEnd Site")
            out.append(f"{ind}\t{{")
            out.append(f"{ind}\t\tOFFSET {' '.join(_fmt(v) for v in sk.tips[j])}")
            out.append(f"{ind}\t}}")
        out.append(f"{ind}}}")

    # Iterative depth is bounded by the skeleton depth; recursion is fine for real rigs.
    emit(0, 0)
    return out


def _channel_values(motion: Motion) -> np.ndarray:
    """(F, C) channel values in file order: positions in file units, rotations in continuous degrees.

    One Euler conversion per distinct rotation order (all its joints at once)."""
    sk = motion.skeleton
    f = motion.num_frames
    starts = np.concatenate([[0], np.cumsum([len(c) for c in sk.channels])]).astype(int)
    values = np.empty((f, int(starts[-1])))
    groups: dict[str, tuple[list[int], list[list[int]]]] = {}
    trans = None
    for j, chans in enumerate(sk.channels):
        rot_cols = [int(starts[j]) + k for k, c in enumerate(chans) if c in ROTATION_CHANNELS]
        if rot_cols:
            order = "".join(c[0] for c in chans if c in ROTATION_CHANNELS)
            if len(order) != 3:
                raise BVHError(f"joint {sk.names[j]!r}: writing needs three rotation channels, has {order!r}")
            joints, cols = groups.setdefault(order, ([], []))
            joints.append(j)
            cols.append(rot_cols)
        for k, c in enumerate(chans):
            if c in POSITION_CHANNELS:
                if j == 0:
                    src = motion.root_positions
                else:
                    if trans is None:
                        trans = motion.local_translations()
                    src = trans[:, j]
                values[:, starts[j] + k] = src[:, "XYZ".index(c[0])]
    for order, (joints, cols) in groups.items():
        q = motion.rotations[:, joints] if len(joints) < sk.num_joints else motion.rotations
        flat = [c for cs in cols for c in cs]
        view = None
        if flat == list(range(flat[0], flat[0] + len(flat))):  # consecutive columns: write in place
            view = values[:, flat[0]: flat[0] + len(flat)].reshape(f, len(joints), 3)
        if view is not None and np.shares_memory(view, values):
            quat.to_euler_continuous(q, order, degrees=True, out=view)
        else:
            values[:, np.array(cols)] = quat.to_euler_continuous(q, order, degrees=True)
    return values


def _pow10_ascii(width: int) -> np.ndarray:
    """For every d < 10**width, its ``width`` decimal digits (zero-padded) as ASCII bytes packed in text
    order into one little-endian uint32 (width <= 4)."""
    d = np.arange(10 ** width, dtype=np.uint32)
    word = np.zeros_like(d)
    for pos in range(width):
        digit = d // 10 ** (width - 1 - pos) % 10
        word |= (48 + digit) << (8 * (4 - width + pos))
    return word


def _head_table(sep: bool) -> np.ndarray:
    """Index 2 u + neg (u < 1000, or < 100 with sep) -> the sign and the digits of u right-aligned in 4
    bytes, NUL-padded on the left (a NUL is dropped from the text later); with sep, byte 0 is a space."""
    n = 100 if sep else 1000
    out = np.zeros((n, 2, 4), dtype=np.uint8)
    for u in range(n):
        for neg in (0, 1):
            text = (("-" if neg else "") + (str(u) if u else "")).encode()
            if text:
                out[u, neg, 4 - len(text):] = np.frombuffer(text, np.uint8)
            if sep:
                out[u, neg, 0] = 32
    return out.reshape(-1, 4).view("<u4").ravel()


# Lookup tables for the fixed-decimal formatter (built once, about 60 kB in all).
_FRAC4 = _pow10_ascii(4)                      # last four fraction digits
# ones digit, '.', first two fraction digits; index ones * 100 + first two fraction digits
_ONES_POINT_FRAC2 = (48 + np.arange(1000, dtype=np.uint32) // 100) | np.uint32(46 << 8) | \
    _pow10_ascii(2)[np.arange(1000) % 100]
_HEAD_SEP = _head_table(True)                 # separator, sign and up to two more integer digits
_HEAD = _head_table(False)                    # sign and up to three more integer digits
# Base-1000 chunks: 2 part + neg -> leading chunk with its sign, 2000 + part -> inner chunk "\0ddd", 3000 -> empty.
_CHUNKS = np.concatenate([_HEAD, _pow10_ascii(3), [0]]).astype("<u4")
_FAST_LIMIT = 1e15                            # |value| * 1e6 below this: digits by integer arithmetic


_BLOCK_VALUES = 1 << 14   # values formatted per block: the block's work arrays stay in the CPU cache


def _fixed6(values: np.ndarray) -> bytes:
    """The text of (F, C) values, '%.6f' of round(v, 6) + 0.0 (so never '-0.000000'), one space between
    values and a newline after each row: the same bytes as the '%' operator gives."""
    return b"".join(_fixed6_blocks(values))


def _fixed6_blocks(values: np.ndarray):
    """_fixed6's text in pieces of whole rows (a generator of bytes)."""
    f, c = values.shape
    if f * c == 0:
        yield b"\n" * f
        return
    rows = max(1, _BLOCK_VALUES // c)
    for r0 in range(0, f, rows):
        yield _fixed6_rows(values[r0: r0 + rows], first=r0 == 0)
    yield b"\n"


def _fixed6_rows(values: np.ndarray, first: bool) -> bytes | bytearray:
    """Rows of values as text; each row but the file's first starts with the newline that ends the row
    before it.

    Each value becomes k = rint(v * 1e6) (exactly what np.round(v, 6) computes before its division; for
    |v| < 1e9 the decimal digits of k are the digits '%.6f' prints). The text is assembled in a uint32
    array, one row of words per value: separator, sign and integer digits right-aligned and NUL-padded,
    then ones digit + '.' + two fraction digits, then four fraction digits, all from lookup tables; the
    NUL padding is dropped at the end."""
    f, c = values.shape
    n = f * c
    a = np.multiply(values, 1e6).ravel()
    np.rint(a, out=a)
    neg = a < 0
    np.abs(a, out=a)
    top = float(a.max())
    if not top < _FAST_LIMIT:  # huge or not finite: the plain formatting
        row = " ".join(["%.6f"] * c)
        text = "\n".join([row] * f) % tuple((np.round(values, 6) + 0.0).ravel())
        return (text if first else "\n" + text).encode("ascii")
    # k = 10000 q + lo: lo the last four fraction digits; q = 1000 u + mid: mid the ones digit and the first
    # two fraction digits, u the integer part without its ones digit.
    if top < 1e9:          # |v| < 1000: separator, sign, hundreds and tens in one word
        k = a.astype(np.int32)
        q = k // 10000
        k -= q * 10000
        u = q // 1000
        q -= u * 1000
        buf = bytearray(n * 12)
        words = np.frombuffer(buf, dtype="<u4").reshape(n, 3)
        u *= 2
        u += neg
        np.take(_HEAD_SEP, u, out=words[:, 0])
    else:
        # Separator word, then base-1000 chunks of u, most significant first; the leading chunk carries
        # the sign and no leading zeros, inner chunks are zero-padded, chunks left of the leading one are
        # empty.
        k = a.astype(np.int64)
        q = k // 10000
        k -= q * 10000
        u = q // 1000
        q -= u * 1000
        k, q, u = k.astype(np.int32), q.astype(np.int32), u.astype(np.int32)
        chunks = (len(str(int(top // 1e7))) + 2) // 3
        buf = bytearray(n * 4 * (chunks + 3))
        words = np.frombuffer(buf, dtype="<u4").reshape(n, chunks + 3)
        words[:, 0] = 32
        rest = u
        for j in range(chunks):
            above = rest // 1000
            part = rest - above * 1000
            inner = above > 0
            lead = ~inner if j == 0 else ~inner & (rest > 0)
            idx = np.where(inner, part + 2000, np.where(lead, 2 * part + neg, 3000))
            np.take(_CHUNKS, idx, out=words[:, chunks - j])
            rest = above
    np.take(_ONES_POINT_FRAC2, q, out=words[:, -2])
    np.take(_FRAC4, k, out=words[:, -1])
    text = words.view(np.uint8).reshape(f, -1)
    text[:, 0] = 10        # each row's first value starts a line
    if first:
        text[0, 0] = 0
    return buf.translate(None, b"\x00")


def _file_blocks(motion: Motion):
    """The file's bytes in pieces: the header, then blocks of frame lines."""
    sk = motion.skeleton
    lines = _hierarchy_text(sk)
    lines.append("MOTION")
    lines.append(f"Frames: {motion.num_frames}")
    lines.append(f"Frame Time: {1.0 / motion.fps:.10g}")
    yield ("\n".join(lines) + "\n").encode("utf-8")
    if not any(sk.channels):
        yield b"\n" * motion.num_frames
        return
    yield from _fixed6_blocks(_channel_values(motion))


def _check_writable(motion: Motion, path: str | None = None) -> None:
    """Refuse a clip the BVH text could not carry: non-finite values, or motion on a joint that has no
    channel for it (it would be silently lost)."""
    sk = motion.skeleton
    arrays = [("rotation", motion.rotations), ("root position", motion.root_positions[:, None])]
    if motion.translations is not None:
        arrays.append(("translation", motion.translations))
    for what, a in arrays:
        if not np.isfinite(a.sum()):  # one pass; NaN or inf anywhere spoils the sum
            f, j = np.argwhere(~np.isfinite(a).all(axis=2))[0]
            raise BVHError(f"frame {f}, joint {sk.names[j]!r}: {what} is not finite; nothing written", path=path)
    for j, chans in enumerate(sk.channels):
        if not any(c in ROTATION_CHANNELS for c in chans):
            turn = quat.angle_between(motion.rotations[:, j], np.broadcast_to(sk.rest_rotations[j],
                                                                               motion.rotations[:, j].shape))
            if turn.max() > 1e-6:
                raise BVHError(f"joint {sk.names[j]!r} has no rotation channels but the clip turns it by up to "
                               f"{np.degrees(turn.max()):.3g} deg; nothing written", path=path)
        if not any(c in POSITION_CHANNELS for c in chans) and (j == 0 or motion.translations is not None):
            moved = motion.root_positions if j == 0 else motion.translations[:, j]
            if np.abs(moved - sk.offsets[j]).max() > 1e-6 * max(1.0, float(np.abs(sk.offsets).max())):
                raise BVHError(f"joint {sk.names[j]!r} has no position channels but the clip moves it; "
                               "nothing written", path=path)


def format_bvh(motion: Motion) -> str:
    """The BVH text of a clip (hierarchy kept as given, 6 decimals, continuous Euler angles)."""
    _check_writable(motion)
    return b"".join(_file_blocks(motion)).decode("utf-8")


def write_bvh(path: str | os.PathLike, motion: Motion) -> Path:
    """Write a clip to BVH atomically (temporary file in the destination folder, then rename)."""
    _check_writable(motion, str(path))
    return atomic_write(path, _file_blocks(motion))
