"""Matcher speed on a 100-joint skeleton, and the measured key-joint accuracies.

Target (2-core machine): matching a 100-joint skeleton takes under 50 ms. Accuracy targets (asserted in
tests/test_match.py, reported here): >= 99% key joints over every ordered pair of the variant family,
>= 95% where names are opaque, no left/right swaps, every real pair >= 99%.
Run: python benchmarks/bench_match.py
"""

from __future__ import annotations

import itertools
import json
import statistics
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from family import FAMILY, KEY_JOINTS, make_variant  # noqa: E402
from retarget import Skeleton  # noqa: E402
from retarget.match import match  # noqa: E402


def hundred_joints(style: str = "snake", shuffle: int | None = None) -> Skeleton:
    """The fullest variant (65 joints) plus invented extras up to 100: a tail, face joints, props."""
    sk, truth = make_variant(style, spine=5, fingers=True, twist="inline", eyes=True, buttocks=True, root=True,
                             shuffle=shuffle)
    names, parents = list(sk.names), list(sk.parents)
    offsets, tips = [*sk.offsets], [*sk.tips]
    inv = {v: k for k, v in truth.items()}

    def add(name: str, parent: str, off) -> None:
        names.append(name)
        parents.append(names.index(parent))
        offsets.append(np.asarray(off, float))
        tips.append(np.full(3, np.nan))

    prev = inv["pelvis"]
    for k in range(11):                                   # tail
        add(f"tail_{k}", prev, (0, -0.01, -0.06))
        prev = f"tail_{k}"
    for k in range(14):                                   # face joints on the head
        add(f"face_{k}", inv["head"], (0.01 * (k - 7), 0.03, 0.08))
    for side in ("l", "r"):                               # props held in the hands
        prev = inv[f"hand_{side}"]
        for k in range(5):
            add(f"prop_{side}_{k}", prev, (0.0, -0.03, 0.05))
            prev = f"prop_{side}_{k}"
    return Skeleton(tuple(names), np.array(parents), np.array(offsets), tips=np.array(tips))


def timed_ms(fn, repeat: int = 15) -> float:
    fn()  # warm up (imports, caches)
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append((time.perf_counter() - t0) * 1000)
    return statistics.median(times)


def family_accuracy() -> dict:
    variants = [make_variant(**o) for o in FAMILY]
    ok = n = swaps = ook = on = 0
    for (i, (a, ta)), (j, (b, tb)) in itertools.permutations(list(enumerate(variants)), 2):
        got = match(a, b).as_dict()
        inv_a = {v: k for k, v in ta.items()}
        inv_b = {v: k for k, v in tb.items()}
        opaque = "opaque" in (FAMILY[i]["style"], FAMILY[j]["style"])
        for k in KEY_JOINTS:
            if k in inv_a and k in inv_b:
                hit = got.get(inv_a[k]) == inv_b[k]
                ok, n = ok + hit, n + 1
                if opaque:
                    ook, on = ook + hit, on + 1
                t = got.get(inv_a[k])
                if t and k[-2:] in ("_l", "_r") and tb[t] == k[:-1] + ("r" if k[-1] == "l" else "l"):
                    swaps += 1
    return {"variants": len(variants), "ordered_pairs": len(variants) * (len(variants) - 1),
            "key_joints_counted": n, "accuracy": round(ok / n, 4), "opaque_accuracy": round(ook / on, 4),
            "swaps": swaps}


def real_accuracy() -> dict:
    from conftest import find_real_clips
    from test_match import REAL_TRUTH, key_scores

    from retarget import read_bvh

    folder = find_real_clips()
    if folder is None:
        return {"skipped": "real clips folder absent"}
    clips = {}
    for tag in REAL_TRUTH:
        paths = sorted(p for p in folder.glob("*.bvh") if p.stem.endswith(tag))
        if paths:
            clips[tag] = read_bvh(paths[0])
    out = {}
    for (ta, ma), (tb, mb) in itertools.permutations(clips.items(), 2):
        m = match(ma.skeleton, mb.skeleton, ma, mb)
        ok, n, sw = key_scores(m, {v: k for k, v in REAL_TRUTH[ta].items()},
                               {v: k for k, v in REAL_TRUTH[tb].items()})
        out[f"{ta[1:]}->{tb[1:]}"] = f"{ok}/{n} swaps {sw}"
    return out


def main() -> dict:
    big = hundred_joints()
    other = hundred_joints("camel_left", shuffle=3)
    small, _ = make_variant("prefix_letter")
    res = {
        "joints": big.num_joints,
        "match_100_to_100_ms": round(timed_ms(lambda: match(big, other)), 1),
        "match_100_to_itself_ms": round(timed_ms(lambda: match(big, big)), 1),
        "match_100_to_22_ms": round(timed_ms(lambda: match(big, small)), 1),
        "family": family_accuracy(),
        "real": real_accuracy(),
    }
    return res


if __name__ == "__main__":
    print(json.dumps(main(), indent=2))
