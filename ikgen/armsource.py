"""Where the commands get their arm: an arm file (.toml, .json) or one chain of a URDF (.urdf).

``add_arm_source_options(parser)`` adds the options that choose and convert a URDF chain to a
subcommand; ``load_arm_sources(paths, args)`` (or ``load_arm_source`` for one path) returns the
Arms, reading each file by its ending. Every command that takes an arm goes through here, so a
.urdf works wherever an arm file does. The URDF modules are imported only for .urdf files: arm
files never need the optional URDF libraries.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from .armfile import load_arm
from .errors import IkgenError, quote
from .model import CONVENTIONS, Arm

URDF_SUFFIX = ".urdf"
ARM_HELP = "arm description file (.toml or .json), or a URDF robot description (.urdf)"


def add_arm_source_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("URDF input", "when an ARM is a .urdf file: which chain, which DH "
                                                    "convention (see docs/urdf.md)")
    group.add_argument("--root-link", metavar="LINK",
                       help="the link the chain starts from (default: the root link of the URDF's tree)")
    group.add_argument("--tip-link", metavar="LINK",
                       help="the link the chain ends at (default: the only leaf link below the root)")
    group.add_argument("--dh-convention", choices=CONVENTIONS, default=None,
                       help="DH convention of the converted table (default: standard)")
    parser.add_argument("--given-joint", metavar="JOINT", default=None,
                        help="the joint whose reading the caller gives (a number from 1, a joint name, or 'auto' "
                             "for the first joint the derivation can take as given); for arms with one joint more "
                             "than their target's freedoms, such as seven-axis arms; overrides [target] given_joint")


def is_urdf(path: str | Path) -> bool:
    return Path(path).suffix.lower() == URDF_SUFFIX


def chosen_options(args) -> list[str]:
    names = (("root_link", "--root-link"), ("tip_link", "--tip-link"), ("dh_convention", "--dh-convention"))
    return [option for attribute, option in names if getattr(args, attribute, None) is not None]


def load_arm_sources(paths: list[str], args=None) -> list[Arm]:
    """The arm of each path; ``args`` (an argparse namespace) carries the URDF options, if any."""
    options = chosen_options(args)
    if options and not any(is_urdf(p) for p in paths):
        verb = "applies" if len(options) == 1 else "apply"
        raise IkgenError(f"{', '.join(options)} {verb} to .urdf files only, and no ARM given is one; expected "
                         f"a .urdf file, or no {options[0]}")
    arms = []
    for path in paths:
        if is_urdf(path):
            from .urdf import load_urdf_arm
            arms.append(load_urdf_arm(path, getattr(args, "root_link", None), getattr(args, "tip_link", None),
                                      getattr(args, "dh_convention", None) or "standard"))
        else:
            arms.append(load_arm(path))
    choice = getattr(args, "given_joint", None)
    if choice is not None:
        arms = [with_given_joint(arm, choice) for arm in arms]
    return arms


def with_given_joint(arm: Arm, choice: str) -> Arm:
    """``arm`` with the given joint chosen on the command line: a number, a joint name or 'auto'."""
    import dataclasses
    if choice == "auto":
        from .engine import given_choices
        good = [k for k, reason in given_choices(arm) if reason is None]
        if not good:
            raise IkgenError(f"--given-joint auto: no joint of arm '{arm.name}' can be given (the derivation refuses "
                             "every choice; see `ikgen describe`); expected an arm with one joint more than its "
                             "target's freedoms")
        return dataclasses.replace(arm, given_joint=good[0])
    names = {j.name: j.index for j in arm.joints}
    if choice in names:
        return dataclasses.replace(arm, given_joint=names[choice])
    if choice.isdigit() and 1 <= int(choice) <= arm.dof:
        return dataclasses.replace(arm, given_joint=int(choice))
    raise IkgenError(f"--given-joint {quote(choice)}: arm '{arm.name}' has no such joint; expected a number from 1 to "
                     f"{arm.dof}, a joint name ({', '.join(names)}) or 'auto'")


def load_arm_source(path: str, args=None) -> Arm:
    return load_arm_sources([path], args)[0]
