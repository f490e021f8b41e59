"""A mirrored twin's readings taken from its first solution's readings (Plan.mirror_shortcut).

Where the mirror turns a joint's angle by half a turn, the twin's reading is the first one's
v - H or v + H (H half a turn in reading units) instead of a second conversion from the angle;
where it negates the angle (zero offset 0), it is -v. Readings lie in (-H, H] (docs/solvers.md),
so the rule must not round to -H: v - H for a positive v below half an ulp of H rounds to -H,
which is why the split is half an ulp (common.half_turn_split) rather than 0. The rounding here is
IEEE 754 binary64 and binary32 round-to-nearest-even as numpy and CPython floats implement it.
"""

from __future__ import annotations

import math
import re
from types import SimpleNamespace

import numpy as np
import pytest

import shared
from helpers import demo_arm
from ikgen.backends import common

FACTORS = (180.0 / math.pi, 1.0, -180.0 / math.pi, -1.0)     # degrees or radians, either direction


def edge_values(kind, half: float, split: float) -> list:
    """Readings around 0, the split, and both ends of (-H, H], in the given type."""
    h, t = kind(half), kind(split)
    ulp = float(np.spacing(h))
    values = [kind(x) for x in np.linspace(0.0, 4.0 * ulp, 4001)]
    values += [np.nextafter(t, kind(0)), t, np.nextafter(t, kind(1)), h, np.nextafter(h, kind(0)),
               np.nextafter(-h, kind(0)), kind(1e-300) if kind is np.float64 else kind(1e-40)]
    return values + [-v for v in values]


@pytest.mark.parametrize("real, kind", [("double", np.float64), ("float", np.float32)])
@pytest.mark.parametrize("factor", FACTORS)
def test_the_half_turn_rule_keeps_every_reading_within_one_turn(real, kind, factor):
    out = SimpleNamespace(factor=factor)
    half, split = common.half_turn(out, real), common.half_turn_split(out, real)
    h = kind(half)
    assert h == kind(kind(math.pi) * kind(abs(factor)))         # the wrap's bound times the factor
    for v in edge_values(kind, half, split):
        if not -h < v <= h:
            continue
        twin = v - h if v > kind(split) else v + h
        assert twin.dtype == kind and -h < twin <= h, (v, twin)
        # the same angle: v and its twin differ by half a turn to within one rounding of H
        assert abs(abs(float(twin) - float(v)) - float(h)) <= float(np.spacing(h)), (v, twin)
    # with 0 as the split, a small positive reading would come out as -H
    tiny = np.nextafter(kind(0), kind(1))
    assert tiny - h == -h


def test_the_half_turn_rule_is_what_the_generated_solvers_compute():
    """The rule as written into the generated Python (double) and C float sources of benchtop6
    (degrees) and seedling6 (radians): v - H above the split, v + H at or below it."""
    for name in ("benchtop6", "seedling6"):
        arm = demo_arm(name)
        plan = common.lower(shared.built(arm).derivation)
        halves = [o for o in plan.outputs if plan.mirror_shortcut(o) == "half_turn"]
        assert halves, name
        python = shared.python_source(arm)
        files = shared.built(arm).files
        c_float = next(text for path, text in files.items() if path.endswith("_ik_f32.c"))
        for out in halves:
            j = out.joint
            h, t = repr(common.half_turn(out)), repr(common.half_turn_split(out))
            assert f"v{j} = v{j} - {h} if v{j} > {t} else v{j} + {h}" in python
            hf = float(np.float32(common.half_turn(out, "float")))
            line = re.search(rf"const float jv{j} = jf{j} > ([0-9.e+-]+)f \? jf{j} - ([0-9.e+-]+)f : jf{j} \+ ([0-9.e+-]+)f;",
                             c_float)
            assert line, (name, j)
            assert float(np.float32(line[1])) == common.half_turn_split(out, "float")
            assert float(np.float32(line[2])) == float(np.float32(line[3])) == hf


@pytest.mark.parametrize("name", ["benchtop6", "inspector6"])
def test_a_negated_angle_twin_equals_converting_the_negated_angle(name):
    """The wrist's joint 5 (zero offset 0; benchtop6 counts along its DH angle, inspector6 against
    it, so its readings come from angles in [-pi, pi)): the twin's reading -v (v at H kept) equals
    the conversion of the negated angle bit for bit, zeros' signs included, for every angle in
    [0, pi] at the ends and on a seeded sample."""
    arm = demo_arm(name)
    plan = common.lower(shared.built(arm).derivation)
    out = next(o for o in plan.outputs if plan.mirror_shortcut(o) == "negate")
    assert str(out.joint) == plan.mirror.joint and out.zero == 0.0
    half = common.half_turn(out)
    pi = 3.141592653589793

    def convert(th: float) -> float:          # the generated wrap into one turn, then the factor
        if out.direction > 0:
            u = th + 2 * pi if th <= -pi else (th - 2 * pi if th > pi else th)
        else:
            u = th + 2 * pi if th < -pi else (th - 2 * pi if th >= pi else th)
        return u * out.factor
    rng = np.random.default_rng(41)
    for th in [0.0, 5e-324, pi, math.nextafter(pi, 0.0)] + list(rng.uniform(0.0, pi, 2000)):
        v = convert(th)
        twin = -v if v < half else v
        converted = convert(-th)
        assert twin == converted and math.copysign(1.0, twin) == math.copysign(1.0, converted), th
