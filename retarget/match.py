"""Skeleton-graph matcher: which target joint each source joint drives, how sure, and why.

Evidence comes in three kinds and is used in this order:

1. Topology. Both trees are read as body layouts (``chains.analyze_body``): pelvis, spine, neck and
   head, two arms, two legs, fingers and extra chains, split at branch joints. Chains are matched to
   chains of the same kind and side (spine to spine, left arm to left arm, fingers of the left hand to
   fingers of the left hand, extras to extras hanging from the same mapped joint).
2. Inside a chain, anatomical anchors are paired first (pelvis, spine top, neck, head, clavicle, upper
   arm, forearm, hand, thigh, shin, foot, toe: the roles found by the layout from proportions,
   straightness, names and stillness). The joints between two anchors are aligned by a monotone
   alignment (dynamic programming) on normalised arc length: each joint is represented by the stretch of
   the chain its bone covers, two joints pair when their stretches overlap enough. Ancestry is preserved
   by construction, extra or missing joints are skipped, never forced, and a zero-length bone covers no
   stretch, so it never takes a body joint.
3. Geometry in canonical space (+Y up, facing +Z, left +X), with positions relative to the pelvis and
   divided by the figure's height: which finger is which (thumb ahead, little finger behind), where an
   extra joint sits on its parent, which side a limb is on when names say nothing.
Names (tokens, side markers, anatomical and H-Anim words) vote in every step and raise or lower the
confidence of each pair.

Left and right are never swapped: a limb's side comes from its names, else from geometry with the
detected forward axis (toes ahead of the ankles); when neither tells, every sided pair says so with a low
confidence instead of guessing silently.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from .chains import CENTRE, LEFT, RIGHT, BodyLayout, Chain, analyze_body
from .names import FINGER_CONCEPTS, concepts_of, name_affinity, side_of_name
from .skeleton import Skeleton

if TYPE_CHECKING:
    from .mapping import Mapping

__all__ = ["match"]

_ARM_ROLES = ("upper arm", "forearm", "hand")
_LEG_ROLES = ("thigh", "shin", "foot")
_EPS = 1e-4          # a bone shorter than this share of its section (or of the height) has zero length
_MIN_GAIN = 0.35     # stretches must overlap at least this much (intersection over union) to pair


@dataclass
class _Figure:
    """One skeleton read for matching.

    pos: (J, 3) reference-pose positions in canonical axes, pelvis at the origin, divided by the height;
    tips: (J, 3) end-site positions likewise (NaN where none); still: (J,) bool or None; anc: (J, J)
    bool, anc[a, b] when a is a proper ancestor of b; side_certainty in [0, 1] and side_note."""

    skeleton: Skeleton
    body: BodyLayout
    pos: np.ndarray
    tips: np.ndarray
    still: np.ndarray | None
    anc: np.ndarray
    side_certainty: float
    side_note: str
    chain_of: dict[int, Chain] = field(default_factory=dict)

    @property
    def names(self) -> tuple[str, ...]:
        return self.skeleton.names

    def parent(self, j: int) -> int:
        return int(self.skeleton.parents[j])

    def bone_after(self, chain: list[int], i: int) -> float:
        """Length of joint chain[i]'s bone: to the next chain joint, or to its tip; a leaf without a tip
        gets half its incoming bone (glTF leaves carry no end site)."""
        if i + 1 < len(chain):
            return float(np.linalg.norm(self.pos[chain[i + 1]] - self.pos[chain[i]]))
        j = chain[i]
        if not np.isnan(self.tips[j]).any():
            return float(np.linalg.norm(self.tips[j] - self.pos[j]))
        if self.skeleton.children[j]:
            return 0.0
        p = self.parent(j)
        return 0.5 * float(np.linalg.norm(self.pos[j] - self.pos[p])) if p >= 0 else 0.0


def _unit(v: np.ndarray) -> np.ndarray | None:
    n = float(np.linalg.norm(v))
    return None if not np.isfinite(n) or n < 1e-12 else v / n


def _foot_direction(body: BodyLayout) -> np.ndarray | None:
    """Mean ankle-to-toe direction (toe joint or end site), in the reference pose's own axes."""
    acc = np.zeros(3)
    for leg in body.legs.values():
        if leg.toe is not None:
            d = body.positions[leg.toe] - body.positions[leg.end]
        elif not np.isnan(body.tips[leg.end]).any():
            d = body.tips[leg.end] - body.positions[leg.end]
        else:
            continue
        acc += d
    return _unit(acc)


def _read(skeleton: Skeleton, motion, body: BodyLayout | None = None) -> _Figure:
    body = analyze_body(skeleton, motion) if body is None else body
    up = body.up
    fwd = body.forward
    if fwd is not None:
        fwd = _unit(fwd - np.dot(fwd, up) * up)
    if fwd is None:
        trial = np.array([0.0, 0.0, 1.0]) if abs(up[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
        fwd = _unit(trial - np.dot(trial, up) * up)
    left = np.cross(up, fwd)
    rot = np.stack([left, up, fwd])
    pts = np.concatenate([body.positions, body.tips[~np.isnan(body.tips).any(axis=1)]])
    height = float(np.ptp(pts @ up)) or 1.0
    origin = body.positions[body.pelvis]
    pos = (body.positions - origin) @ rot.T / height
    tips = (body.tips - origin) @ rot.T / height
    # How sure the sides are.
    if body.side_evidence == "names":
        cert, note = 1.0, ""
        foot = _foot_direction(body)
        if foot is not None:
            flat = foot - np.dot(foot, up) * up
            if np.linalg.norm(flat) > 0.3 and float(np.dot(_unit(flat), fwd)) < -0.5:
                cert, note = 0.4, "side names and toe direction disagree"
    elif body.side_evidence == "geometry":
        lat = [abs(pos[lb.root, 0]) for lb in body.legs.values()]
        lat += [abs(pos[lb.root, 0] - pos[body.chest, 0]) for lb in body.arms.values()]
        foot = _foot_direction(body)
        flat = 0.0 if foot is None else float(np.linalg.norm(foot - np.dot(foot, up) * up))
        cert = float(min(1.0, min(lat) / 0.02) * min(1.0, flat / 0.5))
        note = "sides from geometry" if cert >= 0.5 else "left/right unclear from geometry"
    else:
        cert, note = 0.0, "left/right undecided (no side names, no toe direction)"
    fig = _Figure(skeleton, body, pos, tips, body.still, skeleton.ancestor_matrix, cert, note)
    for c in body.chains:
        for j in c.joints:
            fig.chain_of[j] = c
    return fig


def _overlap(x: tuple[float, float], y: tuple[float, float], eps: float) -> float:
    """How alike two stretches of a chain are: intersection over union; two zero-length stretches match
    by closeness; a zero-length stretch never matches a real one."""
    la, lb = x[1] - x[0], y[1] - y[0]
    if la <= eps and lb <= eps:
        return max(0.0, 1.0 - abs(x[0] - y[0]) / 0.1)
    if la <= eps or lb <= eps:
        return 0.0
    inter = min(x[1], y[1]) - max(x[0], y[0])
    if inter <= 0:
        return 0.0
    iou = inter / (max(x[1], y[1]) - min(x[0], y[0]))
    # A joint standing for several merged ones pairs best with the one that starts where it starts.
    nested = inter / min(la, lb) * max(0.0, 1.0 - abs(x[0] - y[0]) / 0.1)
    return max(iou, nested)


def _align(na: int, nb: int, gain) -> list[tuple[int, int, float]]:
    """Monotone alignment maximising the summed gain: pairs (i, j, gain) strictly increasing in both;
    only positive gains pair, everything else is skipped."""
    if na == 0 or nb == 0:
        return []
    g = np.array([[gain(i, j) for j in range(nb)] for i in range(na)])
    score = np.zeros((na + 1, nb + 1))
    for i in range(1, na + 1):
        for j in range(1, nb + 1):
            best = max(score[i - 1, j], score[i, j - 1])
            if g[i - 1, j - 1] > 0:
                best = max(best, score[i - 1, j - 1] + g[i - 1, j - 1])
            score[i, j] = best
    out = []
    i, j = na, nb
    while i > 0 and j > 0:
        if g[i - 1, j - 1] > 0 and np.isclose(score[i, j], score[i - 1, j - 1] + g[i - 1, j - 1]):
            out.append((i - 1, j - 1, float(g[i - 1, j - 1])))
            i, j = i - 1, j - 1
        elif np.isclose(score[i, j], score[i - 1, j]):
            i -= 1
        else:
            j -= 1
    return out[::-1]


@dataclass
class _Pair:
    target: int
    base: float
    reason: str
    sided: bool


_PART_WORDS = {"upperarm": "upper arm", "forearm": "forearm", "thigh": "thigh", "shin": "shin", "hand": "hand",
               "foot": "foot", "clavicle": "clavicle", "head": "head", "neck": "neck", "spine": "spine",
               "chest": "chest", "pelvis": "pelvis", "toe": "toe", "eye": "eye", "jaw": "jaw"}


def _describe(concepts) -> str:
    """A few words for a set of name concepts: {"upperarm", "twist"} -> "upper arm twist"."""
    parts = [_PART_WORDS.get(c, c) for c in sorted(concepts) if c != "twist"]
    text = " / ".join(parts)
    return (text + " twist").strip() if "twist" in concepts else text


class _Matcher:
    def __init__(self, a: _Figure, b: _Figure):
        self.a, self.b = a, b
        self.pairs: dict[int, _Pair] = {}
        self.taken: dict[int, int] = {}
        self.why: dict[tuple[str, int], str] = {}

    # ----- bookkeeping -----------------------------------------------------------------------------
    def consistent(self, ja: int, jb: int) -> bool:
        if ja in self.pairs or jb in self.taken:
            return False
        if not self.pairs:
            return True
        xs = np.fromiter(self.pairs.keys(), dtype=np.int64)
        ys = np.fromiter((p.target for p in self.pairs.values()), dtype=np.int64)
        a, b = self.a.anc, self.b.anc
        return bool(np.array_equal(a[xs, ja], b[ys, jb]) and np.array_equal(a[ja, xs], b[jb, ys]))

    def add(self, ja: int, jb: int, base: float, reason: str, sided: bool) -> bool:
        if not self.consistent(ja, jb):
            return False
        self.pairs[ja] = _Pair(jb, base, reason, sided)
        self.taken[jb] = ja
        return True

    def note(self, ja: int | None, jb: int | None, reason: str) -> None:
        """Remember why a joint stayed unmapped (first reason wins)."""
        if ja is not None:
            self.why.setdefault(("source", ja), reason)
        if jb is not None:
            self.why.setdefault(("target", jb), reason)

    # ----- alignment of a section between anchors ------------------------------------------------------
    def section(self, ca: list[int], cb: list[int], ia: tuple[int, int], ib: tuple[int, int], label: str,
                sided: bool, what: str) -> None:
        """Align the joints strictly between two paired anchors (chain positions ia, ib)."""
        fa, fb = self.a, self.b
        inner_a = ca[ia[0] + 1: ia[1]]
        inner_b = cb[ib[0] + 1: ib[1]]
        if not inner_a and not inner_b:
            return
        sa = self._stretches(fa, ca, ia[0], ia[1])
        sb = self._stretches(fb, cb, ib[0], ib[1])
        self._pair_runs(inner_a, inner_b, sa, sb, label, sided, what, _EPS)

    def _stretches(self, fig: _Figure, chain: list[int], i0: int, i1: int) -> list[tuple[float, float]]:
        """Normalised stretch [start, end) of each joint strictly between chain[i0] and chain[i1]."""
        cum = [0.0]
        for i in range(i0, i1):
            cum.append(cum[-1] + float(np.linalg.norm(fig.pos[chain[i + 1]] - fig.pos[chain[i]])))
        total = cum[-1] if cum[-1] > 1e-12 else 1.0
        s = [c / total for c in cum]
        return [(s[k], s[k + 1]) for k in range(1, i1 - i0)]

    def _open_stretches(self, fig: _Figure, chain: list[int], i0: int) -> list[tuple[float, float]]:
        """Stretches of chain[i0+1:], measured from chain[i0] in heights (no far anchor to scale by)."""
        out = []
        cum = 0.0
        for i in range(i0, len(chain) - 1):
            cum += float(np.linalg.norm(fig.pos[chain[i + 1]] - fig.pos[chain[i]]))
            out.append((cum, cum + fig.bone_after(chain, i + 1)))
        return out

    def _pair_runs(self, ja: list[int], jb: list[int], sa, sb, label: str, sided: bool, what: str,
                   eps: float) -> None:
        na, nb = self.a.names, self.b.names

        def gain(i: int, j: int) -> float:
            sim = _overlap(sa[i], sb[j], eps)
            if sim <= 0:
                return -1.0
            # Equal overlaps: the joint pivoting nearer the same place wins.
            return sim + 0.25 * name_affinity(na[ja[i]], nb[jb[j]]) - _MIN_GAIN - 0.2 * abs(sa[i][0] - sb[j][0])

        for i, j, g in _align(len(ja), len(jb), gain):
            sim = _overlap(sa[i], sb[j], eps)
            self.add(ja[i], jb[j], 0.3 + 0.55 * sim, f"{label} by length along the {what}", sided)
        for i, q in enumerate(ja):
            if q not in self.pairs:
                self.note(q, None, self._extra_reason(self.a, q, sa[i], eps, label, what, "target"))
        for j, q in enumerate(jb):
            if q not in self.taken:
                self.note(None, q, self._extra_reason(self.b, q, sb[j], eps, label, what, "source"))

    def _extra_reason(self, fig: _Figure, j: int, stretch, eps: float, label: str, what: str, other: str) -> str:
        if stretch[1] - stretch[0] <= eps:
            return f"zero-length joint along the {what}"
        if "twist" in concepts_of(fig.names[j]):
            return f"extra twist joint along the {what}, no counterpart on the {other}"
        if what == "spine":
            return f"merged spine segment (no {other} spine joint starts near here)"
        return f"extra {label} with no counterpart on the {other}"

    # ----- body parts --------------------------------------------------------------------------------
    def spine_and_head(self) -> None:
        fa, fb = self.a, self.b
        ba, bb = fa.body, fb.body
        self.add(ba.pelvis, bb.pelvis, 0.95, "pelvis", False)
        sa, sb = list(ba.spine), list(bb.spine)
        self.add(ba.chest, bb.chest, 0.9, "spine top (where the arms branch)", False)
        self.section(sa, sb, (0, len(sa) - 1), (0, len(sb) - 1), "spine joint", False, "spine")
        if ba.head is None or bb.head is None:
            for f, side in ((fa, "source"), (fb, "target")):
                for j in f.body.neck:
                    self.note(j if side == "source" else None, j if side == "target" else None,
                              "no head on the other skeleton")
            return
        na = [ba.chest] + list(ba.neck)
        nb = [bb.chest] + list(bb.neck)
        self.add(ba.head, bb.head, 0.9, "head", False)
        ka, kb = self._first_real(fa, na, 1, len(na) - 1), self._first_real(fb, nb, 1, len(nb) - 1)
        if ka is not None and kb is not None:
            self.add(na[ka], nb[kb], 0.85, "neck", False)
            self.section(na, nb, (0, ka), (0, kb), "neck joint", False, "neck")
            self.section(na, nb, (ka, len(na) - 1), (kb, len(nb) - 1), "neck joint", False, "neck")
        else:
            self.section(na, nb, (0, len(na) - 1), (0, len(nb) - 1), "neck joint", False, "neck")

    @staticmethod
    def _first_real(fig: _Figure, chain: list[int], lo: int, hi: int) -> int | None:
        """Position of the first joint in chain[lo:hi] whose bone to the next chain joint has length."""
        for i in range(lo, hi):
            if np.linalg.norm(fig.pos[chain[i + 1]] - fig.pos[chain[i]]) > _EPS:
                return i
        return None

    @staticmethod
    def _last_real(fig: _Figure, chain: list[int], lo: int, hi: int) -> int | None:
        for i in range(hi - 1, lo - 1, -1):
            if np.linalg.norm(fig.pos[chain[i + 1]] - fig.pos[chain[i]]) > _EPS:
                return i
        return None

    def limb(self, kind: str, side: str) -> tuple[list[int], list[int]]:
        """Pair one arm or leg; returns the unpaired tails beyond the hand / toe (source, target)."""
        fa, fb = self.a, self.b
        la = (fa.body.arms if kind == "arm" else fa.body.legs)[side]
        lb = (fb.body.arms if kind == "arm" else fb.body.legs)[side]
        ca = [fa.parent(la.joints[0])] + list(la.joints)
        cb = [fb.parent(lb.joints[0])] + list(lb.joints)
        roles = _ARM_ROLES if kind == "arm" else _LEG_ROLES
        certainty = min(la.certainty, lb.certainty)
        base = 0.7 + 0.25 * certainty
        ia = [ca.index(la.root), ca.index(la.mid), ca.index(la.end)]
        ib = [cb.index(lb.root), cb.index(lb.mid), cb.index(lb.end)]
        for k, role in enumerate(roles):
            self.add(ca[ia[k]], cb[ib[k]], base, f"{side} {role}", True)
        segment = ("upper arm", "forearm") if kind == "arm" else ("thigh", "shin")
        self.section(ca, cb, (ia[0], ia[1]), (ib[0], ib[1]), "joint", True, f"{side} {segment[0]}")
        self.section(ca, cb, (ia[1], ia[2]), (ib[1], ib[2]), "joint", True, f"{side} {segment[1]}")
        # Lead joints between the torso and the shoulder / hip: clavicle (arm), buttock or hip joint (leg).
        lead_name = "clavicle" if kind == "arm" else "hip lead joint"
        ka = self._last_real(fa, ca, 1, ia[0])
        kb = self._last_real(fb, cb, 1, ib[0])
        if ka is not None and kb is not None:
            self.add(ca[ka], cb[kb], 0.8 if kind == "arm" else 0.6, f"{side} {lead_name}", True)
            self.section(ca, cb, (0, ka), (0, kb), lead_name, True, f"{side} {lead_name}")
            self.section(ca, cb, (ka, ia[0]), (kb, ib[0]), lead_name, True, f"{side} {lead_name}")
        else:
            for q in ca[1:ia[0]]:
                self.note(q, None, f"{lead_name} with no counterpart on the target" if kb is None
                          else f"zero-length {lead_name}")
            for q in cb[1:ib[0]]:
                self.note(None, q, f"{lead_name} with no counterpart on the source" if ka is None
                          else f"zero-length {lead_name}")
        # Toe.
        last_a, last_b = ia[2], ib[2]
        if kind == "leg":
            ta = ca.index(la.toe) if la.toe is not None else None
            tb = cb.index(lb.toe) if lb.toe is not None else None
            if ta is not None and tb is not None:
                self.add(ca[ta], cb[tb], 0.85, f"{side} toe", True)
                self.section(ca, cb, (ia[2], ta), (ib[2], tb), "joint", True, f"{side} foot")
                last_a, last_b = ta, tb
            elif ta is not None:
                self.note(ca[ta], None, "toe with no counterpart on the target")
            elif tb is not None:
                self.note(None, cb[tb], "toe with no counterpart on the source")
        tail_a, tail_b = ca[last_a + 1:], cb[last_b + 1:]
        if kind == "leg" and tail_a and tail_b:
            sa = self._open_stretches(fa, ca, last_a)
            sb = self._open_stretches(fb, cb, last_b)
            self._pair_runs(tail_a, tail_b, sa, sb, "end joint", True, f"{side} toe", _EPS)
            return [], []
        return tail_a, tail_b

    # ----- fingers -------------------------------------------------------------------------------------
    def fingers(self, side: str, tail_a: list[int], tail_b: list[int]) -> None:
        fa, fb = self.a, self.b
        hand_a, hand_b = fa.body.arms[side].end, fb.body.arms[side].end
        chains_a = [list(c.joints) for c in fa.body.chains if c.kind == "finger" and c.side == side]
        chains_b = [list(c.joints) for c in fb.body.chains if c.kind == "finger" and c.side == side]
        if tail_a:
            chains_a.append(tail_a)
        if tail_b:
            chains_b.append(tail_b)
        if not chains_a or not chains_b:
            for c in chains_a:
                for q in c:
                    self.note(q, None, "finger with no counterpart (the target hand has none)")
            for c in chains_b:
                for q in c:
                    self.note(None, q, "finger with no counterpart (the source hand has none)")
            return
        feat_a = self._finger_features(fa, chains_a, hand_a)
        feat_b = self._finger_features(fb, chains_b, hand_b)
        single_a = len(chains_a) == 1 and not feat_a[0][1] and len(chains_b) >= 2
        single_b = len(chains_b) == 1 and not feat_b[0][1] and len(chains_a) >= 2
        if single_a or single_b:
            # One unnamed finger chain for the whole hand (a mitten): it follows the finger that best
            # continues the hand's line.
            many_fig, many, many_feat = (fb, chains_b, feat_b) if single_a else (fa, chains_a, feat_a)
            limb = many_fig.body.arms[side]
            axis = _unit(many_fig.pos[limb.end] - many_fig.pos[limb.mid])
            best, best_cos = None, -2.0
            for k, c in enumerate(many):
                if many_feat[k][1] == "thumb":
                    continue
                pts = [many_fig.pos[q] for q in c] + [many_fig.tips[q] for q in c
                                                      if not np.isnan(many_fig.tips[q]).any()]
                d = _unit(np.mean(pts, axis=0) - many_fig.pos[limb.end])
                cos = -2.0 if d is None or axis is None else float(d @ axis)
                if cos > best_cos + 1e-9:
                    best, best_cos = k, cos
            if best is not None:
                ca, cb = (chains_a[0], many[best]) if single_a else (many[best], chains_b[0])
                kind = many_feat[best][1] or "central"
                other = "target" if single_b else "source"
                self._pair_chain(ca, cb, f"{side} {kind} finger", 0.5 + 0.3 * max(best_cos, 0.0), True,
                                 note=f"one finger chain on the {other} hand")
            reason_side = "target" if single_b else "source"
            for c in many:
                for q in c:
                    self.note(q if single_b else None, q if single_a else None,
                              f"finger with no counterpart (the {reason_side} hand has one finger chain)")
            return
        from scipy.optimize import linear_sum_assignment

        cost = np.full((len(chains_a), len(chains_b)), 1e6)
        for i, (fa_pos, kind_a) in enumerate(feat_a):
            for j, (fb_pos, kind_b) in enumerate(feat_b):
                c = abs(fa_pos - fb_pos)
                if kind_a and kind_b:
                    c += -0.3 if kind_a == kind_b else 1.0
                cost[i, j] = c
        rows, cols = linear_sum_assignment(cost)
        done_a, done_b = set(), set()
        for i, j in zip(rows, cols):
            c = cost[i, j]
            kind_a, kind_b = feat_a[i][1], feat_b[j][1]
            if c > 0.35 and not (kind_a and kind_a == kind_b):
                continue
            note = ""
            if kind_a and kind_a == kind_b:
                label = f"{side} {kind_a}"
            elif (kind_a or kind_b) and not (kind_a and kind_b):
                label, note = f"{side} {kind_a or kind_b}", "by position"
            else:
                label, note = f"{side} finger", "by position"
            base = 0.45 + 0.45 * float(np.clip(1.0 - c / 0.35, 0.0, 1.0)) if c > 0 else 0.9
            self._pair_chain(chains_a[i], chains_b[j], label, base, True, note)
            done_a.add(i)
            done_b.add(j)
        for i, c in enumerate(chains_a):
            if i not in done_a:
                for q in c:
                    self.note(q, None, "finger with no counterpart on the target")
        for j, c in enumerate(chains_b):
            if j not in done_b:
                for q in c:
                    self.note(None, q, "finger with no counterpart on the source")

    def _finger_features(self, fig: _Figure, chains: list[list[int]], hand: int) -> list[tuple[float, str]]:
        """Per finger chain: where it sits front to back across the hand (0 = most forward, thumb side;
        1 = most backward, little finger side) and the finger its names call it ("" when silent)."""
        ahead = []
        for c in chains:
            pts = [fig.pos[q] for q in c] + [fig.tips[q] for q in c if not np.isnan(fig.tips[q]).any()]
            ahead.append(float(np.mean([p[2] for p in pts]) - fig.pos[hand][2]))
        ahead = np.array(ahead)
        spread = float(ahead.max() - ahead.min()) if len(ahead) > 1 else 0.0
        rank = (ahead.max() - ahead) / spread if spread > 1e-6 else np.full(len(ahead), 0.5)
        out = []
        for c, r in zip(chains, rank):
            kind = ""
            for q in c:
                ks = concepts_of(fig.names[q]) & set(FINGER_CONCEPTS)
                if len(ks) == 1:
                    kind = next(iter(ks))
                    break
            out.append((float(r), kind))
        return out

    def _pair_chain(self, ca: list[int], cb: list[int], label: str, base: float, sided: bool,
                    note: str = "") -> None:
        """Align two chains hanging from paired joints by the stretch each joint's bone covers."""
        fa, fb = self.a, self.b

        def stretches(fig: _Figure, c: list[int]) -> list[tuple[float, float]]:
            cum = [0.0]
            for i in range(len(c)):
                cum.append(cum[-1] + fig.bone_after(c, i))
            total = cum[-1] if cum[-1] > 1e-12 else 1.0
            return [(cum[i] / total, cum[i + 1] / total) for i in range(len(c))]

        sa, sb = stretches(fa, ca), stretches(fb, cb)
        na, nb = fa.names, fb.names

        def gain(i: int, j: int) -> float:
            sim = _overlap(sa[i], sb[j], _EPS)
            if i == 0 and j == 0:
                sim = max(sim, 0.5)  # chains matched as wholes start together
            if sim <= 0:
                return -1.0
            return sim + 0.25 * name_affinity(na[ca[i]], nb[cb[j]]) - _MIN_GAIN

        for i, j, g in _align(len(ca), len(cb), gain):
            sim = max(_overlap(sa[i], sb[j], _EPS), 0.5 if i == j == 0 else 0.0)
            extra = ([f"joint {i + 1}"] if len(ca) > 1 else []) + ([note] if note else [])
            reason = label + (f" ({'; '.join(extra)})" if extra else "")
            self.add(ca[i], cb[j], base * (0.6 + 0.4 * sim), reason, sided)
        for q in ca:
            if q not in self.pairs:
                self.note(q, None, f"no counterpart on the target ({label})")
        for q in cb:
            if q not in self.taken:
                self.note(None, q, f"no counterpart on the source ({label})")

    # ----- extra chains --------------------------------------------------------------------------------
    def _attach(self, fig: _Figure, j: int, mapped) -> int | None:
        p = fig.parent(j)
        while p >= 0 and p not in mapped:
            p = fig.parent(p)
        return p if p >= 0 else None

    def _bone_direction(self, fig: _Figure, j: int) -> np.ndarray:
        c = fig.chain_of.get(j)
        if c is not None:
            k = c.joints.index(j)
            if k + 1 < len(c.joints):
                d = _unit(fig.pos[c.joints[k + 1]] - fig.pos[j])
                if d is not None:
                    return d
        if not np.isnan(fig.tips[j]).any():
            d = _unit(fig.tips[j] - fig.pos[j])
            if d is not None:
                return d
        p = fig.parent(j)
        d = _unit(fig.pos[j] - fig.pos[p]) if p >= 0 else None
        return d if d is not None else np.array([0.0, 1.0, 0.0])

    def extras(self) -> None:
        from scipy.optimize import linear_sum_assignment

        from . import quat

        fa, fb = self.a, self.b

        def extra_chains(fig: _Figure) -> list[list[int]]:
            pel = fig.body.pelvis
            out = []
            for c in fig.body.chains:
                if c.kind != "extra":
                    continue
                js = [q for q in c.joints if not fig.anc[q, pel]]
                if js:
                    out.append(js)
            key = lambda js: (int(fig.skeleton.depths[js[0]]), tuple(np.round(fig.pos[js[0]], 6)), fig.names[js[0]])
            return sorted(out, key=key)

        ea, eb = extra_chains(fa), extra_chains(fb)
        if not ea or not eb:
            return
        # Chains hanging inside other extra chains wait until the chain they hang from is paired: take
        # them generation by generation down the forest of extra chains.
        gens_a = self._generations(fa, ea)
        gens_b = [c for gen in self._generations(fb, eb) for c in gen]
        for gen in gens_a:
            open_a = [c for c in gen if c[0] not in self.pairs]
            open_b = [c for c in gens_b if c[0] not in self.taken]
            if not open_a or not open_b:
                continue
            cost = np.full((len(open_a), len(open_b)), 1e6)
            att_b = np.array([-1 if (q := self._attach(fb, cb[0], self.taken)) is None else q for cb in open_b])
            start_b = np.array([cb[0] for cb in open_b])
            side_b = [side_of_name(fb.names[q]) for q in start_b]
            turns: dict[tuple[int, int], np.ndarray] = {}
            for i, ca in enumerate(open_a):
                att_a = self._attach(fa, ca[0], self.pairs)
                if att_a is None:
                    continue
                hit = np.flatnonzero(att_b == self.pairs[att_a].target)
                side_a = side_of_name(fa.names[ca[0]])
                hit = [j for j in hit if not (side_a and side_b[j] and side_a != side_b[j])]
                if not hit:
                    continue
                tb = self.pairs[att_a].target
                if (att_a, tb) not in turns:
                    turns[(att_a, tb)] = quat.between_vectors(self._bone_direction(fa, att_a),
                                                              self._bone_direction(fb, tb))
                va = quat.rotate(turns[(att_a, tb)], fa.pos[ca[0]] - fa.pos[att_a])
                vb = fb.pos[start_b[hit]] - fb.pos[tb]
                dist = np.linalg.norm(vb - va, axis=1)
                aff = np.array([name_affinity(fa.names[ca[0]], fb.names[start_b[j]]) for j in hit])
                cost[i, hit] = 0.5 * (dist / 0.03) ** 2 - 1.5 * aff
            rows, cols = linear_sum_assignment(cost)
            for i, j in zip(rows, cols):
                c = cost[i, j]
                if c >= 1.0:
                    continue
                ca, cb = open_a[i], open_b[j]
                sided = bool(side_of_name(fa.names[ca[0]]) or side_of_name(fb.names[cb[0]])) or \
                    fa.chain_of[ca[0]].side != CENTRE
                label, how = self._extra_label(fa.names[ca[0]], fb.names[cb[0]])
                side = fa.chain_of[ca[0]].side
                if side != CENTRE and not label.startswith(side):
                    label = f"{side} {label}"
                base = 0.35 + 0.5 * float(np.clip(1.0 - c, 0.0, 1.0))
                self._pair_chain(ca, cb, label, base, sided, how)

    @staticmethod
    def _generations(fig: _Figure, chains: list[list[int]]) -> list[list[list[int]]]:
        """Extra chains grouped by generation: chains hanging from body joints first, then chains hanging
        from those, and so on (topological generations of the chain forest)."""
        import networkx as nx

        owner = {j: k for k, c in enumerate(chains) for j in c}
        forest = nx.DiGraph()
        forest.add_nodes_from(range(len(chains)))
        for k, c in enumerate(chains):
            p = fig.parent(c[0])
            while p >= 0 and p not in owner and fig.chain_of.get(p) is not None \
                    and fig.chain_of[p].kind == "extra":
                p = fig.parent(p)
            if p >= 0 and p in owner:
                forest.add_edge(owner[p], k)
        return [[chains[k] for k in sorted(gen)] for gen in nx.topological_generations(forest)]

    @staticmethod
    def _extra_label(a: str, b: str) -> tuple[str, str]:
        ca, cb = concepts_of(a) - {"end"}, concepts_of(b) - {"end"}
        words = ca & cb if ca and cb else ca | cb
        if not words:
            return "extra joint", "by position on its parent"
        how = "by name and position" if ca & cb else "by position on its parent"
        return _describe(words), how

    # ----- the whole match ---------------------------------------------------------------------------
    def run(self) -> None:
        self.spine_and_head()
        tails = {}
        for side in (LEFT, RIGHT):
            self.limb("leg", side)
            tails[side] = self.limb("arm", side)
        for side in (LEFT, RIGHT):
            self.fingers(side, *tails[side])
        self.extras()

    def confidence(self, ja: int, p: _Pair) -> tuple[float, str]:
        fa, fb = self.a, self.b
        conf, reason = p.base, p.reason
        na, nb = fa.names[ja], fb.names[p.target]
        ca, cb = concepts_of(na) - {"end"}, concepts_of(nb) - {"end"}
        if ca and cb:
            aff = name_affinity(na, nb)
            if aff > 0:
                conf += (1.0 - conf) * 0.6 * aff
            elif aff < 0:
                conf *= 0.6
                reason += f"; names disagree ({'/'.join(sorted(ca))} vs {'/'.join(sorted(cb))})"
        if p.sided:
            cert = min(fa.side_certainty, fb.side_certainty)
            conf = min(conf, 0.25 + 0.75 * cert)
            if cert < 0.5:
                notes = {f.side_note for f in (fa, fb) if f.side_certainty < 0.5}
                reason += "; " + "; ".join(sorted(notes))
            elif fa.side_certainty < 1.0 and fa.side_note and "disagree" in fa.side_note:
                reason += f"; source {fa.side_note}"
            elif fb.side_certainty < 1.0 and fb.side_note and "disagree" in fb.side_note:
                reason += f"; target {fb.side_note}"
        if fa.still is not None and fa.still[ja] and not fa.still.all():
            reason += "; never moves in the source clip"
        return float(np.clip(conf, 0.0, 1.0)), reason

    def unmapped_reason(self, side: str, j: int) -> str:
        fig = self.a if side == "source" else self.b
        other = "target" if side == "source" else "source"
        if fig.anc[j, fig.body.pelvis]:
            return "above the pelvis (the pelvis carries the body and its root motion)"
        reason = self.why.get((side, j))
        if reason is None:
            c = fig.chain_of.get(j)
            cs = concepts_of(fig.names[j])
            if "twist" in cs:
                reason = f"twist joint with no counterpart on the {other} (follows its parent)"
            elif "eye" in cs:
                reason = f"eye with no counterpart on the {other}"
            elif (c is not None and c.kind == "finger") or cs & (set(FINGER_CONCEPTS) | {"finger"}):
                reason = f"finger with no counterpart on the {other}"
            elif "end" in cs or (not fig.skeleton.children[j] and c is not None and len(c.joints) == 1):
                reason = f"extra leaf joint with no counterpart on the {other}"
            else:
                reason = f"extra joint with no counterpart on the {other}"
        if side == "source" and fig.still is not None and fig.still[j] and not fig.still.all() \
                and "never moves" not in reason:
            reason += "; never moves in the source clip"
        return reason


def match(source: Skeleton, target: Skeleton, source_motion=None, target_motion=None, *,
          source_body: BodyLayout | None = None, target_body: BodyLayout | None = None) -> Mapping:
    """Propose which target joint each source joint drives.

    source_motion / target_motion: optional clips on the skeletons; used when a rest pose is degenerate
    (bones along one line) and to know which joints a clip never moves.
    source_body / target_body: the skeletons' analyze_body results (with the same clips) when the caller
    has them already.
    Returns a Mapping whose pairs preserve ancestry both ways, whose root-most pair is pelvis to pelvis,
    with legs (thigh, shin, foot, toe) and arms (upper arm, forearm, hand) always paired; every pair
    carries a confidence in [0, 1] and a reason, every unpaired joint a reason.
    Raises SkeletonError when a skeleton has no recognisable body (no legs, arms or torso).
    """
    from .mapping import JointPair, Mapping, UnmappedJoint, hierarchy_signature

    fa = _read(source, source_motion, source_body)
    fb = _read(target, target_motion, target_body)
    m = _Matcher(fa, fb)
    m.run()
    pairs = []
    for ja in sorted(m.pairs):
        p = m.pairs[ja]
        conf, reason = m.confidence(ja, p)
        pairs.append(JointPair(source=source.names[ja], target=target.names[p.target],
                               confidence=round(conf, 3), reason=reason))
    unmapped = [UnmappedJoint(joint=source.names[j], side="source", reason=m.unmapped_reason("source", j))
                for j in range(source.num_joints) if j not in m.pairs]
    unmapped += [UnmappedJoint(joint=target.names[j], side="target", reason=m.unmapped_reason("target", j))
                 for j in range(target.num_joints) if j not in m.taken]
    return Mapping(pairs=pairs, source_signature=hierarchy_signature(source),
                   target_signature=hierarchy_signature(target), source_joints=list(source.names),
                   target_joints=list(target.names), unmapped=unmapped, source_file=source.source,
                   target_file=target.source)
