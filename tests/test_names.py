"""Joint-name evidence: side markers in the common styles, anatomical concepts and synonyms, H-Anim names.

References: H-Anim (ISO/IEC 19774) joint names (l_hip, l_knee, l_talocrural, l_shoulder, l_elbow,
l_wrist, l_sternoclavicular, skullbase, vl5, vt1, vc7, humanoid_root; recalled from the standard's joint
list); the other styles are common practice in rigs and capture files (camelCase with Left/Right,
suffixes _l/.L, prefixes l/r, ASF-style glued letters as in the CMU files, Lf/Rt short forms).
"""

from __future__ import annotations

import pytest

from retarget.names import concepts_of, is_ambiguous, name_affinity, side_of_name, strip_side, tokenize


def test_tokenize_splits_separators_camel_humps_and_digits():
    assert tokenize("LeftUpLeg_02") == ("left", "up", "leg", "02")
    assert tokenize("Rig01 L Thigh") == ("rig", "01", "l", "thigh")
    assert tokenize("spine.001") == ("spine", "001")
    assert tokenize("char:LeftHand") == ("char", "left", "hand")
    assert tokenize("RT_UPPERARM") == ("rt", "upperarm")


@pytest.mark.parametrize("name,side", [
    ("LeftHand", "left"), ("RightForeArm", "right"), ("hand_left", "left"),   # words
    ("hand_l", "left"), ("Hand_R", "right"), ("hand.L", "left"), ("foot.R", "right"),  # suffix letters
    ("L_Hand", "left"), ("r_knee", "right"), ("lShldr", "left"), ("rButtock", "right"),  # prefix letters
    ("HandR", "right"), ("ThighL", "left"),                                     # glued suffix letter
    ("Rig01 L Thigh", "left"), ("Ch_Base_R_Hand", "right"),                     # letter inside the name
    ("LfHand", "left"), ("RT_UPPERARM", "right"), ("ARM_UPPER_LF", "left"), ("Lt_Shin", "left"),
    ("lfemur", "left"), ("rtibia", "right"), ("lhipjoint", "left"), ("ltoes", "left"),  # glued letter
    ("leftarm", "left"), ("righthand", "right"),                               # glued word
    ("l_sternoclavicular", "left"), ("r_talocrural", "right"),                  # H-Anim
])
def test_side_markers_in_every_common_style(name, side):
    assert side_of_name(name) == side


@pytest.mark.parametrize("name", ["Hips", "Spine1", "lowerback", "lowerneck", "Spine_L1", "root", "j07",
                                  "leftright", "ring", "radius", "Left_Right_Hand", "vl5", "skullbase"])
def test_no_side_where_the_name_has_none(name):
    """Words that merely start with l or r (lowerback, ring, radius), a lumbar vertebra L1, opaque names and
    contradictory markers carry no side."""
    assert side_of_name(name) is None


def test_strip_side_keeps_the_body_words():
    assert strip_side("lShldr") == ("shldr",)
    assert strip_side("Hand_R") == ("hand",)
    assert strip_side("Rig01 L Thigh") == ("rig", "01", "thigh")
    assert strip_side("lfemur") == ("femur",)
    assert strip_side("leftarm") == ("arm",)
    assert strip_side("Spine_L1") == ("spine", "l", "1")


@pytest.mark.parametrize("names,concept", [
    (["thigh_l", "LeftUpLeg", "UpperLeg_L", "lfemur", "LEG_UPPER_LF", "lThigh", "Rig01 L Thigh"], "thigh"),
    (["calf_l", "LeftLowerLeg", "LowerLeg_L", "ltibia", "shin.L", "l_knee", "LEG_LOWER_LF"], "shin"),
    (["foot_l", "LeftAnkle", "l_talocrural", "lfoot"], "foot"),
    (["ball_l", "LeftToeBase", "Toes_L", "ltoes", "l_metatarsophalangeal_2"], "toe"),
    (["clavicle_l", "LeftCollar", "lclavicle", "l_sternoclavicular", "CLAV_LF"], "clavicle"),
    (["upperarm_l", "LeftUpperArm", "lhumerus", "ARM_UPPER_LF", "upper_arm.L"], "upperarm"),
    (["lowerarm_l", "LeftForeArm", "LowerArm_L", "lradius", "l_elbow", "ARM_LOWER_LF"], "forearm"),
    (["hand_l", "LeftWrist", "l_wrist", "lhand", "l_radiocarpal"], "hand"),
    (["Hips", "pelvis", "humanoid_root", "sacroiliac", "hip"], "pelvis"),
    (["Spine1", "abdomen", "lowerback", "upperback", "vl5", "vt10", "lumbar2"], "spine"),
    (["Chest", "thorax", "UpperChest"], "chest"),
    (["Neck", "lowerneck", "upperneck", "vc7"], "neck"),
    (["Head", "skullbase", "Skull"], "head"),
])
def test_synonyms_and_hanim_names_share_a_concept(names, concept):
    for n in names:
        assert concept in concepts_of(n), n


def test_ambiguous_words_keep_both_readings():
    """'Shoulder' is a collar in many rigs and the upper arm in H-Anim; 'Leg' alone is a shin in some
    rigs and a thigh in others; 'hip' with a side is the hip joint (thigh) or a lead joint."""
    assert concepts_of("Shoulder_L") == {"clavicle", "upperarm"} and is_ambiguous("Shoulder_L")
    assert concepts_of("LeftLeg") == {"shin", "thigh"} and is_ambiguous("LeftLeg")
    assert concepts_of("l_hip") == {"thigh", "buttock"}
    assert not is_ambiguous("LeftUpLeg")


def test_parts_named_inside_their_container_are_the_part():
    assert concepts_of("LeftHandIndex2") == {"index"}
    assert concepts_of("RightFootToe") == {"toe"}
    assert concepts_of("HeadEye_L") == {"eye"}
    assert concepts_of("l_metacarpophalangeal_2") >= {"index"}
    assert concepts_of("upperarm_twist_l") == {"upperarm", "twist"}
    assert "end" in concepts_of("HeadTop_End")


def test_opaque_names_say_nothing():
    for n in ("j00", "j17", "joint12", "bone_3"):
        assert concepts_of(n) == frozenset()
    assert name_affinity("j01", "j01") == 0.0


def test_affinity_scores_agreement_and_conflict():
    assert name_affinity("LeftUpLeg", "lThigh") == 1.0
    assert 0 < name_affinity("LeftLeg", "lShin") < 1.0        # ambiguous word, still agrees
    assert name_affinity("hand_l", "foot_l") == -1.0
    assert name_affinity("Spine2", "Chest") > 0               # a chest is a spine joint
    assert name_affinity("prop_sword", "sword") > 0            # words outside the vocabulary
    assert name_affinity("upperarm_twist_l", "upperarm_l") < name_affinity("upperarm_l", "LeftUpperArm")


def test_vertebra_names_and_ordinary_words_carry_no_side():
    """A letter with digits alone or before a spine word names a vertebra (L1, L5: lumbar vertebrae, as
    anatomy numbers them); "rear" is a word, not r + ear. A limb word after the same prefix keeps the side."""
    from retarget.names import side_of_name

    assert side_of_name("L1") is None and side_of_name("L5_vertebra") is None
    assert side_of_name("Rear_Leg") is None
    assert side_of_name("L1_Thigh") == "left" and side_of_name("lEar") == "left"
