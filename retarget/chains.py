"""Body layout: which joints form the spine, neck and head, the arms, the legs, the fingers and extras.

The analysis works on topology first (branch joints, reach of each subtree), uses names only where they
carry side markers, and geometry (a reference pose) to order limbs and find anatomical roles: on a limb
the two longest consecutive bones are the upper and lower segment (thigh and shin, upper arm and
forearm), which holds for human proportions whatever the joints are called (common practice; see the
segment table in Winter's Biomechanics and Motor Control of Human Movement, where thigh 0.245 H and shank
0.246 H, upper arm 0.186 H and forearm 0.146 H are far longer than the pelvis, clavicle, hand or foot
pieces around them).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .errors import SkeletonError
from .names import concepts_of, side_of_name, strip_side
from .skeleton import Skeleton

__all__ = ["Chain", "Limb", "BodyLayout", "analyze_body", "reference_pose", "still_joints"]

LEFT, RIGHT, CENTRE = "left", "right", "centre"


@dataclass(frozen=True)
class Chain:
    """A run of joints from a branch towards a leaf.

    kind: "spine", "neck", "arm", "leg", "finger" or "extra" (tails, twist leaves, eyes, props...).
    side: "left", "right" or "centre".
    joints: indices from the end nearest the root to the far end.
    """

    kind: str
    side: str
    joints: tuple[int, ...]


@dataclass(frozen=True)
class Limb:
    """An arm or a leg with its anatomical roles.

    joints: the whole chain from where it leaves the torso to its end.
    root: the joint that starts the upper segment (shoulder / hip), mid: elbow / knee, end: wrist / ankle,
    toe: the joint after the ankle on a leg, when there is one; clavicle: joints of the chain before root.
    certainty: in [0, 1], how clearly the roles stood out from the next best reading of the chain.
    """

    side: str
    joints: tuple[int, ...]
    root: int
    mid: int
    end: int
    toe: int | None = None
    certainty: float = 1.0

    def reach(self, positions: np.ndarray) -> float:
        """Length of the upper plus the lower segment (thigh + shin, upper arm + forearm) in the units of
        ``positions`` (J, 3); the same in any pose, since bones are rigid."""
        return float(np.linalg.norm(positions[self.mid] - positions[self.root])
                     + np.linalg.norm(positions[self.end] - positions[self.mid]))

    @property
    def lead(self) -> tuple[int, ...]:
        """Joints of the chain before the upper segment (clavicle, hip joint, buttock)."""
        return self.joints[: self.joints.index(self.root)]


@dataclass(frozen=True)
class BodyLayout:
    """The body parts of one skeleton.

    positions: (J, 3) the reference pose used for geometry (rest, or an animated frame when the rest pose
    is degenerate); tips: (J, 3) end-site positions in that pose (NaN where none).
    up: (3,) unit vector from the feet towards the head in that pose; forward: (3,) unit vector the figure
    faces (None when nothing tells); side_evidence: "names", "geometry" or "none".
    still: (J,) bool, joints the clip never moves (None without a clip of two or more frames).
    """

    pelvis: int
    chest: int
    spine: tuple[int, ...]
    neck: tuple[int, ...]
    head: int | None
    arms: dict[str, Limb]
    legs: dict[str, Limb]
    chains: tuple[Chain, ...]
    positions: np.ndarray = field(repr=False)
    tips: np.ndarray = field(repr=False)
    reference: str = "rest"
    up: np.ndarray = field(default=None, repr=False)  # type: ignore[assignment]
    forward: np.ndarray | None = field(default=None, repr=False)
    side_evidence: str = "none"
    still: np.ndarray | None = field(default=None, repr=False)

    def chain_of(self, j: int) -> Chain | None:
        for c in self.chains:
            if j in c.joints:
                return c
        return None


# ----- reference pose --------------------------------------------------------------------------------

def _is_degenerate(skeleton: Skeleton, positions: np.ndarray) -> bool:
    """True when (nearly) all bones point along one line, so the pose tells nothing about up or sides.

    Bones leaving the root are left out (a root placed at the origin is common), the rest weigh by length;
    in a T-pose or A-pose the vertical and lateral bones share the weight, no line takes over 0.8 of it."""
    inner = np.flatnonzero(skeleton.parents[1:] > 0) + 1
    d = positions[inner] - positions[skeleton.parents[inner]]
    lengths = np.linalg.norm(d, axis=1)
    keep = lengths > 1e-9 * max(float(lengths.max(initial=0.0)), 1e-12)
    if keep.sum() < 2:
        return True
    d, w = d[keep] / lengths[keep, None], lengths[keep]
    moment = (d * w[:, None]).T @ d / w.sum()
    return float(np.linalg.eigvalsh(moment)[-1]) > 0.8


def reference_pose(skeleton: Skeleton, motion=None) -> tuple[np.ndarray, np.ndarray, str]:
    """Positions to read the body from: the rest pose, or the clip's first frame when the rest pose is
    degenerate (all bones along one axis). Returns (positions (J, 3), tips (J, 3), label)."""
    from . import quat

    pos = np.asarray(skeleton.rest_global[1])
    tips = np.asarray(skeleton.rest_tips)
    if not _is_degenerate(skeleton, pos) or motion is None:
        return pos, tips, "rest"
    from .motion import forward_kinematics

    # The frame whose pose spreads most in its second direction reads best; take the best of a few
    # (forward kinematics of those frames only).
    count = motion.num_frames
    picks = np.unique(np.linspace(0, count - 1, min(count, 9)).astype(int))
    tr = None if motion.translations is None else motion.translations[picks]
    grot, gpos = forward_kinematics(skeleton, motion.rotations[picks], motion.root_positions[picks], tr)
    best, score = 0, -1.0
    for i in range(len(picks)):
        c = gpos[i] - gpos[i].mean(axis=0)
        s = np.linalg.svd(c, compute_uv=False)
        sc = s[1] / max(s[0], 1e-12)
        if sc > score + 1e-9:
            best, score = i, sc
    p = gpos[best]
    t = p + quat.rotate(grot[best], np.nan_to_num(skeleton.tips)) + np.where(np.isnan(skeleton.tips), np.nan, 0.0)
    return p, t, f"frame {int(picks[best])}"


# ----- topology helpers ------------------------------------------------------------------------------

def _reach(skeleton: Skeleton) -> tuple[np.ndarray, np.ndarray]:
    """Per joint: joints on the longest path down to a leaf (itself counted) and subtree size."""
    n = skeleton.num_joints
    depth = np.ones(n, dtype=np.int64)
    size = np.ones(n, dtype=np.int64)
    for j in range(n - 1, 0, -1):
        p = skeleton.parents[j]
        depth[p] = max(depth[p], depth[j] + 1)
        size[p] += size[j]
    return depth, size


def _geometric_reach(skeleton: Skeleton, pos: np.ndarray, tips: np.ndarray | None = None) -> np.ndarray:
    """Per joint: length of the longest path from it down to a leaf or end-site tip, in the reference
    pose."""
    n = skeleton.num_joints
    out = np.zeros(n)
    if tips is not None:
        has = ~np.isnan(tips).any(axis=1)
        out[has] = np.linalg.norm(tips[has] - pos[has], axis=1)
    for j in range(n - 1, 0, -1):
        p = skeleton.parents[j]
        out[p] = max(out[p], out[j] + np.linalg.norm(pos[j] - pos[p]))
    return out


def _main_path(skeleton: Skeleton, start: int, depth: np.ndarray, geo: np.ndarray,
               stop_at_split: bool, pos: np.ndarray | None = None) -> list[int]:
    """Follow the dominant child from ``start``: the one reaching furthest (joints, then length, the
    bone to the child included, then name so the choice never depends on sibling order).

    With stop_at_split, stop at a joint whose two best children reach equally far (a hand with fingers,
    a head with two eyes)."""
    path = [start]
    j = start
    names = skeleton.names
    while skeleton.children[j]:
        if pos is not None:
            reach = {c: geo[c] + float(np.linalg.norm(pos[c] - pos[j])) for c in skeleton.children[j]}
        else:
            reach = {c: geo[c] for c in skeleton.children[j]}
        kids = sorted(skeleton.children[j], key=lambda c: (depth[c], round(reach[c], 9), names[c]), reverse=True)
        if stop_at_split and len(kids) >= 2 and depth[kids[0]] == depth[kids[1]] and depth[kids[0]] >= 1:
            # Equal reach: fingers or eyes. Continue only if one clearly dominates in length.
            if reach[kids[1]] > 0.6 * reach[kids[0]]:
                break
        j = kids[0]
        path.append(j)
    return path


def _best_pair(skeleton: Skeleton, cands: list[int], depth, size, geo, pos, centre) -> tuple[int, int] | None:
    """The two candidates most alike in structure and length and placed as mirror images."""
    best, best_cost = None, np.inf
    scale = max(float(geo.max()), 1e-9)
    for a_i in range(len(cands)):
        for b_i in range(a_i + 1, len(cands)):
            a, b = cands[a_i], cands[b_i]
            cost = abs(int(depth[a]) - int(depth[b])) + 0.5 * abs(int(size[a]) - int(size[b]))
            cost += 4.0 * abs(geo[a] - geo[b]) / scale
            ta, tb = strip_side(skeleton.names[a]), strip_side(skeleton.names[b])
            sa, sb = side_of_name(skeleton.names[a]), side_of_name(skeleton.names[b])
            if sa and sb and sa != sb and ta == tb:
                cost -= 2.0
            # Mirror images sit at the same distance from the centre.
            da = np.linalg.norm(pos[a] - centre)
            db = np.linalg.norm(pos[b] - centre)
            cost += 2.0 * abs(da - db) / scale
            if cost < best_cost:
                best, best_cost = (a, b), cost
    return best


# Anatomical proportions used to read a limb (Winter's table of Drillis and Contini segment lengths,
# recalled from memory): upper arm 0.186 H, forearm 0.146 H, hand 0.108 H; thigh 0.245 H, shank 0.246 H,
# foot 0.152 H long of which about 0.11 H lies ahead of the ankle.
_UPPER_SHARE = {"arm": 0.186 / (0.186 + 0.146), "leg": 0.245 / (0.245 + 0.246)}
_END_REACH = {"arm": 0.108 / 0.146, "leg": 0.11 / 0.246}
_ROLE_NAMES = {"arm": ("upperarm", "forearm", "hand"), "leg": ("thigh", "shin", "foot")}


def _name_cost(concepts: frozenset, role: str) -> float:
    """Cost of giving a joint with these name concepts the anatomical role; 0 when the name is silent."""
    from .names import FINGER_CONCEPTS

    if not concepts:
        return 0.0
    if "end" in concepts:
        return 3.0
    if "twist" in concepts:
        return 2.0
    part = concepts - {"twist", "end"}
    if role in part:
        return -2.0 if len(part) == 1 else -1.0
    if part & ({"clavicle", "buttock", "finger", "root", "pelvis", "spine", "chest"} | set(FINGER_CONCEPTS)
               | set(_ROLE_NAMES["arm"]) | set(_ROLE_NAMES["leg"]) | {"toe"}):
        return 3.0
    return 0.0


def _limb_roles(chain: list[int], pos: np.ndarray, kind: str, skeleton: Skeleton,
                reach: np.ndarray | None = None, still: np.ndarray | None = None
                ) -> tuple[int, int, int, int | None, float]:
    """root, mid, end (and toe for legs) of a limb chain, and how clearly they stood out.

    Every (root, mid, end) along the chain is scored; the reading with the lowest cost wins:
    - the upper segment's share of the two (0.56 for arms, 0.50 for legs, Winter's table), and the two
      segments covering most of the chain (so a clavicle or buttock stays out front);
    - joints inside a segment must lie on its line (inline twist joints do, a bent lead bone does not);
    - no role on a joint whose bone to the next chain joint has zero length (the co-located joint after
      it carries that bone) or on a joint the clip never moves;
    - what lies beyond the end (hand and fingers, the foot ahead of the ankle) against its share;
    - names, when they speak (upper arm / forearm / hand, thigh / shin / foot; twist and end markers
      take no role).
    """
    from .names import concepts_of

    n = len(chain)
    if n < 3:
        raise SkeletonError(f"the {kind} starting at {skeleton.names[chain[0]]!r} has fewer than 3 joints",
                            path=skeleton.source)
    p = pos[list(chain)]
    seg = np.linalg.norm(np.diff(p, axis=0), axis=1)
    cum = np.concatenate([[0.0], np.cumsum(seg)])
    total = max(float(cum[-1]), 1e-12)
    tol = 1e-4 * total
    share0, reach0 = _UPPER_SHARE[kind], _END_REACH[kind]
    concepts = [concepts_of(skeleton.names[q]) for q in chain]
    names_cost = [[_name_cost(c, r) for r in _ROLE_NAMES[kind]] for c in concepts]
    moving = None
    if still is not None:
        st = np.asarray(still)[list(chain)]
        if not st.all():
            moving = ~st
    # dev[a, b, q]: distance of joint q from the line through joints a and b, over the arc length a..b.
    d = p[None, :, :] - p[:, None, :]                                   # d[a, b] = p[b] - p[a]
    dd = np.einsum("abk,abk->ab", d, d)
    w = p[None, None, :, :] - p[:, None, None, :]                       # w[a, q] = p[q] - p[a]
    t = np.einsum("abk,aqk->abq", d, w[:, 0]) / np.where(dd > 1e-24, dd, 1.0)[:, :, None]
    perp = w[:, 0][:, None, :, :] - t[..., None] * d[:, :, None, :]
    arc = np.maximum(cum[None, :] - cum[:, None], 1e-12)
    dev = (np.linalg.norm(perp, axis=-1) / arc[:, :, None]).tolist()
    cost_of_dev = [[[3.0 * min(max((v - 0.02) / 0.04, 0.0), 1.0) for v in row] for row in plane]
                   for plane in dev]

    def straight_cost(a: int, b: int) -> float:
        return sum(cost_of_dev[a][b][q] for q in range(a + 1, b))

    segl = seg.tolist()
    cuml = cum.tolist()
    import math

    scored = []
    for i in range(n - 2):
        for j in range(i + 1, n - 1):
            l1 = cuml[j] - cuml[i]
            if l1 <= tol:
                continue
            for k in range(j + 1, n):
                l2 = cuml[k] - cuml[j]
                if l2 <= tol:
                    continue
                cost = ((l1 / (l1 + l2) - share0) / 0.1) ** 2 - 2.0 * (l1 + l2) / total
                cost += straight_cost(i, j) + straight_cost(j, k)
                for role, q in enumerate((i, j, k)):
                    if q + 1 < n and segl[q] <= tol:
                        cost += 5.0
                    if moving is not None and not moving[q]:
                        cost += 4.0
                    cost += names_cost[q][role]
                after = float(reach[chain[k]]) if reach is not None else 0.0
                if after > tol:
                    cost += 0.5 * math.log(after / l2 / reach0) ** 2
                else:
                    cost += 0.5
                scored.append((cost, i, j, k))
    if not scored:
        raise SkeletonError(f"the {kind} starting at {skeleton.names[chain[0]]!r} has no two bones of any "
                            "length", path=skeleton.source)
    scored.sort(key=lambda t: (t[0], t[1], t[2], t[3]))
    best = scored[0]
    margin = scored[1][0] - best[0] if len(scored) > 1 else 10.0
    _, i, j, k = best
    root, mid, end = chain[i], chain[j], chain[k]
    toe = None
    if kind == "leg" and k + 1 < n:
        c = concepts[k + 1]
        if not ("end" in c and "toe" not in c):
            toe = chain[k + 1]
    return root, mid, end, toe, float(1.0 - np.exp(-max(margin, 0.0)))


def still_joints(motion) -> np.ndarray | None:
    """(J,) bool: joints whose local rotation (and translation) never change over the clip; None when the
    clip has fewer than two frames. A rotation and its negated quaternion count as the same."""
    if motion is None or motion.num_frames < 2:
        return None
    rot = motion.rotations
    dots = np.abs(np.einsum("fjk,jk->fj", rot, rot[0]))
    still = dots.min(axis=0) >= 1.0 - 1e-12
    if motion.translations is not None:
        still &= np.all(np.abs(motion.translations - motion.translations[:1]) <= 1e-9, axis=(0, 2))
    still[0] &= bool(np.all(np.abs(motion.root_positions - motion.root_positions[:1]) <= 1e-9))
    return still


def _collect_rest(skeleton: Skeleton, assigned: dict[int, tuple[str, str]], hands: set[int]) -> list[Chain]:
    """Group every joint not yet in a chain into chains that follow single children."""
    chains: list[Chain] = []
    n = skeleton.num_joints
    for j in range(n):
        if j in assigned:
            continue
        p = int(skeleton.parents[j])
        # Start a chain where the parent belongs elsewhere or branches.
        if p >= 0 and p not in assigned and len(skeleton.children[p]) == 1:
            continue
        run = [j]
        k = j
        while len(skeleton.children[k]) == 1 and skeleton.children[k][0] not in assigned:
            k = skeleton.children[k][0]
            run.append(k)
        anc = p
        while anc >= 0 and anc not in hands and anc not in assigned:
            anc = int(skeleton.parents[anc])
        under_hand = anc in hands
        parent_side = assigned.get(anc, ("", CENTRE))[1] if anc >= 0 else CENTRE
        side = side_of_name(skeleton.names[j]) or parent_side
        kind = "finger" if under_hand else "extra"
        for r in run:
            assigned[r] = (kind, side)
        chains.append(Chain(kind, side, tuple(run)))
    return chains


def _unit(v: np.ndarray) -> np.ndarray | None:
    n = np.linalg.norm(v)
    return None if not np.isfinite(n) or n < 1e-12 else v / n


def analyze_body(skeleton: Skeleton, motion=None) -> BodyLayout:
    """Find pelvis, spine, neck and head, arms, legs, fingers and extra chains.

    motion: optional clip on this skeleton, used when the rest pose is degenerate.
    Raises SkeletonError naming the skeleton when it has no legs, no arms or no torso.
    """
    pos, tips, ref = reference_pose(skeleton, motion)
    depth, size = _reach(skeleton)
    geo = _geometric_reach(skeleton, pos, tips)
    still = still_joints(motion)
    names = skeleton.names
    kids = skeleton.children

    # 1. Pelvis: walking down from the root, the first joint with three or more long branches.
    j = 0
    pelvis = None
    leg_cands: list[int] = []
    torso = None
    while True:
        big = [c for c in kids[j] if depth[c] >= 3]
        if len(big) >= 3:
            pelvis = j
            torso = max(big, key=lambda c: (size[c], depth[c]))
            leg_cands = [c for c in big if c != torso]
            break
        if len(big) == 2:
            heavy = max(big, key=lambda c: (size[c], depth[c]))
            other = big[0] if big[1] == heavy else big[1]
            sub = other
            while len([c for c in kids[sub] if depth[c] >= 3]) == 1:
                sub = [c for c in kids[sub] if depth[c] >= 3][0]
            sub_big = [c for c in kids[sub] if depth[c] >= 3]
            if len(sub_big) >= 2:
                pelvis, torso, leg_cands = j, heavy, sub_big
                break
            j = heavy
            continue
        if len(big) == 1:
            j = big[0]
            continue
        raise SkeletonError("no legs found: no joint has two long branches besides the torso "
                            f"(looked from root {names[0]!r})", path=skeleton.source)
    centre = pos[pelvis]
    pair = _best_pair(skeleton, leg_cands, depth, size, geo, pos, centre)
    if pair is None:
        raise SkeletonError(f"no pair of legs under {names[pelvis]!r}", path=skeleton.source)
    leg_starts = list(pair)

    # 2. Chest: down the torso, the first joint with two long mirrored branches (the arms).
    spine = [pelvis]
    k = torso
    chest = None
    arm_starts: list[int] = []
    while True:
        spine.append(k)
        big = [c for c in kids[k] if depth[c] >= 3]
        if len(big) >= 2:
            p2 = _best_pair(skeleton, big, depth, size, geo, pos, pos[k])
            if p2 is not None:
                chest = k
                arm_starts = list(p2)
                break
        if not kids[k]:
            break
        k = max(kids[k], key=lambda c: (size[c], depth[c]))
    if chest is None:
        raise SkeletonError(f"no arms found: no joint above {names[pelvis]!r} has two long mirrored branches",
                            path=skeleton.source)

    # 3. Neck and head: the longest remaining branch of the chest.
    rest_kids = [c for c in kids[chest] if c not in arm_starts]
    neck: list[int] = []
    head = None
    if rest_kids:
        nk = max(rest_kids, key=lambda c: (depth[c], geo[c] + float(np.linalg.norm(pos[c] - pos[chest])),
                                           names[c]))
        neck = _main_path(skeleton, nk, depth, geo, stop_at_split=True, pos=pos)
        named = [q for q in neck if "head" in concepts_of(names[q]) and "end" not in concepts_of(names[q])]
        if named:
            head = named[-1]
        elif len(neck) >= 2 and ("end" in concepts_of(names[neck[-1]]) or (
                still is not None and still[neck[-1]] and not still[neck[-2]] and not kids[neck[-1]])):
            head = neck[-2]  # an end marker above the head, or a leaf the clip never moves
        else:
            head = neck[-1]
        neck = neck[: neck.index(head) + 1]

    # 4. Limbs with their roles.
    def limb(start: int, kind: str) -> tuple[list[int], tuple]:
        chain = _main_path(skeleton, start, depth, geo, stop_at_split=True, pos=pos)
        return chain, _limb_roles(chain, pos, kind, skeleton, geo, still)

    legs_raw = [limb(s, "leg") for s in leg_starts]
    arms_raw = [limb(s, "arm") for s in arm_starts]

    # 5. Up and forward.
    feet = np.array([pos[r[1][2]] for r in legs_raw])
    top = pos[head] if head is not None else pos[chest]
    up = _unit(top - feet.mean(axis=0))
    if up is None:
        raise SkeletonError("cannot tell up from down: head and feet coincide", path=skeleton.source)

    # 6. Sides: names first, geometry (toes point forward) second.
    def name_side(chain: list[int]) -> str | None:
        votes = [side_of_name(names[q]) for q in chain]
        votes = [v for v in votes if v]
        if votes and all(v == votes[0] for v in votes):
            return votes[0]
        return None

    leg_sides = [name_side(c) for c, _ in legs_raw]
    arm_sides = [name_side(c) for c, _ in arms_raw]
    forward = None
    evidence = "none"
    geo_fwd = _foot_forward(legs_raw, pos, tips, up, skeleton)
    if set(leg_sides) == {LEFT, RIGHT} and set(arm_sides) == {LEFT, RIGHT}:
        evidence = "names"
        lv = _side_vector(legs_raw, arms_raw, leg_sides, arm_sides, pos)
        forward = _unit(np.cross(lv - np.dot(lv, up) * up, up))
    elif geo_fwd is not None:
        evidence = "geometry"
        forward = geo_fwd
        left = np.cross(up, forward)
        leg_sides = [LEFT if np.dot(pos[r[0]] - centre, left) > 0 else RIGHT for _, r in legs_raw]
        arm_sides = [LEFT if np.dot(pos[r[0]] - pos[chest], left) > 0 else RIGHT for _, r in arms_raw]
        if len(set(leg_sides)) < 2 or len(set(arm_sides)) < 2:
            evidence = "none"
    if evidence == "none":
        # Nothing tells: a fixed order (by name) so the answer at least never depends on sibling order.
        legs_raw.sort(key=lambda cr: names[cr[0][0]])
        arms_raw.sort(key=lambda cr: names[cr[0][0]])
        leg_sides, arm_sides = [LEFT, RIGHT], [LEFT, RIGHT]

    legs = {s: Limb(s, tuple(c), *r) for s, (c, r) in zip(leg_sides, legs_raw)}
    arms = {s: Limb(s, tuple(c), r[0], r[1], r[2], None, r[4]) for s, (c, r) in zip(arm_sides, arms_raw)}

    # 7. Chains for everything.
    assigned: dict[int, tuple[str, str]] = {}
    chains: list[Chain] = [Chain("spine", CENTRE, tuple(spine))]
    for q in spine:
        assigned[q] = ("spine", CENTRE)
    if neck:
        chains.append(Chain("neck", CENTRE, tuple(neck)))
        for q in neck:
            assigned[q] = ("neck", CENTRE)
    for kind, group in (("arm", arms), ("leg", legs)):
        for s in (LEFT, RIGHT):
            lb = group[s]
            chains.append(Chain(kind, s, lb.joints))
            for q in lb.joints:
                assigned[q] = (kind, s)
    hands = {arms[LEFT].end, arms[RIGHT].end} | {arms[s].joints[-1] for s in (LEFT, RIGHT)}
    chains.extend(_collect_rest(skeleton, assigned, hands))
    return BodyLayout(pelvis, chest, tuple(spine), tuple(neck), head, arms, legs, tuple(chains),
                      pos, tips, ref, up, forward, evidence, still)


def _side_vector(legs_raw, arms_raw, leg_sides, arm_sides, pos) -> np.ndarray:
    v = np.zeros(3)
    for (chain, roles), s in list(zip(legs_raw, leg_sides)) + list(zip(arms_raw, arm_sides)):
        v += (1.0 if s == LEFT else -1.0) * pos[roles[0]]
    return v


def _foot_forward(legs_raw, pos, tips, up, skeleton) -> np.ndarray | None:
    """Direction the toes point, from ankle to toe joint or end site, flattened onto the ground."""
    acc = np.zeros(3)
    for chain, (root, mid, end, toe, _) in legs_raw:
        if toe is not None:
            d = pos[toe] - pos[end]
            if np.linalg.norm(d) < 1e-9 and not np.isnan(tips[toe]).any():
                d = tips[toe] - pos[end]
        elif not np.isnan(tips[end]).any():
            d = tips[end] - pos[end]
        else:
            continue
        d = d - np.dot(d, up) * up
        acc += d
    f = _unit(acc)
    if f is None:
        return None
    return f
