"""Axis and unit conventions, their detection, and the change into the canonical space.

Canonical space, where two skeletons are compared: +Y up, the character faces +Z, metres (the glTF 2.0
convention). Every skeleton carries a Convention: its up axis, its forward axis and metres per unit.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .errors import OptionError

__all__ = ["Convention", "detect_convention", "parse_axis", "guess_units", "UNIT_METRES"]

_AXIS_VECTORS = {
    "+X": (1.0, 0.0, 0.0), "-X": (-1.0, 0.0, 0.0),
    "+Y": (0.0, 1.0, 0.0), "-Y": (0.0, -1.0, 0.0),
    "+Z": (0.0, 0.0, 1.0), "-Z": (0.0, 0.0, -1.0),
}

UNIT_METRES = {"m": 1.0, "cm": 0.01, "mm": 0.001, "in": 0.0254}

# Plausible standing heights of a figure, metres. Adult stature mostly lies in 1.45-2.0 m; characters
# stretch that (recalled from memory, common practice). A height that fits no unit in this band is
# reported as unknown rather than forced.
_HEIGHT_BAND_M = (1.0, 2.6)


def parse_axis(text: str) -> str:
    """Normalise an axis name: "y", "+Y", "-z" -> "+Y", "+Y", "-Z"; OptionError otherwise."""
    t = str(text).strip().upper()
    if len(t) == 1:
        t = "+" + t
    if t not in _AXIS_VECTORS:
        raise OptionError(f"axis must be one of +X -X +Y -Y +Z -Z, got {text!r}")
    return t


def _snap(v: np.ndarray) -> tuple[str, float]:
    """Nearest signed axis to a unit vector and the cosine to it."""
    k = int(np.argmax(np.abs(v)))
    sign = "+" if v[k] >= 0 else "-"
    return sign + "XYZ"[k], float(abs(v[k]))


def guess_units(height: float) -> tuple[str, float | None]:
    """Unit name and metres per unit from a figure's height in file units; ("unknown", None) when the
    height fits no common unit."""
    fits = []
    for name in ("m", "cm", "in", "mm"):
        h = height * UNIT_METRES[name]
        if _HEIGHT_BAND_M[0] <= h <= _HEIGHT_BAND_M[1]:
            fits.append(name)
    if len(fits) == 1:
        return fits[0], UNIT_METRES[fits[0]]
    return "unknown", None


@dataclass(frozen=True)
class Convention:
    """How a file's space is laid out.

    up, forward: signed axes such as "+Y"; metres_per_unit: None when unknown.
    up_confidence, forward_confidence: cosine between the detected direction and the snapped axis (1.0 for
    user overrides); forward_evidence: "names", "geometry", "override" or "none".
    height: the figure's height in file units (feet to head), as measured in the reference pose.
    """

    up: str = "+Y"
    forward: str = "+Z"
    metres_per_unit: float | None = 1.0
    units: str = "m"
    up_confidence: float = 1.0
    forward_confidence: float = 1.0
    forward_evidence: str = "override"
    height: float | None = None

    def __post_init__(self) -> None:
        up, fw = parse_axis(self.up), parse_axis(self.forward)
        if up[1] == fw[1]:
            raise OptionError(f"up ({up}) and forward ({fw}) must be different axes")
        object.__setattr__(self, "up", up)
        object.__setattr__(self, "forward", fw)

    @property
    def up_vector(self) -> np.ndarray:
        return np.array(_AXIS_VECTORS[self.up])

    @property
    def forward_vector(self) -> np.ndarray:
        return np.array(_AXIS_VECTORS[self.forward])

    @property
    def scale(self) -> float:
        """Metres per unit, falling back to a nominal 1.75 m figure when units are unknown."""
        if self.metres_per_unit is not None:
            return self.metres_per_unit
        if self.height:
            return 1.75 / self.height
        return 1.0

    def file_to_canonical(self) -> np.ndarray:
        """(3, 3) rotation taking file-space vectors to canonical axes (+Y up, +Z forward); no scaling."""
        up, fw = self.up_vector, self.forward_vector
        left = np.cross(up, fw)
        # Rows are the canonical X (left), Y (up), Z (forward) axes expressed in file space.
        return np.stack([left, up, fw])

    def canonical_to_file(self) -> np.ndarray:
        """(3, 3) rotation taking canonical vectors back to file axes."""
        return self.file_to_canonical().T

    def with_overrides(self, up: str | None = None, forward: str | None = None,
                       metres_per_unit: float | None = None) -> "Convention":
        """A copy with user choices; overridden parts get confidence 1."""
        changes: dict = {}
        if up is not None:
            changes.update(up=parse_axis(up), up_confidence=1.0)
        if forward is not None:
            changes.update(forward=parse_axis(forward), forward_confidence=1.0, forward_evidence="override")
        c = replace(self, **changes)
        if metres_per_unit is not None:
            if not metres_per_unit > 0:
                raise OptionError(f"metres per unit must be positive, got {metres_per_unit}")
            c = replace(c, metres_per_unit=float(metres_per_unit), units="override")
        return c


def detect_convention(skeleton, motion=None, body=None) -> Convention:
    """Detect up axis, forward axis and units of a skeleton (and its clip, for degenerate rest poses).

    Up: from the feet towards the head. Forward: from left/right names (left x up), else from the toes
    pointing ahead of the ankles. Units: from the figure's height. body: an already computed BodyLayout.
    """
    from .chains import analyze_body

    if body is None:
        body = analyze_body(skeleton, motion)
    up, up_conf = _snap(body.up)
    up_vec = np.array(_AXIS_VECTORS[up])
    if body.forward is not None:
        f = body.forward - np.dot(body.forward, up_vec) * up_vec
        n = np.linalg.norm(f)
        forward, fw_conf = _snap(f / n) if n > 1e-9 else (None, 0.0)
        fw_conf = fw_conf * float(np.linalg.norm(body.forward - np.dot(body.forward, body.up) * body.up))
    else:
        forward, fw_conf = None, 0.0
    evidence = body.side_evidence
    if forward is None or forward[1] == up[1]:
        # Nothing tells: pick the axis after up, and say so with zero confidence.
        forward = {"X": "+Y", "Y": "+Z", "Z": "+X"}[up[1]]
        fw_conf, evidence = 0.0, "none"
    pts = np.concatenate([body.positions, body.tips[~np.isnan(body.tips).any(axis=1)]])
    heights = pts @ up_vec
    height = float(heights.max() - heights.min())
    units, mpu = guess_units(height)
    return Convention(up, forward, mpu, units, up_conf, float(fw_conf), evidence, height)
