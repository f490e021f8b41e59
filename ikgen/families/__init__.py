"""Kinematic families: each module recognises one arm structure and emits the derivation IR.

A family module provides ``FAMILY`` (a name), ``applies(arm) -> (bool, reasons)`` and
``derive(arm) -> Derivation``. ``derive_arm`` tries them in order and, when none applies, says
why each one does not.
"""

from __future__ import annotations

from ..errors import StructureError
from ..ir import Derivation
from ..model import Arm
from . import spherical_wrist

FAMILIES = (spherical_wrist,)


def derive_arm(arm: Arm) -> Derivation:
    reasons = []
    for family in FAMILIES:
        fits, words = family.applies(arm)
        if fits:
            return family.derive(arm)
        reasons.append(f"{family.FAMILY}: " + "; ".join(words))
    raise StructureError(f"no closed-form family fits arm '{arm.name}', so nothing was written. "
                         + " | ".join(reasons))
