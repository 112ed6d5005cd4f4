"""Mapping files: YAML round trip, hand edits used as they are, every problem reported at once with the
file, the entry and its line. The YAML is read back with PyYAML's safe loader as the independent check
that what we write is plain YAML with the documented top-level keys."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import yaml

from family import make_variant
from retarget.errors import MappingError
from retarget.mapping import (JointPair, Mapping, format_mapping, hierarchy_signature, load_mapping,
                              save_mapping, validate_mapping)
from retarget.match import match


@pytest.fixture(scope="module")
def pair():
    a, _ = make_variant("prefix_letter", fingers=True, eyes=True)
    b, _ = make_variant("snake", spine=2, twist="leaf")
    return a, b, match(a, b)


def test_file_is_plain_yaml_with_pairs_source_target_confidence(pair, tmp_path):
    a, b, m = pair
    path = save_mapping(m, tmp_path / "m.yaml")
    data = yaml.safe_load(path.read_text())
    assert set(data) >= {"pairs", "unmapped", "source_signature", "target_signature", "source_joints",
                         "target_joints"}
    assert all({"source", "target", "confidence"} <= set(p) for p in data["pairs"])
    assert data["source_joints"] == list(a.names) and data["target_signature"] == hierarchy_signature(b)


def test_round_trip_keeps_everything(pair, tmp_path):
    a, b, m = pair
    back = load_mapping(save_mapping(m, tmp_path / "m.yaml"), a, b)
    assert back.model_dump(exclude={"pairs"}) == m.model_dump(exclude={"pairs"})
    assert [(p.source, p.target, p.reason) for p in back.pairs] == [(p.source, p.target, p.reason) for p in m.pairs]
    # Confidences are written with two decimals.
    assert all(abs(p.confidence - q.confidence) <= 0.005 for p, q in zip(back.pairs, m.pairs))


def test_awkward_names_survive(tmp_path):
    """Names with spaces, colons, brackets and quotes (legal in some exporters) are quoted as needed."""
    a, _ = make_variant("snake")
    names = list(a.names)
    names[0] = "Rig01 Pelvis"
    names[1] = "rig:spine [1]"
    names[2] = "chest, 'upper'"
    a2 = a.renamed(names)
    m = match(a2, a2)
    back = load_mapping(save_mapping(m, tmp_path / "m.yaml"), a2, a2)
    assert back.as_dict() == m.as_dict()


def test_hand_edited_valid_file_is_used_as_is(pair, tmp_path):
    """A person deletes a pair, re-targets another and adds a comment; the file loads unchanged, without
    the matcher being asked again."""
    a, b, m = pair
    path = save_mapping(m, tmp_path / "m.yaml")
    lines = path.read_text().splitlines()
    assert "lCollar" in m.as_dict()
    lines = [ln for ln in lines if "source: lCollar," not in ln]
    text = "\n".join(lines).replace("# Joint mapping", "# reviewed by hand\n# Joint mapping") + "\n"
    import re

    text, n = re.subn(r"target: neck, confidence: [0-9.]+", "target: neck, confidence: 1.0", text)
    assert n == 1
    path.write_text(text)
    got = load_mapping(path, a, b)
    assert "lCollar" not in got.as_dict()
    assert len(got.pairs) == len(m.pairs) - 1
    assert next(p for p in got.pairs if p.target == "neck").confidence == 1.0


def test_minimal_hand_written_file(pair, tmp_path):
    """Only pairs, no signatures: nothing to compare the skeletons with, so they are not checked;
    confidence defaults to 1."""
    a, b, m = pair
    path = tmp_path / "hand.yaml"
    path.write_text("pairs:\n  - {source: hip, target: pelvis}\n  - {source: lThigh, target: thigh_l}\n")
    got = load_mapping(path, a, b)
    assert got.as_dict() == {"hip": "pelvis", "lThigh": "thigh_l"} and got.pairs[0].confidence == 1.0
    assert got.index_pairs(a, b) == sorted([(a.index("hip"), b.index("pelvis")),
                                            (a.index("lThigh"), b.index("thigh_l"))], key=lambda t: t[1])


def test_every_problem_is_reported_at_once_with_file_entry_and_line(pair, tmp_path):
    a, b, m = pair
    path = tmp_path / "bad.yaml"
    path.write_text(
        "pairs:\n"
        "  - {source: hip, target: pelvis, confidence: 0.9}\n"        # line 2: fine
        "  - {source: lHnd, target: hand_l, confidence: 0.9}\n"       # line 3: unknown source joint
        "  - {source: rShin, target: calf_x, confidence: 0.9}\n"      # line 4: unknown target joint
        "  - {source: rThigh, target: pelvis, confidence: 0.8}\n"     # line 5: target mapped twice
        "  - {source: lThigh, target: calf_l, confidence: 0.7}\n"     # line 6
        "  - {source: lShin, target: thigh_l, confidence: 0.7}\n"     # line 7: breaks ancestry with 6
        "  - {source: lFoot, target: foot_l, confidence: 1.7}\n"      # line 8: confidence out of range
        "  - {source: rFoot}\n"                                       # line 9: no target
        "colour: blue\n")                                             # line 10: unknown key
    with pytest.raises(MappingError) as exc:
        load_mapping(path, a, b)
    msg = str(exc.value)
    assert msg.startswith(str(path) + ": ")
    assert "pairs[1] (line 3): source joint 'lHnd' is not in the source skeleton (did you mean 'lHand'?)" in msg
    assert "pairs[2] (line 4): target joint 'calf_x'" in msg
    assert "pairs[3] (line 5): target joint 'pelvis' is mapped twice (also by pairs[0] (line 2))" in msg
    assert "pairs[4] (line 6) and pairs[5] (line 7) break ancestry" in msg
    assert "pairs[6] (line 8): confidence" in msg
    assert "pairs[7] (line 9): target" in msg
    assert "'colour' (line 10): unknown key" in msg
    assert msg.count("\n  - ") == 8


def test_changed_skeleton_is_reported(pair, tmp_path):
    """A rig that gained a joint since the mapping was written: the signature names what changed."""
    a, b, m = pair
    path = save_mapping(m, tmp_path / "m.yaml")
    names = list(b.names) + ["prop"]
    b2 = type(b)(tuple(names), np.append(b.parents, 0), np.vstack([b.offsets, [0, 0.1, 0]]),
                 tips=np.vstack([b.tips, [np.nan] * 3]))
    with pytest.raises(MappingError, match=r"target_signature: the target skeleton changed .*joints added: prop"):
        load_mapping(path, a, b2)
    # Rest offsets alone do not change the hierarchy signature: a touched-up rest pose keeps the mapping.
    assert load_mapping(path, a, b.with_rest(offsets=b.offsets * 1.1)).as_dict() == m.as_dict()


def test_bad_yaml_and_missing_file(tmp_path, pair):
    a, b, _ = pair
    bad = tmp_path / "x.yaml"
    bad.write_text("pairs:\n  - {source: hip, target: [pelvis\n")
    with pytest.raises(MappingError, match=r"x\.yaml:\d+: not valid YAML"):
        load_mapping(bad, a, b)
    with pytest.raises(MappingError, match="mapping file not found"):
        load_mapping(tmp_path / "none.yaml", a, b)
    bad.write_text("- just a list\n")
    with pytest.raises(MappingError, match="top-level 'pairs'"):
        load_mapping(bad, a, b)


def test_index_pairs_sorted_by_target(pair):
    a, b, m = pair
    idx = m.index_pairs(a, b)
    assert [t for _, t in idx] == sorted(t for _, t in idx)
    assert {(a.names[s], b.names[t]) for s, t in idx} == set(m.as_dict().items())
    with pytest.raises(MappingError, match="not in the target skeleton"):
        Mapping(pairs=[JointPair(source="hip", target="nope")]).index_pairs(a, b)


def test_validate_in_memory_mapping(pair):
    a, b, m = pair
    assert validate_mapping(m, a, b) == []
    swapped = Mapping(pairs=[JointPair(source="hip", target="thigh_l"), JointPair(source="lThigh", target="pelvis")])
    assert any("break ancestry" in p for p in validate_mapping(swapped, a, b))


def test_save_is_atomic(pair, tmp_path):
    """Writing into a missing folder fails cleanly and leaves nothing behind."""
    a, b, m = pair
    from retarget.errors import RetargetError

    with pytest.raises(RetargetError):
        save_mapping(m, tmp_path / "missing" / "m.yaml")
    assert list(tmp_path.iterdir()) == []
    save_mapping(m, tmp_path / "m.yaml")
    assert [p.name for p in tmp_path.iterdir()] == ["m.yaml"]


def test_low_confidence_pairs_are_marked_in_the_file():
    m = Mapping(pairs=[JointPair(source="a", target="b", confidence=0.3, reason="guess"),
                       JointPair(source="c", target="d", confidence=0.9)])
    text = format_mapping(m)
    assert "{source: a, target: b, confidence: 0.3, reason: guess}  # check" in text
    assert "{source: c, target: d, confidence: 0.9}\n" in text


def test_shipped_demo_mappings_fit_every_demo_take():
    """The reviewed files in mappings/ load against the capture skeleton of every demo take (all share
    one skeleton) and the rig they name, and pair the key joints the demo's notes describe."""
    from pathlib import Path

    from retarget import read_bvh

    root = Path(__file__).resolve().parents[1]
    files = sorted((root / "mappings").glob("tallowmere_to_*.yaml"))
    takes = sorted((root / "demo_clips" / "capture").glob("*.bvh"))
    if not files or not takes:
        pytest.skip("demo clips or mappings absent")
    from retarget import read_motion

    for f in files:
        name = f.stem.split("_to_", 1)[1]
        # The BVH rig and, when present, the same character as a glTF rig: one hierarchy, one mapping.
        rigs = [read_motion(p).skeleton for p in sorted((root / "demo_clips" / "rigs").glob(name + ".*"))
                if p.suffix in (".bvh", ".glb", ".gltf")]
        assert rigs
        for rig in rigs:
            for take in takes:
                m = load_mapping(f, read_bvh(take).skeleton, rig)
                got = m.as_dict()
                assert got["tm_pelvis"] == rig.names[0]
                expect = DEMO_TRUTH[name]
                assert {k: got.get(k) for k in expect} == expect, f.name


# The demo rigs' key joints as demo_clips/README.md describes them (left side; right mirrors it).
DEMO_TRUTH = {
    "brannoc_stocky": {"tm_L_clavicle": "collar_l", "tm_L_humerus": "shoulder_l", "tm_L_forearm": "elbow_l",
                       "tm_L_hand": "wrist_l", "tm_L_femur": "hip_l", "tm_L_tibia": "knee_l",
                       "tm_L_foot": "ankle_l", "tm_L_toe": "toe_l", "tm_R_hand": "wrist_r", "tm_head": "head"},
    "quillon_lanky": {"tm_L_clavicle": "lfShoulderBlade", "tm_L_humerus": "lfArmUpper",
                      "tm_L_forearm": "lfArmLower", "tm_L_hand": "lfHand", "tm_L_femur": "lfLegUpper",
                      "tm_L_tibia": "lfLegLower", "tm_L_foot": "lfFoot", "tm_L_toe": "lfToe",
                      "tm_R_hand": "rtHand", "tm_head": "head"},
}


def test_problem_entries_keep_their_file_numbers_in_every_section(tmp_path):
    """An invalid entry dropped before the joint checks must not shift the numbers (and lines) of the
    entries after it, in 'unmapped' as in 'pairs'."""
    from retarget import read_bvh
    from retarget.mapping import load_mapping

    repo = Path(__file__).resolve().parents[1]
    src = read_bvh(repo / "demo_clips" / "capture" / "walk.bvh").skeleton
    tgt = read_bvh(repo / "demo_clips" / "rigs" / "brannoc_stocky.bvh").skeleton
    text = (repo / "mappings" / "tallowmere_to_brannoc_stocky.yaml").read_text()
    text = text[: text.index("unmapped:")] + "unmapped:\n  - 5\n  - {joint: nope, side: source}\n"
    path = tmp_path / "m.yaml"
    path.write_text(text)
    with pytest.raises(MappingError) as info:
        load_mapping(path, src, tgt)
    line = text.splitlines().index("  - {joint: nope, side: source}") + 1
    assert f"unmapped[1] (line {line}): source joint 'nope'" in str(info.value)
