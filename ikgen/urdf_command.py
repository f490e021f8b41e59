"""The ``from-urdf`` subcommand: convert one chain of a URDF to a TOML arm file, all or nothing.

The written file describes the same arm as the URDF chain (``ikgen describe`` prints the same
table for both), so the user can review it, edit it and keep it under version control.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from .armsource import add_arm_source_options
from .errors import IkgenError
from .generate import write
from .terminal import out


def cmd_from_urdf(args) -> int:
    from .urdf import convert_urdf
    from .urdf.armtext import arm_file_text
    target = Path(args.out)
    if target.suffix.lower() != ".toml":
        raise IkgenError(f"--out {args.out}: expected a file name ending in .toml (the arm file is TOML)")
    if target.exists() and not args.force:
        raise IkgenError(f"--out {args.out}: the file exists; expected a new file name, or --force to replace it")
    converted = convert_urdf(args.urdf, args.root_link, args.tip_link, args.dh_convention or "standard")
    arm = converted.arm
    text = arm_file_text(converted)
    for path in write({target: text}):
        out(f"wrote {path}: arm '{arm.name}', {arm.dof} joints ({', '.join(j.name for j in arm.joints)}), "
            f"{arm.convention} DH, m and rad")
    for note in arm.notes:
        out(f"note: {note}")
    out(f"review it with: ikgen describe {target}")
    return 0


def register(sub) -> argparse.ArgumentParser:
    """Add the ``from-urdf`` subcommand to ``sub`` (the result of ArgumentParser.add_subparsers)."""
    p = sub.add_parser(
        "from-urdf", help="convert one chain of a URDF to a DH arm file (TOML) to review and keep",
        description="Read a URDF safely, take the chain from --root-link to --tip-link, place DH frames on "
                    "its joint axes (fixed joints merged, continuous joints as revolute joints of one turn "
                    "either side) and write the DH table, base and tool as a TOML arm file. Nothing is "
                    "written when the URDF or the chain is refused. Every command that takes an arm file "
                    "also takes the .urdf itself with the same options; see docs/urdf.md.")
    p.add_argument("urdf", metavar="URDF", help="the URDF robot description (.urdf)")
    p.add_argument("-o", "--out", required=True, metavar="ARM.toml", help="the arm file to write")
    p.add_argument("--force", action="store_true", help="replace --out when it exists")
    add_arm_source_options(p)
    p.set_defaults(run=cmd_from_urdf)
    return p
