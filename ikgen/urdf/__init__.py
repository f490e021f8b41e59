"""URDF input: one serial chain of a URDF robot description becomes an ``ikgen.model.Arm``.

``load_urdf_arm(path, root_link, tip_link, convention)`` reads the file safely (reader.py),
places DH frames on the chain's joint axes (dh.py), makes round values exact with notes
(snap.py) and builds the Arm (convert.py); ``arm_file_text`` (armtext.py) writes the result as
a TOML arm file. The URDF library (yourdfpy) and defusedxml are the optional extra "urdf".
Usage and rules: docs/urdf.md.
"""

from __future__ import annotations

from pathlib import Path

from ..model import CONVENTIONS, Arm
from .convert import Converted, convert
from .reader import MAX_URDF_BYTES, MissingExtra, read_chain

__all__ = ["MAX_URDF_BYTES", "MissingExtra", "Converted", "convert_urdf", "load_urdf_arm"]


def convert_urdf(path: str | Path, root_link: str | None = None, tip_link: str | None = None,
                 convention: str = "standard") -> Converted:
    """The chain of ``path`` from ``root_link`` to ``tip_link``, converted (arm, base and tool parts)."""
    if convention not in CONVENTIONS:
        raise ValueError(f"convention must be one of {CONVENTIONS}, not {convention!r}")
    chain = read_chain(path, root_link, tip_link)
    return convert(chain, convention, str(path))


def load_urdf_arm(path: str | Path, root_link: str | None = None, tip_link: str | None = None,
                  convention: str = "standard") -> Arm:
    """The ikgen Arm of one chain of a URDF file (see convert_urdf)."""
    return convert_urdf(path, root_link, tip_link, convention).arm
