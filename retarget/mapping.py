"""The joint mapping between two skeletons: a reviewable YAML file, its model and its validation.

A mapping lists pairs {source, target, confidence} - the source joint whose motion drives the target
joint - plus, for checking, both skeletons' joint names and a hash of each hierarchy (names and parents;
rest offsets are left out, so re-exporting a rig with a touched-up rest pose keeps its mapping valid),
and the joints left unmapped on each side with the reason. A file written by ``retarget match`` and
then edited by hand is used as it is, as long as it still fits the two skeletons; every problem is
reported at once, each naming the file, the entry and its line.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import os
from pathlib import Path
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .errors import MappingError
from .skeleton import Skeleton

__all__ = ["JointPair", "UnmappedJoint", "Mapping", "hierarchy_signature", "save_mapping", "load_mapping",
           "format_mapping", "validate_mapping", "LOW_CONFIDENCE"]

LOW_CONFIDENCE = 0.6
"""Pairs below this confidence deserve a person's look (the table and the file's comments mark them)."""


class JointPair(BaseModel):
    """One mapped joint: the source joint drives the target joint."""

    model_config = ConfigDict(extra="forbid")

    source: str
    target: str
    confidence: float = Field(1.0, ge=0.0, le=1.0)
    reason: str = ""


class UnmappedJoint(BaseModel):
    """A joint left without a partner, on the source or the target side, and why."""

    model_config = ConfigDict(extra="forbid")

    joint: str
    side: Literal["source", "target"]
    reason: str = ""


class Mapping(BaseModel):
    """Joint correspondence between a source and a target skeleton.

    pairs: the mapped joints, each source and each target joint at most once.
    source_signature / target_signature: ``hierarchy_signature`` of each skeleton when the mapping was
    made (None: not checked). source_joints / target_joints: their joint names then (None: not checked).
    unmapped: joints without a partner and why. source_file / target_file: where they were read from.
    """

    model_config = ConfigDict(extra="forbid")

    pairs: list[JointPair]
    source_signature: str | None = None
    target_signature: str | None = None
    source_joints: list[str] | None = None
    target_joints: list[str] | None = None
    unmapped: list[UnmappedJoint] = Field(default_factory=list)
    source_file: str | None = None
    target_file: str | None = None

    def index_pairs(self, source: Skeleton, target: Skeleton) -> list[tuple[int, int]]:
        """(source joint index, target joint index) of every pair, sorted by target index.
        MappingError when a name is not in its skeleton."""
        out = []
        for k, p in enumerate(self.pairs):
            if p.source not in source:
                raise MappingError(f"pairs[{k}]: source joint {p.source!r} is not in the source skeleton",
                                   path=source.source)
            if p.target not in target:
                raise MappingError(f"pairs[{k}]: target joint {p.target!r} is not in the target skeleton",
                                   path=target.source)
            out.append((source.index(p.source), target.index(p.target)))
        return sorted(out, key=lambda st: (st[1], st[0]))

    def as_dict(self) -> dict[str, str]:
        """{source joint: target joint}."""
        return {p.source: p.target for p in self.pairs}

    def target_of(self, source_joint: str) -> str | None:
        for p in self.pairs:
            if p.source == source_joint:
                return p.target
        return None

    def low_confidence(self, threshold: float = LOW_CONFIDENCE) -> list[JointPair]:
        # Compared as the file shows it (two decimals), so a reloaded file marks the same pairs.
        return [p for p in self.pairs if round(p.confidence, 2) < threshold]


def hierarchy_signature(skeleton: Skeleton) -> str:
    """A 16-hex-digit hash of the joint names and who is whose parent (rest offsets left out)."""
    h = hashlib.sha256()
    for name, p in zip(skeleton.names, skeleton.parents):
        parent = skeleton.names[p] if p >= 0 else ""
        h.update(f"{name}\x00{parent}\x01".encode())
    return h.hexdigest()[:16]


# ----- writing ------------------------------------------------------------------------------------------

def _flow(value) -> str:
    import yaml

    return yaml.safe_dump(value, default_flow_style=True, width=math.inf, sort_keys=False,
                          allow_unicode=True).strip()


def format_mapping(mapping: Mapping) -> str:
    """The YAML text of a mapping: a short header, then one line per pair and per unmapped joint."""
    import yaml

    out = ["# Joint mapping: each pair's source joint drives its target joint.",
           "# Edit freely: change, add or delete pair lines. confidence (0-1) is how sure the matcher was;",
           f"# pairs below {LOW_CONFIDENCE} are marked 'check'. Loading the file checks every entry against both",
           "# skeletons (names, duplicates, ancestry, unchanged hierarchies)."]
    head = {k: getattr(mapping, k) for k in ("source_file", "target_file", "source_signature", "target_signature")
            if getattr(mapping, k) is not None}
    if head:
        out.append(yaml.safe_dump(head, sort_keys=False, allow_unicode=True).rstrip())
    out.append(f"pairs:{'' if mapping.pairs else ' []'}")
    for p in mapping.pairs:
        item = {"source": p.source, "target": p.target, "confidence": round(float(p.confidence), 2)}
        if p.reason:
            item["reason"] = p.reason
        mark = "  # check" if round(float(p.confidence), 2) < LOW_CONFIDENCE else ""
        out.append(f"  - {_flow(item)}{mark}")
    out.append(f"unmapped:{'' if mapping.unmapped else ' []'}")
    for u in mapping.unmapped:
        item = {"joint": u.joint, "side": u.side}
        if u.reason:
            item["reason"] = u.reason
        out.append(f"  - {_flow(item)}")
    tail = {k: getattr(mapping, k) for k in ("source_joints", "target_joints") if getattr(mapping, k) is not None}
    if tail:
        out.append(yaml.safe_dump(tail, sort_keys=False, default_flow_style=None, width=100,
                                  allow_unicode=True).rstrip())
    return "\n".join(out) + "\n"


def save_mapping(mapping: Mapping, path: str | os.PathLike) -> Path:
    """Write the mapping as YAML, atomically (never a half file)."""
    from .io.atomic import atomic_write

    return atomic_write(path, format_mapping(mapping).encode("utf-8"))


# ----- reading and checking -------------------------------------------------------------------------------

def _suggest(name: str, names) -> str:
    close = difflib.get_close_matches(name, list(names), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _skeleton_change(skeleton: Skeleton, joints: list[str] | None) -> str:
    if joints is None:
        return ""
    now, then = set(skeleton.names), set(joints)
    parts = []
    if now - then:
        parts.append("joints added: " + ", ".join(sorted(now - then)[:8]) + (" ..." if len(now - then) > 8 else ""))
    if then - now:
        parts.append("joints removed: " + ", ".join(sorted(then - now)[:8]) + (" ..." if len(then - now) > 8 else ""))
    if not parts:
        parts.append("same joints, different parents")
    return "; " + "; ".join(parts)


def validate_mapping(mapping: Mapping, source: Skeleton, target: Skeleton,
                     lines: dict[tuple[str, int], int] | None = None) -> list[str]:
    """Every problem of a mapping against two skeletons, one message each ([] when it fits).

    Checked: signatures and joint lists (the skeletons have not changed), joint names, joints mapped
    twice, and ancestry both ways (if source joint a is an ancestor of b, a's target must be an ancestor
    of b's target, and the other way round). lines: {("pairs", k): line} to name file lines."""
    lines = lines or {}

    def where(section: str, k: int) -> str:
        line = lines.get((section, k))
        return f"{section}[{k}]" + (f" (line {line})" if line else "")

    problems: list[str] = []
    for which, sk, sig, joints in (("source", source, mapping.source_signature, mapping.source_joints),
                                   ("target", target, mapping.target_signature, mapping.target_joints)):
        now = hierarchy_signature(sk)
        changed = (sig is not None and sig != now) or (joints is not None and list(joints) != list(sk.names))
        if changed:
            was = f"was {sig}, now {now}" if sig is not None else "joint list differs"
            problems.append(f"{which}_signature: the {which} skeleton{' ' + repr(sk.source) if sk.source else ''} "
                            f"changed since this mapping was made ({was}{_skeleton_change(sk, joints)})")
    valid: list[tuple[int, int, int]] = []  # (entry, source index, target index)
    seen_s: dict[str, int] = {}
    seen_t: dict[str, int] = {}
    for k, p in enumerate(mapping.pairs):
        ok = True
        if p.source not in source:
            problems.append(f"{where('pairs', k)}: source joint {p.source!r} is not in the source skeleton"
                            + _suggest(p.source, source.names))
            ok = False
        if p.target not in target:
            problems.append(f"{where('pairs', k)}: target joint {p.target!r} is not in the target skeleton"
                            + _suggest(p.target, target.names))
            ok = False
        if p.source in seen_s:
            problems.append(f"{where('pairs', k)}: source joint {p.source!r} is mapped twice "
                            f"(also by {where('pairs', seen_s[p.source])})")
            ok = False
        if p.target in seen_t:
            problems.append(f"{where('pairs', k)}: target joint {p.target!r} is mapped twice "
                            f"(also by {where('pairs', seen_t[p.target])})")
            ok = False
        seen_s.setdefault(p.source, k)
        seen_t.setdefault(p.target, k)
        if ok:
            valid.append((k, source.index(p.source), target.index(p.target)))
    for k, u in enumerate(mapping.unmapped):
        sk = source if u.side == "source" else target
        if u.joint not in sk:
            problems.append(f"{where('unmapped', k)}: {u.side} joint {u.joint!r} is not in the {u.side} skeleton"
                            + _suggest(u.joint, sk.names))
    if len(valid) >= 2:
        entries = np.array([v[0] for v in valid])
        si = np.array([v[1] for v in valid])
        ti = np.array([v[2] for v in valid])
        a_s = source.ancestor_matrix[np.ix_(si, si)]
        a_t = target.ancestor_matrix[np.ix_(ti, ti)]
        bad = np.argwhere(a_s != a_t)
        shown = 0
        for x, y in bad:
            if shown >= 20:
                problems.append(f"... and {len(bad) - shown} more pairs that break ancestry")
                break
            ps, pt = mapping.pairs[entries[x]], mapping.pairs[entries[y]]
            if a_s[x, y]:
                msg = (f"{ps.source!r} is an ancestor of {pt.source!r} in the source, but {ps.target!r} is not an "
                       f"ancestor of {pt.target!r} in the target")
            else:
                msg = (f"{ps.target!r} is an ancestor of {pt.target!r} in the target, but {ps.source!r} is not an "
                       f"ancestor of {pt.source!r} in the source")
            problems.append(f"{where('pairs', int(entries[x]))} and {where('pairs', int(entries[y]))} break ancestry: "
                            + msg)
            shown += 1
    return problems


def _node_lines(node) -> dict[tuple[str, int], int]:
    """{("pairs", k): line of entry k} from a composed YAML document."""
    import yaml

    out: dict[tuple[str, int], int] = {}
    if not isinstance(node, yaml.MappingNode):
        return out
    for key, value in node.value:
        if isinstance(key, yaml.ScalarNode) and key.value in ("pairs", "unmapped") and \
                isinstance(value, yaml.SequenceNode):
            for k, item in enumerate(value.value):
                out[(key.value, k)] = item.start_mark.line + 1
        if isinstance(key, yaml.ScalarNode):
            out[(key.value, -1)] = key.start_mark.line + 1
    return out


def load_mapping(path: str | os.PathLike, source: Skeleton, target: Skeleton) -> Mapping:
    """Read a mapping file and check it against the two skeletons.

    Raises MappingError naming the file and listing every problem (bad YAML, unknown keys, entries that
    are not {source, target, confidence}, unknown joints, joints mapped twice, pairs breaking ancestry,
    skeletons that changed since the mapping was made), each with its entry and line."""
    import yaml

    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise MappingError("mapping file not found", path=str(path)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise MappingError(f"cannot read the mapping file: {exc}", path=str(path)) from None
    loader = yaml.SafeLoader(text)
    try:
        node = loader.get_single_node()
        data = loader.construct_document(node) if node is not None else None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        problem = getattr(exc, "problem", None) or str(exc)
        raise MappingError(f"not valid YAML: {problem}", path=str(path),
                           line=None if mark is None else mark.line + 1) from None
    finally:
        loader.dispose()
    if not isinstance(data, dict):
        raise MappingError("expected a YAML mapping with a top-level 'pairs' list", path=str(path))
    lines = _node_lines(node)
    problems: list[str] = []
    known = set(Mapping.model_fields)
    for key in data:
        if key not in known:
            line = lines.get((str(key), -1))
            problems.append(f"{key!r}{f' (line {line})' if line else ''}: unknown key; expected one of "
                            + ", ".join(sorted(known)))
    if "pairs" not in data:
        problems.append("no 'pairs' list")
    pairs_raw = data.get("pairs") or []
    unmapped_raw = data.get("unmapped") or []
    for section, raw in (("pairs", pairs_raw), ("unmapped", unmapped_raw)):
        if not isinstance(raw, list):
            problems.append(f"'{section}' must be a list of entries")
    pairs: list[JointPair] = []
    unmapped: list[UnmappedJoint] = []
    entries: dict[str, list[int]] = {"pairs": [], "unmapped": []}  # file entry number of each kept item
    for section, raw, model, out in (("pairs", pairs_raw, JointPair, pairs),
                                     ("unmapped", unmapped_raw, UnmappedJoint, unmapped)):
        if not isinstance(raw, list):
            continue
        for k, item in enumerate(raw):
            line = lines.get((section, k))
            at = f"{section}[{k}]" + (f" (line {line})" if line else "")
            if not isinstance(item, dict):
                problems.append(f"{at}: expected an entry like {{source: NAME, target: NAME, confidence: 0.9}}"
                                if section == "pairs" else f"{at}: expected {{joint: NAME, side: source|target}}")
                continue
            try:
                out.append(model.model_validate(item))
                entries[section].append(k)
            except ValidationError as exc:
                for err in exc.errors():
                    loc = ".".join(str(x) for x in err["loc"]) or "entry"
                    problems.append(f"{at}: {loc}: {err['msg']}")
    head = {}
    for key in ("source_signature", "target_signature", "source_file", "target_file"):
        v = data.get(key)
        if v is not None and not isinstance(v, str):
            problems.append(f"{key}: expected text, got {v!r}")
        else:
            head[key] = v
    for key in ("source_joints", "target_joints"):
        v = data.get(key)
        if v is not None and not (isinstance(v, list) and all(isinstance(x, str) for x in v)):
            problems.append(f"{key}: expected a list of joint names")
        else:
            head[key] = v
    mapping = Mapping(pairs=pairs, unmapped=unmapped, **head)
    # Entry numbers in the file may differ from list positions when entries were dropped as invalid.
    item_lines = {(section, i): lines.get((section, k))
                  for section, kept in entries.items() for i, k in enumerate(kept)}
    for msg in validate_mapping(mapping, source, target, {key: v for key, v in item_lines.items() if v}):
        problems.append(_renumber(msg, entries))
    if problems:
        head_line = "1 problem" if len(problems) == 1 else f"{len(problems)} problems"
        raise MappingError(f"{head_line} in the mapping:\n  - " + "\n  - ".join(problems), path=str(path))
    return mapping


def _renumber(msg: str, entries: dict[str, list[int]]) -> str:
    """Point messages about list items at the file's entry numbers."""
    import re

    def fix(m):
        kept, i = entries[m.group(1)], int(m.group(2))
        return f"{m.group(1)}[{kept[i] if i < len(kept) else i}]"

    return re.sub(r"(pairs|unmapped)\[(\d+)\]", fix, msg)
