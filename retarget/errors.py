"""One exception family for everything the library refuses.

Every message names the file (when there is one), the place in it (line, frame, joint or entry) and what
was expected, so a person can fix the input without reading a traceback.
"""

from __future__ import annotations

__all__ = [
    "RetargetError",
    "BVHError",
    "GLTFError",
    "SkeletonError",
    "MappingError",
    "OptionError",
    "options_from",
]


class RetargetError(Exception):
    """Base class of every error the library raises on purpose."""

    def __init__(self, message: str, *, path: str | None = None, line: int | None = None):
        self.path = str(path) if path is not None else None
        self.line = line
        self.detail = message
        where = ""
        if self.path is not None:
            where = self.path + (f":{line}" if line is not None else "") + ": "
        elif line is not None:
            where = f"line {line}: "
        super().__init__(where + message)


class BVHError(RetargetError):
    """A BVH file that cannot be read or written."""


class GLTFError(RetargetError):
    """A glTF file that cannot be read or written."""


class SkeletonError(RetargetError):
    """A skeleton that lacks what an operation needs (legs, a head, a unique name...)."""


class MappingError(RetargetError):
    """A joint mapping that does not fit the two skeletons it is used with."""


class OptionError(RetargetError):
    """A user option outside its allowed range."""


def options_from(model, values: dict, label: str):
    """Build the pydantic options ``model`` from ``values``; the first problem becomes an OptionError
    naming the option ("<label> <name>: <what is wrong>")."""
    from pydantic import ValidationError

    try:
        return model(**values)
    except ValidationError as exc:
        first = exc.errors()[0]
        where = ".".join(str(p) for p in first.get("loc", ())) or "(all)"
        raise OptionError(f"{label} {where}: {first.get('msg', 'invalid value')}") from None
