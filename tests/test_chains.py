"""Body layout: anatomical roles on limbs built in awkward ways, read from proportions, straightness,
names and stillness.

Outside reference for the proportions the layout leans on: Winter's table of Drillis and Contini
segment lengths (upper arm 0.186 H, forearm 0.146 H, thigh 0.245 H, shank 0.246 H; recalled from
memory), used by tests/family.py to build the body.
"""

from __future__ import annotations

import numpy as np
import pytest

from family import FAMILY, make_variant
from retarget import Motion, Skeleton, analyze_body, quat
from retarget.chains import still_joints


def roles(sk: Skeleton, truth: dict, body) -> dict[str, str]:
    """{body role name: body joint name the layout gave it}."""
    n = sk.names
    out = {"pelvis": truth[n[body.pelvis]], "chest": truth[n[body.chest]], "head": truth[n[body.head]]}
    for s, lb in body.arms.items():
        out.update({f"upperarm_{s[0]}": truth[n[lb.root]], f"forearm_{s[0]}": truth[n[lb.mid]],
                    f"hand_{s[0]}": truth[n[lb.end]]})
    for s, lb in body.legs.items():
        out.update({f"thigh_{s[0]}": truth[n[lb.root]], f"shin_{s[0]}": truth[n[lb.mid]],
                    f"foot_{s[0]}": truth[n[lb.end]]})
        if lb.toe is not None:
            out[f"toe_{s[0]}"] = truth[n[lb.toe]]
    return out


@pytest.mark.parametrize("opts", FAMILY, ids=lambda o: f"{o['style']}-{o.get('twist')}-{o.get('pose')}")
def test_every_family_variant_gets_its_roles_and_sides(opts):
    """Ground truth from the variant's construction: every role lands on the body joint of that name,
    including sides (from names, or from geometry for opaque names)."""
    sk, truth = make_variant(**opts)
    body = analyze_body(sk)
    for role, got in roles(sk, truth, body).items():
        assert got == role
    assert body.side_evidence == ("geometry" if opts["style"] == "opaque" else "names")


@pytest.mark.parametrize("twist", ["inline", "leaf"])
@pytest.mark.parametrize("pose", ["T", "A"])
def test_twist_joints_never_take_a_role_even_without_names(twist, pose):
    """Inline twist joints halve the upper arm, forearm and thigh: the two longest bones are then no longer
    the segments, yet the upper segment's share (0.56 of the arm, 0.50 of the leg) still finds them."""
    sk, truth = make_variant("opaque", fingers=False, twist=twist, pose=pose)
    body = analyze_body(sk)
    got = roles(sk, truth, body)
    assert all(got[r] == r for r in got)
    assert all(lb.certainty > 0.5 for lb in list(body.arms.values()) + list(body.legs.values()))


def test_buttock_lead_joint_stays_out_of_the_leg_roles():
    """A lead joint behind and above the hip joint (as the CMU-derived 43-joint figure has) is not the
    thigh: the thigh bone's line does not pass through it."""
    sk, truth = make_variant("opaque", buttocks=True)
    body = analyze_body(sk)
    for s, lb in body.legs.items():
        assert truth[sk.names[lb.root]] == f"thigh_{s[0]}"
        assert [truth[sk.names[q]] for q in lb.lead] == [f"buttock_{s[0]}"]


def _zero_length_arm() -> Skeleton:
    """Arm as in the CMU ASF conversion: a wrist joint with a zero-length bone, the hand joint at the same
    place, then a short fingers bone; a clavicle at the chest with zero offset."""
    names = ["hip", "lhipjoint", "lfemur", "ltibia", "lfoot", "rhipjoint", "rfemur", "rtibia", "rfoot",
             "lowerback", "thorax", "neck", "head",
             "lclavicle", "lhumerus", "lradius", "lwrist", "lhand", "lfingers",
             "rclavicle", "rhumerus", "rradius", "rwrist", "rhand", "rfingers"]
    par = {"lhipjoint": "hip", "lfemur": "lhipjoint", "ltibia": "lfemur", "lfoot": "ltibia",
           "rhipjoint": "hip", "rfemur": "rhipjoint", "rtibia": "rfemur", "rfoot": "rtibia",
           "lowerback": "hip", "thorax": "lowerback", "neck": "thorax", "head": "neck",
           "lclavicle": "thorax", "lhumerus": "lclavicle", "lradius": "lhumerus", "lwrist": "lradius",
           "lhand": "lwrist", "lfingers": "lhand", "rclavicle": "thorax", "rhumerus": "rclavicle",
           "rradius": "rhumerus", "rwrist": "rradius", "rhand": "rwrist", "rfingers": "rhand"}
    off = {"lhipjoint": (0, 0, 0), "lfemur": (1.6, -1.8, 0.7), "ltibia": (2.4, -6.6, 0), "lfoot": (2.6, -7.3, 0),
           "lowerback": (0, 0, 0), "thorax": (0, 4.3, 0), "neck": (0, 1.6, 0), "head": (0, 1.7, 0),
           "lclavicle": (0, 0, 0), "lhumerus": (3.3, 0.8, -0.7), "lradius": (5.2, 0, 0), "lwrist": (3.8, 0, 0),
           "lhand": (0, 0, 0), "lfingers": (0.5, 0, 0)}
    for k in list(off):
        if k.startswith("l") and k not in ("lowerback",):
            x, y, z = off[k]
            off["r" + k[1:]] = (-x, y, z)
    offsets = [(0, 0, 0)] + [off[n] for n in names[1:]]
    tips = np.full((len(names), 3), np.nan)
    for k, t in (("lfoot", (0, -0.5, 2.0)), ("rfoot", (0, -0.5, 2.0)), ("head", (0, 1.7, 0)),
                 ("lfingers", (0.4, 0, 0)), ("rfingers", (-0.4, 0, 0))):
        tips[names.index(k)] = t
    return Skeleton(tuple(names), np.array([-1] + [names.index(par[n]) for n in names[1:]]),
                    np.array(offsets, float), tips=tips)


def test_co_located_joints_give_the_role_to_the_one_whose_bone_has_length():
    """The wrist joint's bone is zero long: the hand role goes to the joint at the same place that owns
    the hand bone (with opaque names too)."""
    sk = _zero_length_arm()
    for s in (sk, sk.renamed([f"j{i:02d}" for i in range(sk.num_joints)])):
        body = analyze_body(s)
        for side, lb in body.arms.items():
            assert sk.names[lb.end] == side[0] + "hand"
            assert sk.names[lb.root] == side[0] + "humerus"
        for side, lb in body.legs.items():
            assert sk.names[lb.root] == side[0] + "femur"


def test_never_animated_joints_take_no_role():
    """With a clip, a joint the clip never moves cannot be a limb segment (a static fingers bone past the
    hand, say); with opaque names only the clip can tell."""
    sk = _zero_length_arm().renamed([f"j{i:02d}" for i in range(25)])
    f = 4
    rng = np.random.default_rng(1)
    rot = np.repeat(quat.identity((1, sk.num_joints)), f, axis=0)
    moving = [i for i, n in enumerate(_zero_length_arm().names) if not n.endswith("fingers")
              and n not in ("lhipjoint", "rhipjoint", "lclavicle", "rclavicle")]
    axis = rng.normal(size=(f, len(moving), 3))
    axis /= np.linalg.norm(axis, axis=-1, keepdims=True)
    rot[:, moving] = quat.from_axis_angle(axis, np.full((f, len(moving)), 0.05))
    motion = Motion(sk, rot, np.zeros((f, 3)), 30.0)
    still = still_joints(motion)
    assert [sk.names[j] for j in np.flatnonzero(still)] == ["j01", "j05", "j13", "j18", "j19", "j24"]
    body = analyze_body(sk, motion)
    assert body.still is not None
    for lb in body.arms.values():
        assert not still[lb.end]


def test_still_joints_ignore_quaternion_sign():
    sk, _ = make_variant("snake")
    q = np.repeat(quat.identity((1, sk.num_joints)), 3, axis=0)
    q[1] *= -1.0  # same rotations, other sign
    assert still_joints(Motion(sk, q, np.zeros((3, 3)), 30.0)).all()
    assert still_joints(Motion(sk, q[:1], np.zeros((1, 3)), 30.0)) is None


def test_twist_leaf_next_to_a_leaf_hand_does_not_become_the_arm_chain():
    """A forearm twist leaf and a leaf hand reach equally far in joints; the hand reaches further in
    length, whatever the sibling order."""
    for seed in range(6):
        sk, truth = make_variant("opaque", fingers=False, twist="leaf", shuffle=seed)
        body = analyze_body(sk)
        for s, lb in body.arms.items():
            assert truth[sk.names[lb.joints[-1]]] == f"hand_{s[0]}"


def test_head_below_an_end_marker():
    """A head-top end joint named as such is not the head."""
    sk, truth = make_variant("snake")
    h = sk.index("head")
    names = list(sk.names) + ["head_end"]
    parents = np.append(sk.parents, h)
    offsets = np.vstack([sk.offsets, [0.0, 0.2, 0.0]])
    tips = np.vstack([sk.tips, [np.nan] * 3])
    tips[h] = np.nan
    body = analyze_body(Skeleton(tuple(names), parents, offsets, tips=tips))
    assert names[body.head] == "head"


def test_undecided_sides_do_not_depend_on_sibling_order():
    """No side names and no toe direction: the left/right assignment is arbitrary and reported as such
    ('none'), but it is the same for every sibling order."""
    picks = set()
    for seed in range(5):
        sk, truth = make_variant("snake", toes=False, shuffle=seed)
        # Side-free names that do not change with the order: thigh_l -> thigh_1, thigh_r -> thigh_2.
        plain = [truth[n].replace("_l", "_1").replace("_r", "_2") for n in sk.names]
        flat = sk.renamed(plain).with_rest(tips=np.full((sk.num_joints, 3), np.nan))
        body = analyze_body(flat)
        assert body.side_evidence == "none"
        picks.add(tuple(sorted((s, plain[lb.root]) for s, lb in body.legs.items())))
    assert len(picks) == 1
