"""The overflow bound (ikgen/backends/bounds.py): SAFE_ENTRY, within which a solver skips its
test that every solution is finite.

1. The majorant walk against evaluation. For the plans of demo arms, every named intermediate is
   evaluated in 40-digit arithmetic (mpmath, through sympy's evalf) at random inputs within what
   the walk assumes (each pose entry in [-E, E], a unit cosine and sine for each solved angle, a
   branch sign of +-1), in plan order, and must never exceed the bound the walk gave it. This is
   the inclusion property of interval arithmetic (R. E. Moore, Interval Analysis, Prentice-Hall,
   1966, ch. 2 and 3; from memory): |a + b| <= |a| + |b| and |a b| = |a| |b| for real numbers.
2. End to end: poses whose wrist centre is within reach but whose rotation part is large garbage
   (not a rotation), every entry's magnitude summing to just within SAFE_ENTRY, so that the
   wrist's quantities are as large as the bound allows. The C float build (which now skips its
   finite test there) and the C double build return only finite solutions, and do return some
   (the check is not vacuous).
3. Refusals: a plan with polynomial roots, a displacement that may be left free or a given
   reading gets no SAFE_ENTRY, and its generated C tests every solution.
4. The ladder: where the float bound stops and why (the reach radicand grows as the fourth power
   of the entries).
Demo arms are invented (examples/).
"""

from __future__ import annotations

import random

import numpy as np
import pytest
import sympy as sp

import shared
from helpers import demo_arm
from ikgen.backends import bounds, common
from ikgen.backends import c as c_backend
from ikgen.ir import angle_symbol, cos_symbol, sin_symbol
from ikgen.kinematics import NumericChain
from ikgen.verify import random_readings

DIGITS = 40
PROVED = ("benchtop6", "packer6", "kitter6", "inspector6", "seedling6", "engraver5", "kilnreach6", "mast3")


def plan_of(stem):
    arm = demo_arm(stem)
    return arm, common.lower(shared.derivation(arm))


def evaluate(expr, env):
    expr = sp.sympify(expr).replace(common.Reciprocal, lambda x: 1 / x)
    value = expr.xreplace(env).evalf(DIGITS)
    assert value.is_real, f"{expr} did not evaluate to a real number: {value}"
    return value


def sample_walk(plan, entry, real, rng):
    """One random evaluation of every named intermediate of ``plan`` within the walk's assumptions:
    (name, |value|, bound) triples."""
    bound = bounds.majorants(plan, entry, real)
    env = {s: sp.Float(rng.uniform(-entry, entry), DIGITS) for s in plan.pose_symbols}
    seen = []

    def unit_pair(j):
        phi = rng.uniform(-np.pi, np.pi)
        env[cos_symbol(j)] = sp.Float(np.cos(phi), DIGITS)
        env[sin_symbol(j)] = sp.Float(np.sin(phi), DIGITS)

    def assign(assignments):
        for a in assignments:
            env[a.target] = evaluate(a.expr, env)
            if bound[a.target] != float("inf"):
                seen.append((str(a.target), abs(float(env[a.target])), bound[a.target]))

    for block in plan.blocks:
        assign(block.temps)
        if block.kind == "compute":
            continue
        j = block.key
        env[angle_symbol(j)] = sp.Float(rng.uniform(-np.pi, np.pi), DIGITS)
        if block.kind == "cossin":
            radicand = evaluate(block.radicand, env)
            env[sp.Symbol(f"root{j}", real=True)] = sp.sqrt(max(radicand, 0))
            env[sp.Symbol(f"sg{j}", real=True)] = sp.Integer(rng.choice((-1, 1)))
            env[sp.Symbol(f"dl{j}", real=True)] = sp.Float(rng.uniform(-np.pi, np.pi), DIGITS)
            for name, expr in ((f"cn{j}", block.cn), (f"sn{j}", block.sn)):
                symbol = sp.Symbol(name, real=True)
                env[symbol] = evaluate(expr, env)
                seen.append((name, abs(float(env[symbol])), bound[symbol]))
            if block.gamma is not None:
                assign(block.root_parts()[0])
            unit_pair(j)
        elif block.kind == "pair":
            for form in block.forms:
                assign(form.temps)
                for expr in (form.det, form.cos_num, form.sin_num):
                    evaluate(expr, env)
            if block.scale_free:
                form = block.forms[0]
                env[cos_symbol(j)] = evaluate(form.cos_num, env)
                env[sin_symbol(j)] = evaluate(form.sin_num, env)
            else:
                unit_pair(j)
        elif block.kind == "sum":
            unit_pair(j)
        elif block.kind == "lin":
            form = block.forms[0]
            assign(form.temps)
            symbol = common.length_symbol(j)
            env[symbol] = evaluate(form.cos_num / form.det, env)
            seen.append((str(symbol), abs(float(env[symbol])), bound[symbol]))
    assign(plan.final_temps)
    return seen


@pytest.mark.parametrize("stem", PROVED)
def test_majorants_bound_evaluated_values(stem):
    arm, plan = plan_of(stem)
    rng = random.Random(20261204)
    checked = 0
    for real in ("double", "float"):
        entry = bounds.safe_entry(plan, real)
        assert entry > 0, f"{stem}: no {real} bound ({bounds.why_not(plan, bounds.LADDER[real][-1], real)})"
        for scale in (entry, 1.0):       # at the bound, and at the entries of an ordinary pose
            for _ in range(3):
                for name, value, limit in sample_walk(plan, scale, real, rng):
                    assert value <= limit * (1 + 1e-9), f"{stem} {real}: |{name}| = {value:.6g} > bound {limit:.6g}"
                    checked += 1
    assert checked > 100


def wrist_offset(chain, arm):
    """The wrist centre's place in the tool frame, o with w = p - R o the same for any wrist
    readings (solved from two poses that differ in joints 4-6 only)."""
    rng = np.random.default_rng(5)
    q = random_readings(arm, 1, rng)[0]
    rows, rhs = [], []
    for _ in range(3):
        other = q.copy()
        other[3:] = random_readings(arm, 1, rng)[0][3:]
        a, b = chain.pose(q), chain.pose(other)
        rows.append(a[:3, :3] - b[:3, :3])
        rhs.append(a[:3, 3] - b[:3, 3])
    offset, *_ = np.linalg.lstsq(np.vstack(rows), np.concatenate(rhs), rcond=None)
    return offset


def garbage_poses(arm, chain, entry, count, rng):
    """Poses whose wrist centre (for the solver's own formula) is a reachable one, whose rotation
    part is random garbage, scaled so that the magnitudes of the 12 entries sum to 0.98 * entry."""
    offset = wrist_offset(chain, arm)
    poses = []
    for q in random_readings(arm, count, rng):
        frame = chain.pose(q)
        centre = frame[:3, 3] - frame[:3, :3] @ offset
        junk = rng.uniform(-1.0, 1.0, (3, 3))

        def size(g):
            return np.abs(g * junk).sum() + np.abs(centre + g * junk @ offset).sum()

        low, high = 0.0, entry
        for _ in range(200):
            mid = 0.5 * (low + high)
            low, high = (mid, high) if size(mid) < 0.98 * entry else (low, mid)
        pose = np.eye(4)
        pose[:3, :3] = low * junk
        pose[:3, 3] = centre + low * junk @ offset
        poses.append(pose)
    return poses


@pytest.mark.parametrize("scalar", [c_backend.FLOAT, c_backend.DOUBLE], ids=["float", "double"])
def test_solutions_finite_up_to_safe_entry(scalar):
    arm, plan = plan_of("benchtop6")
    entry = bounds.safe_entry(plan, scalar.name)
    chain = NumericChain(arm)
    solver = shared.c_solver(arm, scalar)
    rng = np.random.default_rng(1204)
    found = 0
    for pose in garbage_poses(arm, chain, entry, 300, rng):
        if scalar is c_backend.FLOAT:
            pose = pose.astype(np.float32).astype(float)
        assert np.abs(pose[:3]).sum() <= entry
        for solution in solver.inverse(pose, limits="ignore"):
            values = list(solution[0]) + list(solution[3])
            assert all(np.isfinite(values)), f"{scalar.name}: a solution holds {values}"
            found += 1
    assert found > 100, f"only {found} solutions: the check would be vacuous"


@pytest.mark.parametrize("stem, why", [("gimbal6", "poly"), ("canted6", "poly"), ("boardpick4", "lin"),
                                       ("cellreach7", "given")])
def test_no_bound_where_the_walk_cannot_see(stem, why):
    arm, plan = plan_of(stem)
    for real in ("double", "float"):
        assert bounds.safe_entry(plan, real) == 0.0
        assert why in bounds.why_not(plan, 1.0, real)
    source = "".join(c_backend.render(arm, shared.derivation(arm), c_backend.FLOAT).values())
    assert "#define SAFE_ENTRY" not in source
    assert "const int fine = probe - probe == 0.0f;" in source


def test_float_ladder_stops_at_the_reach_radicand():
    _, plan = plan_of("benchtop6")
    assert bounds.safe_entry(plan, "float") == 1e6
    assert bounds.safe_entry(plan, "double") == 1e10
    # the reach radicand er3 is a product of two quadratics in the wrist centre, which grows with
    # the entries times the wrist offset: about 1e11 E^4, past 3.4e38 / 16 at E = 1e7
    reason = bounds.why_not(plan, 1e7, "float")
    assert "may reach" in reason
    walk = bounds.majorants(plan, 1e6, "float")
    radicand = walk[sp.Symbol("er3", real=True)]
    assert 1e33 < radicand < bounds.LARGEST["float"] / bounds.MARGIN


def test_walk_rules_on_small_expressions():
    """The majorant rules on expressions whose bound is known by hand (triangle inequality,
    |ab| = |a||b|, sqrt monotone, |atan2| <= pi); a quotient by a quantity with no lower bound, or
    a value past the type's range over MARGIN, is refused."""
    from types import SimpleNamespace
    x, y = sp.symbols("x y", real=True)
    plan = SimpleNamespace(pose_symbols=(x, y), blocks=[], final_temps=[], label_measures=[])
    walk = bounds._Walk(plan, 10.0, "double")
    assert walk.value(3 * x * y - 2 * x + 5) == 3 * 100 + 2 * 10 + 5
    assert walk.value(sp.sqrt(x ** 2 + y ** 2)) == pytest.approx(np.sqrt(200.0), rel=1e-15)
    assert walk.value(sp.Function("atan2")(y, x) * x) == pytest.approx(10 * np.pi, rel=1e-15)
    with pytest.raises(bounds.Unbounded, match="quotient"):
        walk.value(x / (x + y))
    # 1e-3 x^2 y^2 at E = 1e2 is 1e5, but the code may form x^2 y^2 = 1e8 first: that is noted too
    walk = bounds._Walk(plan, 100.0, "double")
    walk.value(sp.Float(1e-3) * x ** 2 * y ** 2)
    assert walk.peak == pytest.approx(1e8)
    walk = bounds._Walk(plan, 1e10, "float")
    with pytest.raises(bounds.Unbounded, match="may reach"):
        walk.value(x ** 2 * y ** 2)           # 1e40 is past 3.4e38 / 16
