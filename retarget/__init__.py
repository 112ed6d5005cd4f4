"""Cross-structure motion retargeting: capture takes onto differently built character rigs.

The public API is re-exported here; see README.md and DEVELOPERS.md.
"""

from __future__ import annotations

from . import quat
from .chains import BodyLayout, Chain, Limb, analyze_body
from .convention import Convention, detect_convention
from .errors import (BVHError, GLTFError, MappingError, OptionError, RetargetError, SkeletonError)
from .io import read_bvh, read_motion, write_bvh, write_motion
from .mapping import JointPair, Mapping, UnmappedJoint, load_mapping, save_mapping
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
    "RetargetError",
    "BVHError",
    "GLTFError",
    "SkeletonError",
    "MappingError",
    "OptionError",
]
__version__ = "0.1.0"

