"""Cross-structure motion retargeting: capture takes onto differently built character rigs.

The public API is re-exported here; see README.md and DEVELOPERS.md.
"""

from __future__ import annotations

from . import quat
from .chains import BodyLayout, Chain, Limb, analyze_body
from .convention import Convention, detect_convention
from .errors import (BVHError, GLTFError, MappingError, OptionError, RetargetError, SkeletonError)
from .io import read_bvh, read_gltf, read_motion, write_bvh, write_gltf, write_motion
from .match import match
from .motion import Motion, forward_kinematics
from .skeleton import Skeleton

__all__ = [
    "quat",
    "Skeleton",
    "Motion",
    "forward_kinematics",
    "read_bvh",
    "write_bvh",
    "read_motion",
    "write_motion",
    "read_gltf",
    "write_gltf",
    "Convention",
    "detect_convention",
    "BodyLayout",
    "Chain",
    "Limb",
    "analyze_body",
    "match",
    "Mapping",
    "JointPair",
    "UnmappedJoint",
    "load_mapping",
    "save_mapping",
    "ContactSettings",
    "FootContacts",
    "FootMetrics",
    "ContactReport",
    "detect_contacts",
    "contacts_from_flags",
    "carry_contacts",
    "fix_contacts",
    "plant_feet",
    "measure_contacts",
    "two_bone_ik",
    "RetargetError",
    "BVHError",
    "GLTFError",
    "SkeletonError",
    "MappingError",
    "OptionError",
    "retarget_clip",
    "Result",
    "RetargetReport",
    "RetargetOptions",
]
__version__ = "0.1.0"

# Names whose modules import pydantic or scipy load on first use, so the command line starts fast.
_LAZY = {name: "contacts" for name in (
    "ContactSettings", "FootContacts", "FootMetrics", "ContactReport", "detect_contacts",
    "contacts_from_flags", "carry_contacts", "fix_contacts", "plant_feet", "measure_contacts", "two_bone_ik")}
_LAZY.update({name: "pipeline" for name in ("retarget_clip", "Result", "RetargetReport", "RetargetOptions")})
_LAZY.update({name: "mapping" for name in ("Mapping", "JointPair", "UnmappedJoint", "load_mapping", "save_mapping")})


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
    raise AttributeError(f"module 'retarget' has no attribute {name!r}")
