"""The derivation IR and the generated Python solver: structure, hygiene, edge poses, determinism,
arms outside the family, and arms with reversed directions, offsets and base/tool frames.

Facts used as expectations (common practice, recalled from memory):
- Pieper's decoupling of a 6R arm with a spherical wrist (D. L. Pieper, PhD thesis, Stanford,
  1968): the wrist centre is found from the pose first, the arm joints 1-3 from it, the wrist
  joints 4-6 from R36; at most 2 (shoulder) x 2 (elbow) x 2 (wrist) = 8 solutions for the arms
  here (Spong, Hutchinson, Vidyasagar, *Robot Modeling and Control*, 1st ed., 2006, ch. 5).
- A spherical wrist is singular when its middle joint lines up axes 4 and 6; then only the sum
  (or difference) of joints 4 and 6 is determined ([SHV] ch. 5, inverse orientation; from memory).
- An arm without a shoulder offset is singular when the wrist centre lies on axis 1: joint 1 is
  then undetermined ([SHV] ch. 5, inverse position; from memory).
"""

from __future__ import annotations

import ast
import math
import tomllib

import numpy as np
import pytest
import sympy as sp

import shared
from helpers import DEMO_FILES, EXAMPLES, build_arm, demo_arm, joint
from ikgen.armfile import arm_from_data
from ikgen.backends import c as c_backend
from ikgen.backends import common
from ikgen.backends import python as python_backend
from ikgen.engine import derive
from ikgen.errors import StructureError
from ikgen.generate import build, load_module
from ikgen.ir import Compute, CosSinEquation, LinearPair, cos_symbol, sin_symbol
from ikgen.kinematics import NumericChain
from ikgen.verify import random_readings, verify

DEMOS = [p.stem for p in DEMO_FILES]


@pytest.fixture(scope="module")
def demos():
    """{stem: (arm, Build, module)} for the three demo arms, each derived once per session."""
    out = {}
    for stem in DEMOS:
        arm = demo_arm(stem)
        result = shared.built(arm)
        out[stem] = (arm, result, load_module(result.files[result.python_path], result.folder))
    return out


# --------------------------------------------------------------------------- IR structure

@pytest.mark.parametrize("stem", DEMOS)
def test_readings_stay_in_one_turn_with_one_sided_wraps(demos, stem):
    """A reading is wrapped into (-half turn, half turn] by conditional turns; the plan leaves out a
    side its DH angle cannot reach (Plan.wrap_sides: an atan2 result lies in [-pi, pi], C99 F.9.1.4
    and Python's math.atan2; a mirrored twin's angle + pi in [0, 2 pi]). Seeded poses and poses
    whose readings sit exactly on a half turn (where a missing side would show as -180 deg instead
    of 180 deg, or beyond): every revolute reading of every solution stays in one turn."""
    arm, result, module = demos[stem]
    if arm.dof != 6 or arm.given_joint is not None or not hasattr(module, "inverse_joints"):
        pytest.skip("a six-joint arm solved from the pose alone")
    chain = NumericChain(arm)
    half = math.pi / float(arm.angle_scale)
    readings = random_readings(arm, 300, np.random.default_rng(7))
    edges = np.repeat(readings[:12], 2, axis=0)
    for k, row in enumerate(edges):
        j = (k // 2) % 6
        if arm.joints[j].revolute:
            row[j] = half if k % 2 == 0 else -half + 1e-9 * half
    plan = common.lower(result.derivation)
    assert any(plan.wrap_sides(out, False) not in (None, (True, True)) for out in plan.outputs if not out.prismatic)
    revolute = [j for j in range(6) if arm.joints[j].revolute]
    for pose in chain.poses(np.vstack([readings, edges])):
        for solution in module.inverse_joints(pose.tolist()):
            values = np.array(solution)[revolute]
            assert np.all(values > -half) and np.all(values <= half), solution


def test_a_wrist_takes_joint_6_without_joint_4_where_nothing_else_needs_joint_4():
    """Joints 4 and 6 of a wrist with joint 5 known: joint 6's first form does without joint 4
    (PairForm.after), so in the lowered plan nothing but joint 6's fallback reads joint 4's cosine
    and sine, and both pairs keep only the direction of (cos, sin) (no division, no unit scaling).
    Where joint 4's (cos, sin) are read anyway (kitter6: the position of the wrist point needs joint
    6's, solved first there), the engine keeps the derivation it had: no such form."""
    derivation = shared.built(demo_arm("benchtop6")).derivation
    six = next(s for s in derivation.steps if isinstance(s, LinearPair) and s.key == "6")
    assert six.forms[0].after == "4" and len(six.forms) == 2 and six.forms[1].det == 1
    assert not (six.forms[0].cos_num.free_symbols | six.forms[0].sin_num.free_symbols) & {cos_symbol("4"), sin_symbol("4")}
    plan = common.lower(derivation)
    pairs = {b.key: b for b in plan.blocks if b.kind == "pair"}
    assert pairs["4"].scale_free and pairs["6"].scale_free and not pairs["2"].scale_free
    readers = [a for b in plan.blocks for f in b.forms[1:] for a in f.temps
               if a.expr.free_symbols & {cos_symbol("4"), sin_symbol("4")}]
    assert [str(a.target) for a in readers] == ["un4", "uc4", "us4"]
    kitter = shared.built(demo_arm("kitter6")).derivation
    assert not any(f.after for s in kitter.steps if isinstance(s, LinearPair) for f in s.forms)


def test_the_wrist_pairs_hold_by_construction_on_rotations_and_keep_their_direction_only():
    """Joint 6's form without joint 4 has cos_num^2 + sin_num^2 = det^2 only where the pose's
    rotation part is a rotation (a row and a column of one rotation matrix have the same length:
    common practice); mark_consistent finds that (the plan keeps the test for joint 6's fallback
    only, where the form is computed) and both wrist pairs lose the factor s5 > 0 common to their
    numerators (their direction is all atan2 needs)."""
    plan = common.lower(shared.built(demo_arm("benchtop6")).derivation)
    pairs = {b.key: b for b in plan.blocks if b.kind == "pair"}
    four, six = pairs["4"], pairs["6"]
    assert not four.checked and [f.consistent for f in six.forms] == [True, False]
    assert six.checked and six.per_form_test and not six.free_possible
    for form in four.forms + six.forms[:1]:
        numerators = sp.sympify(form.cos_num).free_symbols | sp.sympify(form.sin_num).free_symbols
        assert not {s for s in numerators if s.name in ("root5", "s5")}
        assert form.det_sign == -1
        # det = -root5^2: |det| > limit tested as root5 > sqrt(limit) (mark_root_tests)
        assert str(form.root_symbol) == "root5" and form.root_scale == 1.0
        for real in ("double", "float"):
            assert form.root_bound(real) == math.sqrt(form.limit(real))
    assert six.forms[1].root_symbol is None
    # joint 5's radicand is a sum of squares (never negative: no reach guard); the elbow's is not
    cossins = {b.key: b for b in plan.blocks if b.kind == "cossin"}
    assert cossins["5"].nonnegative and not cossins["3"].nonnegative


def test_a_reading_fixed_by_an_outer_loop_is_converted_once_there():
    """Joint 1's reading depends on the reach root alone: the plan converts it right after joint
    1's block (Plan.early_outputs), and the generated C and Python convert it once per reach root,
    before the elbow loop, not in the code that writes each solution. The readings themselves are
    checked bit for bit between C and Python and by round trips elsewhere."""
    arm = demo_arm("benchtop6")
    plan = common.lower(shared.built(arm).derivation)
    assert plan.early_joints == {1}
    one = next(b for b in plan.blocks if b.key == "1")
    assert [o.joint for o in plan.early_outputs(one)] == [1]
    python = shared.python_source(arm)
    lean = python[python.index("def inverse_joints("):]
    assert lean.count("v1 = ") == 1
    assert lean.index("v1 = ") < lean.index("for sg3 in ")


def test_roots_known_outside_their_loop_are_computed_once_before_it():
    """inspector6's derivation solves the elbow (joint 3) before the shoulder (joint 1), whose two
    roots are opposite and read only the wrist centre: the plan computes joint 1's root, atan2,
    cosine and sine once before the elbow loop (hoist_roots), and the loop over joint 1's roots
    inside the elbow's only picks the first root or its opposite, so the solutions keep their
    order. Their values are checked against the forward kinematics, and C against Python bit for
    bit, elsewhere (test_c_backend, test_golden)."""
    arm = demo_arm("inspector6")
    plan = common.lower(shared.built(arm).derivation)
    one = next(b for b in plan.blocks if b.key == "1")
    three = next(b for b in plan.blocks if b.key == "3")
    assert one.prelude and one.depth == 1 and three.depth == 0 and three.preludes == [one]
    assert plan.blocks.index(three) < plan.blocks.index(one)
    python = shared.python_source(arm)
    lean = python[python.index("def inverse_joints("):]
    assert lean.count("atan2(sn1, cn1)") == 1
    assert lean.index("ta1 = atan2(sn1, cn1)") < lean.index("for sg3 in ") < lean.index("for sg1 in roots1")
    source = c_backend.render(arm, shared.built(arm).derivation)["inspector6_ik.c"]
    lean_c = source[source.index("int inspector6_ik_inverse_joints("):]
    assert lean_c.count("_atan2(sn1, cn1)") == 1
    assert lean_c.index("ta1 = inspector6_ik_atan2(sn1, cn1)") < lean_c.index("for (int k3 = 0;") \
        < lean_c.index("for (int k1 = 0;")
    # benchtop6 solves joint 1 first: nothing to move
    plan = common.lower(shared.built(demo_arm("benchtop6")).derivation)
    assert not any(b.prelude or b.preludes for b in plan.blocks)


def test_labels_and_flags_known_above_the_innermost_level_are_computed_there():
    """benchtop6's reach label reads only joint 1's solution (the wrist centre seen from link 1):
    the plan places it right after the block of joint 1's roots (Plan.label_places), and the
    generated Python picks its subtable of the prebuilt configurations there, once per reach root,
    before the elbow loop; the elbow label is picked once per elbow root for a solution and its
    mirrored twin, and the wrist bend (the wrist's root, never negative) needs no test at all.
    The generated C places them the same way (Plan.flag_places, c.flag_code), in its full call
    only. The labels' values are checked against their geometric definitions in test_labels and
    the Python solver against the C solver in test_c_backend."""
    arm = demo_arm("benchtop6")
    plan = common.lower(shared.built(arm).derivation)
    names = [label.name for label in plan.labels]
    places = plan.label_places()
    assert set(places) == {names.index("reach")}
    after = plan.blocks[places[names.index("reach")]]
    assert after.key == "" and after.kind == "compute" and after.depth == 1 < plan.depth
    assert plan.constant_label(names.index("wrist_bend"))
    assert not plan.constant_label(names.index("elbow"))
    full = shared.python_source(arm)
    full = full[full.index("def _closed_form("):full.index("def inverse_joints(")]
    assert full.index("cfg0 = _CONFIGS[0 if v1x + 25.0 >= 0.0 else 1]") < full.index("for sg3 in ")
    assert full.count("cfgs = cfg0[0 if lm1 >= 0.0 else 1]") == 1
    assert "cfgs[0]" in full and "cfgs[1]" in full and "la0 =" not in full and "lm2" not in full
    # the same for the parts of the singular flag, the conditioning and the limit test that joint 1
    # fixes: once per reach root, before the elbow loop (python.early_parts)
    loop = full.index("for sg3 in ")
    for line in ("= free1 or root1 == 0.0", "cv0 = root1 * ", "in1 = -170.00000034 <= v1 <= 170.00000034"):
        assert full.count(line) == 1 and full.index(line) < loop, line
    assert "singular = sng" in full and "conditioning = (cv0, " in full and "inside = in1 and " in full
    # the C full call: the same statements before the elbow loop, the elbow's label once for a
    # solution and its twin, the wrist bend a constant; its readings-only entry computes none of them
    source = c_backend.render(arm, shared.built(arm).derivation)["benchtop6_ik.c"]
    closed = source[source.index("static int closed_form("):source.index("int benchtop6_ik_inverse_joints(")]
    loop = closed.index("for (int k3 = 0;")
    for line in ("const signed char lab0 = (signed char)(v1x + 25.0 >= 0.0 ? 1 : -1);", "= free1 | (root1 == 0.0);",
                 "const double cv0 = root1 * ", "const int in1 = (fabs(jv1) <= HIGH[0]);"):
        assert closed.count(line) == 1 and closed.index(line) < loop, line
    assert closed.count("const signed char lab1 = ") == 1 and "lm2" not in closed and "lab2" not in closed
    assert closed.count("out->labels[2] = 1;") == 1 and closed.count("out->labels[2] = -1;") == 1
    lean = source[source.index("int benchtop6_ik_inverse_joints("):]
    assert not any(name in lean for name in ("lab0", "sng", "cv0", "in1 ="))
    # labels that all wait for the innermost level, none of them constant: a tuple per solution
    arm = demo_arm("boardpick4")
    assert not common.lower(shared.built(arm).derivation).label_places()
    assert "_CONFIGS" not in shared.python_source(arm) and "la0 = " in shared.python_source(arm)


def test_a_test_implied_by_a_pairs_freedom_is_not_repeated():
    """benchtop6's wrist pair (joint 4) has one form, used only where joint 5's root exceeds a
    positive bound: joint 4 is free wherever that root is 0 (or NaN), so the singular flag needs no
    `root5 == 0` term beside `free4`, and the mirrored wrist no `root5 > 0` test beside `not free4`
    (Plan.root_tested_pairs). Every back-end prints the shorter forms; the flags and counts they
    give are checked against the C solver, the batch solver and the hand-written solvers (at
    joint 5 = 0 too) in test_c_backend, test_batch and test_hand_reference."""
    arm = demo_arm("benchtop6")
    plan = common.lower(shared.built(arm).derivation)
    assert plan.root_tested_pairs("5") == {"4"} and plan.root_tested_pairs("3") == set()
    assert ("free", "4") in plan.singular_terms and ("double", "5") not in plan.singular_terms
    assert ("double", "3") in plan.singular_terms
    assert plan.mirror.joint == "5" and plan.mirror_condition == [("not_free", "4")]
    four = next(b for b in plan.blocks if b.kind == "pair" and b.key == "4")
    assert all(str(form.root_symbol) == "root5" and form.root_bound("double") > 0 for form in four.forms)
    python = shared.python_source(arm)
    assert "root5 == 0.0" not in python and "if not free4:" in python
    # packer6's wrist pair has root5^2 itself as its determinant (scale 1): tested through the root too
    plan = common.lower(shared.built(demo_arm("packer6")).derivation)
    four = next(b for b in plan.blocks if b.kind == "pair" and b.key == "4")
    assert [str(form.root_symbol) for form in four.forms] == ["root5"] and four.forms[0].root_scale == 1.0
    assert plan.root_tested_pairs("5") == {"4"} and ("double", "5") not in plan.singular_terms


def test_intermediates_only_a_fallback_reads_are_computed_there():
    """benchtop6's elbow pair (joint 2) has later forms for where its first form's determinant is
    ~0; the entries of A1^-1 T that only they read move into them (sink_into_fallbacks): no compute
    block of the plan assigns them, each later form computes what it reads, and the usual path of
    the generated Python does not."""
    arm = demo_arm("benchtop6")
    plan = common.lower(shared.built(arm).derivation)
    computed = {str(a.target) for b in plan.blocks if b.kind == "compute" for a in b.temps}
    two = next(b for b in plan.blocks if b.kind == "pair" and b.key == "2")
    moved = {"g16_14", "g16_24", "g16_34"}
    assert not computed & moved
    for form in two.forms[1:]:
        assert moved <= {str(a.target) for a in form.temps}
    python = shared.python_source(arm)
    lean = python[python.index("def inverse_joints("):]
    usual = lean[:lean.index("# th2 from a linear pair")] + lean[lean.index("# cosine and sine of th2 + th3"):]
    assert "g16_14 =" not in usual and "g16_14 =" in lean


def test_the_rotation_identity_check_tells_identities_from_near_misses():
    """_holds_on_rotations against identities of rotation matrices (common practice: the columns
    and rows of a rotation are unit vectors; rotating about z keeps the z component and the length
    in the xy plane) and against expressions that are not 0 on rotations."""
    pose = tuple(sp.Symbol(n, real=True) for n in
                 ("r11", "r12", "r13", "px", "r21", "r22", "r23", "py", "r31", "r32", "r33", "pz"))
    r13, r23, r33, r31 = pose[2], pose[6], pose[10], pose[8]
    c1, s1, g, h, root = (sp.Symbol(n, real=True) for n in ("c1", "s1", "g", "h", "root"))
    program = [(g, c1 * r13 + s1 * r23), (h, c1 * r23 - s1 * r13), (root, sp.sqrt(1 - r33 ** 2))]
    pairs = [(c1, s1)]
    # (c1 r13 + s1 r23)^2 + (c1 r23 - s1 r13)^2 = r13^2 + r23^2 = 1 - r33^2 on rotations
    assert common._holds_on_rotations([g, h, root], program, pairs, pose)
    # 1 - r31^2 is a different number (a row's entry, not the column's): not an identity
    wrong = program[:2] + [(root, sp.sqrt(1 - r31 ** 2))]
    assert not common._holds_on_rotations([g, h, root], wrong, pairs, pose)
    # without the unit pair (c1, s1 free numbers) the first identity fails too
    assert not common._holds_on_rotations([g, h, root], program, [], pose)
    # a constant off by its double rounding (2e-16) is the code's own rounding: the identity holds
    # as the code computes it; one off by 1e-9 is a real difference (the test stays)
    near = program[:2] + [(root, sp.sqrt(sp.Float("1.0000000000000002", 30) - r33 ** 2))]
    assert common._holds_on_rotations([g, h, root], near, pairs, pose)
    off = program[:2] + [(root, sp.sqrt(sp.Float("1.000000001", 30) - r33 ** 2))]
    assert not common._holds_on_rotations([g, h, root], off, pairs, pose)


@pytest.mark.parametrize("stem", DEMOS)
def test_ir_structure(demos, stem):
    arm, result, _ = demos[stem]
    derivation = result.derivation
    steps = derivation.steps
    # The wrist centre comes before any joint, from the pose alone (after the target with base and
    # tool removed, when the arm has either).
    first_solving = next(i for i, s in enumerate(steps) if not isinstance(s, Compute))
    assert any([str(n) for n in s.names] == ["wx", "wy", "wz"] for s in steps[:first_solving])
    # Each joint is solved exactly once, the arm joints (1-3) before the wrist joints (4-6).
    order = derivation.solved_joints()
    assert sorted(order) == [1, 2, 3, 4, 5, 6]
    assert max(order.index(j) for j in (1, 2, 3)) < min(order.index(j) for j in (4, 5, 6))
    # The three two-way choices: reach at joint 1, elbow at joint 2 or 3, wrist bend at joint 5.
    branches = {s.branch.name: s.key for s in steps if isinstance(s, CosSinEquation)}
    assert set(branches) == {"reach", "elbow", "wrist_bend"}
    assert branches["reach"] == "1" and branches["elbow"] in ("2", "3") and branches["wrist_bend"] == "5"
    assert [b.name for b in derivation.branch_points()] == \
        [s.branch.name for s in steps if isinstance(s, CosSinEquation)]
    assert derivation.max_solutions == 8
    assert any("spherical wrist" in line for line in derivation.analysis)
    # str() prints every step with its description, and the labels and outputs.
    text = str(derivation)
    for number, step in enumerate(steps, 1):
        assert f"step {number}:" in text
        for line in step.describe():
            assert line in text
    assert f"step {len(steps) + 1}:" not in text
    for label in derivation.labels:
        assert f"label {label.name}:" in text
    for j in arm.joints:
        assert f"output joint {j.index} '{j.name}'" in text
    assert result.files[f"{result.folder}/{result.folder}_derivation.txt"] == text + "\n"


@pytest.mark.parametrize("stem", DEMOS)
def test_generated_source_imports_only_math_and_has_no_acos_asin(demos, stem):
    _, result, module = demos[stem]
    tree = ast.parse(result.files[result.python_path])
    imports = [node for node in ast.walk(tree) if isinstance(node, (ast.Import, ast.ImportFrom))]
    assert imports, "the solver must import math"
    for node in imports:
        modules = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module]
        assert modules == ["math"], f"line {node.lineno} imports {modules}"
    names = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name)} | \
            {n.attr for n in ast.walk(tree) if isinstance(n, ast.Attribute)} | \
            {a.name for n in ast.walk(tree) if isinstance(n, ast.ImportFrom) for a in n.names}
    for banned in ("acos", "asin", "acosh", "asinh", "log", "pow"):
        assert banned not in names
    assert "sqrt" in names and "atan2" in names
    # 8 closed-form solutions, times the equivalent readings of each multi-turn joint within its limits
    multi_turn_readings = 1
    for multi, (low, high) in zip(module.MULTI_TURN, module.JOINT_LIMITS):
        if multi:
            multi_turn_readings *= int((high - low) // 360.0) + 1
    assert module.MAX_SOLUTIONS == 8 * multi_turn_readings and module.JOINT_COUNT == 6


@pytest.mark.parametrize("stem", DEMOS)
def test_unreachable_and_non_finite_poses_give_no_solution(demos, stem):
    arm, _, module = demos[stem]
    chain = NumericChain(arm)
    rng = np.random.default_rng(3)
    limits = arm.limits_in_readings()
    for _ in range(30):
        pose = chain.pose(limits[:, 0] + rng.random(6) * (limits[:, 1] - limits[:, 0]))
        assert module.inverse(pose)                     # reachable as built
        direction = rng.normal(size=3)
        pose[:3, 3] += 3.0 * arm.reach_scale() * direction / np.linalg.norm(direction)
        assert module.inverse(pose) == []
    good = chain.pose(np.zeros(6))
    for bad_value in (math.nan, math.inf, -math.inf):
        for entry in ((0, 0), (1, 3), (2, 2)):
            pose = good.copy()
            pose[entry] = bad_value
            assert module.inverse(pose) == []
            assert module.inverse(pose, current=[0.0] * 6) == []


# ------------------------------------------------------------------------- singular poses

def wrap_reading(value: float, arm) -> float:
    turn = 2 * math.pi / arm.angle_scale
    return (value + turn / 2) % turn - turn / 2


def assert_reproduces(arm, module, pose, current, tolerance_scale=1e3):
    """Every solution is finite and reproduces the pose (within 1e3 x the regular round-trip
    tolerance, as ikgen.verify allows at singular poses); returns the solutions."""
    chain = NumericChain(arm)
    solutions = module.inverse(pose, current, limits="ignore")
    assert solutions, "an exactly singular pose within reach gave no solution"
    for joints, *_ in solutions:
        assert np.all(np.isfinite(joints))
        reached = chain.pose(np.array(joints))
        assert np.max(np.abs(reached[:3, 3] - pose[:3, 3])) < tolerance_scale * 1e-9 * arm.reach_scale()
        assert np.max(np.abs(reached[:3, :3] - pose[:3, :3])) < tolerance_scale * 1e-9
    return solutions


def same_readings(p, q, arm, tol=1e-7) -> bool:
    return all(abs(wrap_reading(a - b, arm)) < tol for a, b in zip(p, q))


def free_wrist_joint(derivation) -> int:
    """The wrist joint (4 or 6) solved first after joint 5: it is the one left free."""
    order = [j for j in derivation.solved_joints() if j in (4, 6)]
    return order[0]


@pytest.mark.parametrize("stem", DEMOS)
def test_wrist_singularity(demos, stem):
    arm, result, module = demos[stem]
    chain = NumericChain(arm)
    free = free_wrist_joint(result.derivation)
    j5 = arm.joints[4]
    rng = np.random.default_rng(46)
    limits = arm.limits_in_readings()
    for trial in range(6):
        q = limits[:, 0] + (0.1 + 0.8 * rng.random(6)) * (limits[:, 1] - limits[:, 0])
        # joint 5's DH angle is 0 or pi when axes 4 and 6 line up; pick the one that does here
        for dh_angle in (0.0, math.pi):
            q[4] = wrap_reading((dh_angle - float(j5.theta) - float(j5.offset)) / j5.direction / arm.angle_scale, arm)
            _, axes = chain.joint_axes(q)
            if np.linalg.norm(np.cross(axes[3], axes[5])) < 1e-12:
                break
        else:
            pytest.fail(f"{stem}: no joint 5 reading lines up axes 4 and 6")
        pose = chain.pose(q)
        current = q.copy()
        current[free - 1] = wrap_reading(q[free - 1] + 37.0 * (1 + trial) * math.pi / 180 / arm.angle_scale, arm)
        for hint, expected in ((list(current), current[free - 1]), (None, 0.0)):   # no hint: 0
            solutions = assert_reproduces(arm, module, pose, hint)
            # The source's arm configuration (joints 1-3) is the one whose wrist is singular.
            at_source = [s for s in solutions if same_readings(s[0][:3], q[:3], arm)]
            assert at_source, "the source arm configuration is missing"
            assert all(s[2] is True for s in at_source), "not flagged singular"
            assert any(abs(wrap_reading(s[0][free - 1] - expected, arm)) < 1e-9 for s in at_source), \
                (f"joint {free} should keep the reading {expected}; got "
                 f"{[round(s[0][free - 1], 9) for s in at_source]}")


@pytest.mark.parametrize("stem", DEMOS)
def test_near_wrist_singularity_is_accurate_or_flagged(demos, stem):
    """Joint 5 a small angle away from lining up axes 4 and 6: every solution reproduces the pose
    to the regular round-trip tolerance (1e-9, as ikgen.verify) or is flagged singular and then
    still within 1e3 times that (the allowance ikgen.verify makes at singular poses)."""
    arm, _, module = demos[stem]
    chain = NumericChain(arm)
    j5 = arm.joints[4]
    limits = arm.limits_in_readings()
    rng = np.random.default_rng(99)
    for away in (1e-3, 1e-6, 1e-8, 9.9e-10, 5e-10, 1e-11, -1e-9, -1e-13):     # radians
        for _ in range(5):
            q = limits[:, 0] + (0.1 + 0.8 * rng.random(6)) * (limits[:, 1] - limits[:, 0])
            q[4] = (away - float(j5.theta) - float(j5.offset)) / j5.direction / arm.angle_scale
            pose = chain.pose(q)
            solutions = module.inverse(pose, list(q), limits="ignore")
            assert any(same_readings(s[0][:3], q[:3], arm) for s in solutions)
            for joints, _, singular, *_ in solutions:
                reached = chain.pose(np.array(joints))
                position = np.max(np.abs(reached[:3, 3] - pose[:3, 3])) / arm.reach_scale()
                rotation = np.max(np.abs(reached[:3, :3] - pose[:3, :3]))
                limit = 1e-6 if singular else 1e-9
                assert position < limit and rotation < limit, \
                    f"{stem}: q5 {away} rad from the singularity: errors {position:.2g}, {rotation:.2g} " \
                    f"(singular flag {singular})"


def on_axis_1(arm, readings: np.ndarray) -> np.ndarray:
    """Distance of the wrist centre (where axes 4 and 5 meet) from axis 1, per joint vector."""
    chain = NumericChain(arm)
    out = []
    for q in readings:
        origins, axes = chain.joint_axes(q)
        # closest points of axes 4 and 5 (they meet at the wrist centre)
        b = axes[3] @ axes[4]
        w0 = origins[3] - origins[4]
        t = (b * (axes[4] @ w0) - axes[3] @ w0) / (1 - b * b)
        centre = origins[3] + t * axes[3]
        rel = centre - origins[0]
        out.append(np.linalg.norm(rel - (rel @ axes[0]) * axes[0]))
    return np.array(out)


@pytest.fixture(scope="module")
def special_arms():
    """Arms with reversed directions, zero and non-zero offsets, and base/tool frames, in both
    conventions (invented dimensions), each derived once: {name: (arm, derivation, module)}."""
    standard = build_arm(
        [joint(a=0, alpha=90, d=330, direction=-1, limits=[-170, 170]),
         joint(a=420, alpha=0, d=0, theta=-90, offset=15, limits=[-130, 130]),
         joint(a=0, alpha=90, d=0, theta=90, direction=-1, limits=[-150, 150]),
         joint(a=0, alpha=-90, d=390, offset=-30, limits=[-180, 180]),
         joint(a=0, alpha=90, d=0, direction=-1, limits=[-120, 120]),
         joint(a=0, alpha=0, d=0, offset=45, limits=[-180, 180])],
        convention="standard", length_unit="mm", angle_unit="deg", name="reversed_standard",
        base={"translation": [120, -40, 800], "rotation": {"quaternion": [0.9238795325, 0, 0.3826834324, 0],
                                                            "order": "wxyz"}},
        tool={"translation": [0, 15, 110], "rotation": {"axes": "zyx", "frame": "moving", "angles": [30, 0, 90]}})
    modified = build_arm(
        [joint(a=0, alpha=0, d=0.25, direction=-1),
         joint(a=0.08, alpha="-pi/2", d=0, theta="-pi/2", direction=-1),
         joint(a=0.6, alpha=0, d=-0.09, offset="pi/6"),
         joint(a=0, alpha="-pi/2", d=0.55, direction=-1),
         joint(a=0, alpha="pi/2", d=0),
         joint(a=0, alpha="-pi/2", d=0, theta="pi", direction=-1)],
        convention="modified", length_unit="m", angle_unit="rad", name="reversed_modified",
        base={"translation": [0, 0, 2.1], "rotation": {"axes": "xyz", "frame": "fixed", "angles": ["pi", 0, "pi/3"]}},
        tool={"translation": [0.02, 0, 0.12],
              "rotation": {"matrix": [[0, 0, 1], [0, 1, 0], [-1, 0, 0]]}})
    return {arm.name: (arm, *derived_solver(arm, arm.name)) for arm in (standard, modified)}


def derived_solver(arm, module_name: str):
    """(derivation, the generated Python solver) of ``arm``: only the Python back-end is rendered
    (generate.build renders it the same way), not the other files or the report."""
    derivation = derive(arm)
    return derivation, load_module(python_backend.render(arm, derivation), module_name)


@pytest.mark.parametrize("which", ["inspector6", "reversed_standard"])
def test_shoulder_singularity(demos, special_arms, which):
    """Wrist centre exactly on axis 1 (arms without a shoulder offset): joint 1 keeps `current`."""
    arm, _, module = (demos | special_arms)[which]
    limits = arm.limits_in_readings()
    rng = np.random.default_rng(11)
    found = 0
    for trial in range(40):
        if found == 5:
            break
        q = limits[:, 0] + (0.1 + 0.8 * rng.random(6)) * (limits[:, 1] - limits[:, 0])
        # the wrist centre crosses axis 1 as joint 2 turns: find a sign change of the distance
        # measured along frame 1's in-plane direction, then bisect it to machine precision
        grid = np.linspace(limits[1, 0], limits[1, 1], 241)
        trial_q = np.repeat(q[None, :], len(grid), axis=0)
        trial_q[:, 1] = grid
        signed = signed_axis_1(arm, trial_q)
        crossing = np.nonzero(np.sign(signed[:-1]) * np.sign(signed[1:]) < 0)[0]
        if len(crossing) == 0:
            continue
        lo, hi = grid[crossing[0]], grid[crossing[0] + 1]
        f_lo = signed[crossing[0]]
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            q[1] = mid
            f_mid = signed_axis_1(arm, q[None, :])[0]
            if f_mid == 0 or hi - lo <= 4e-16 * max(1.0, abs(mid)):
                break
            if np.sign(f_mid) == np.sign(f_lo):
                lo, f_lo = mid, f_mid
            else:
                hi = mid
        assert on_axis_1(arm, q[None, :])[0] < 1e-12 * arm.reach_scale()
        found += 1
        pose = NumericChain(arm).pose(q)
        current = q.copy()
        current[0] = wrap_reading(q[0] + 50.0 * math.pi / 180 / arm.angle_scale, arm)
        for joints, _, singular, *_ in assert_reproduces(arm, module, pose, list(current)):
            assert singular is True
            assert abs(wrap_reading(joints[0] - current[0], arm)) < 1e-9
    assert found == 5, f"{which}: found only {found} shoulder-singular poses"


def signed_axis_1(arm, readings: np.ndarray) -> np.ndarray:
    """on_axis_1 with a sign: the component along the horizontal direction of the arm's plane."""
    chain = NumericChain(arm)
    out = []
    for q in readings:
        origins, axes = chain.joint_axes(q)
        b = axes[3] @ axes[4]
        w0 = origins[3] - origins[4]
        t = (b * (axes[4] @ w0) - axes[3] @ w0) / (1 - b * b)
        rel = origins[3] + t * axes[3] - origins[0]
        radial = np.cross(axes[1], axes[0])           # in the arm's plane, perpendicular to axis 1
        out.append(rel @ radial)
    return np.array(out)


# ---------------------------------------------------------------------------- determinism

def test_building_twice_gives_identical_bytes(demos):
    arm, first, _ = demos["benchtop6"]
    second = shared.fresh_build(demo_arm("benchtop6"))      # derived again by the engine, not the memo
    assert sorted(first.files) == sorted(second.files)
    for path in first.files:
        assert first.files[path].encode("utf-8") == second.files[path].encode("utf-8"), path


def test_a_derivation_read_back_with_evaluation_off_builds_the_same_bytes(demos):
    """tests/shared.py shares derivations between the test processes as pickle files read with
    sympy's evaluation off; what it reads must build every file byte for byte as the original."""
    import pickle
    from unittest import mock

    import ikgen.generate
    from sympy.core.parameters import evaluate
    arm, first, _ = demos["packer6"]
    with evaluate(False):
        again = pickle.loads(pickle.dumps(first.derivation))
    with mock.patch.object(ikgen.generate, "derive_arm", lambda _arm: again):
        second = build(arm)
    assert sorted(first.files) == sorted(second.files)
    for path in first.files:
        assert first.files[path] == second.files[path], path


# ------------------------------------------------------------------ arms outside the family

def benchtop_data() -> dict:
    return tomllib.loads((EXAMPLES / "benchtop6.toml").read_text(encoding="utf-8"))


def test_wrist_axes_not_meeting_is_refused_with_the_reason():
    data = benchtop_data()
    data["joint"][3]["a"] = 12          # a4 = 12 mm: axes 4 and 5 no longer meet
    with pytest.raises(StructureError) as caught:
        build(arm_from_data(data))
    message = str(caught.value)
    assert "axes 4 and 5" in message and "12 mm apart" in message
    assert "do not meet" in message
    assert caught.value.exit_code == 3


def test_five_joints_take_a_point_and_a_direction():
    """benchtop6 without its last joint: the tool's z axis still passes through the point where
    axes 4 and 5 meet, so the natural target (a point and a direction) is solved and verifies."""
    data = benchtop_data()
    del data["joint"][5]
    arm = arm_from_data(data)
    derivation, module = derived_solver(arm, "benchtop5_under_test")
    assert derivation.target.kind == "point_and_direction" and not derivation.target.declared
    report = verify(arm, module, samples=300, seed=7)
    assert report.passed, report.failures


def test_seven_joints_are_refused_with_what_is_handled():
    """Without a given joint a seven-joint arm is refused, naming the joints that could be given
    (here none: the extra joint turns about the last joint's axis)."""
    data = benchtop_data()
    data["joint"].append(dict(data["joint"][5], name="extra"))
    with pytest.raises(StructureError, match=r"7 joints: a pose leaves one of them free.*no joint can be given"):
        build(arm_from_data(data))
    data["joint"].append(dict(data["joint"][5], name="extra2"))
    with pytest.raises(StructureError, match=r"8 joints to solve for; the derivation handles 3 to 6"):
        build(arm_from_data(data))


def test_two_joints_making_the_same_motion_are_refused():
    """Two consecutive revolute joints about one axis (a1 = 0 and alpha1 = 0 make axes 1 and 2 one
    line), or two slides along parallel directions, leave fewer independent motions than joints
    (a fact of kinematics, common practice): refused, nothing derived."""
    wrist = [joint("r", alpha=-90), joint("r", alpha=90), joint("r", d=0.1)]
    same_axis = build_arm([joint("r", a=0, alpha=0, d=0), joint("r", alpha=-90), joint("r", a=0.4, alpha=-90)] + wrist)
    with pytest.raises(StructureError, match=r"joints 1 'j1' and 2 'j2' turn about the same axis"):
        build(same_axis)
    parallel_slides = build_arm([joint("r", alpha=0, d=0.3), joint("p", a=0.2, alpha=0, limits=[0, 0.5]),
                                 joint("p", a=0.1, alpha=0, limits=[0, 0.5])])
    with pytest.raises(StructureError, match=r"slide along parallel directions"):
        build(parallel_slides)


def test_an_arm_whose_joints_cannot_move_the_tool_every_way_is_refused_with_the_reason(tmp_path, capsys):
    """Rank-deficient arms (facts of kinematics, common practice): a planar three-link arm (axes 1
    to 3 parallel to the base z axis) keeps a spherical wrist's centre at one height, so no joint
    rate moves the tool point along z where the tool point is the wrist centre; an RRR arm whose
    tool point lies on axis 3 cannot move that point with joint 3 (z3 x (p - o3) = 0), nor with any
    joint when the point is where all three axes meet. All are refused before any derivation,
    naming that direction or those joints, and the command exits 3 writing nothing."""
    from ikgen.cli import main
    planar = build_arm([joint("r", a=0.3, d=0.2), joint("r", a=0.4), joint("r", a=0.1, alpha=-90, d=0.05),
                        joint("r", alpha=90, d=0.3), joint("r", alpha=-90), joint("r")], name="planar_wrist")
    with pytest.raises(StructureError) as caught:
        build(planar)
    message = str(caught.value)
    assert "target's Jacobian has rank 5, not 6" in message
    assert "no joint rate moves the tool point along (0.000, 0.000, 1.000) (world)" in message
    assert caught.value.exit_code == 3
    on_axis = build_arm([joint("r", d=0.5, alpha=-90), joint("r", a=0.4), joint("r")], name="point_on_axis")
    with pytest.raises(StructureError, match=r"rank 2, not 3.*Joint 3 'j3' moves nothing the target holds "
                                             r"\(the tool point lies on its axis\)"):
        build(on_axis)
    centre = build_arm([joint("r", alpha=-90), joint("r", alpha=90), joint("r")], name="point_at_centre")
    with pytest.raises(StructureError, match=r"rank 0, not 3.*Joints 1 'j1', 2 'j2', 3 'j3' move nothing the "
                                             r"target holds \(the tool point lies on their axes\)"):
        build(centre)          # three axes through one point, the tool point there
    full = build_arm([joint("r", alpha=-90, d=0.3), joint("r", a=0.4), joint("r", a=0.05, alpha=-90),
                      joint("r", alpha=90, d=0.35), joint("r", alpha=-90), joint("r")], name="full_rank")
    assert derive(full).max_solutions == 8
    arm_file = tmp_path / "planar_wrist.toml"
    arm_file.write_text("[arm]\nname = \"planar_wrist\"\nconvention = \"standard\"\nlength_unit = \"m\"\n"
                        "angle_unit = \"deg\"\n" + "".join(
                            f"\n[[joint]]\ntype = \"revolute\"\na = {a}\nalpha = {alpha}\nd = {d}\ntheta = 0\n"
                            for a, alpha, d in [(0.3, 0, 0.2), (0.4, 0, 0), (0.1, -90, 0.05), (0, 90, 0.3),
                                                (0, -90, 0), (0, 0, 0)]), encoding="utf-8")
    out_dir = tmp_path / "out"
    assert main(["generate", str(arm_file), "-o", str(out_dir)]) == 3
    err = capsys.readouterr().err
    assert err.startswith("ikgen: error:") and "Traceback" not in err and "rank 5, not 6" in err
    assert not out_dir.exists() or list(out_dir.iterdir()) == []


@pytest.mark.parametrize("stem", ["benchtop6", "boardpick4", "engraver5", "mast3", "seedling6"])
def test_the_target_jacobian_is_the_derivative_of_what_the_target_holds(stem):
    """target_jacobian against central differences of the forward kinematics (the definition of
    the derivative; angular velocity from dR/dq R^T = [w]x, common practice): position over the
    reach, tool rotation, the turn about a point-and-angle target's axis and the rate of a
    point-and-direction target's tool axis, per radian of a revolute joint's DH angle and per reach
    of a slide."""
    from ikgen.engine.targets import resolve, target_jacobian
    arm = demo_arm(stem)
    target = resolve(arm)
    chain = NumericChain(arm)
    length = arm.reach_scale()
    readings = np.mean(arm.limits_in_readings(), axis=1) + 0.1 * np.ptp(arm.limits_in_readings(), axis=1) * \
        np.sin(np.arange(arm.dof) + 1.0)
    jacobian = target_jacobian(arm, chain, target, readings)
    pose0 = chain.poses(readings[None, :])[0]
    column_of = {j.index - 1: k for k, j in enumerate(arm.solved_joints)}
    for joint_index, column in column_of.items():
        j = arm.joints[joint_index]
        # a step of h in the DH variable is a step of h / (scale * direction) in the reading
        h = 1e-6
        per_reading = arm.reading_scales()[joint_index] * j.direction
        step = np.zeros(arm.dof)
        step[joint_index] = (h if j.revolute else h * length) / per_reading
        plus, minus = chain.poses((readings + step)[None, :])[0], chain.poses((readings - step)[None, :])[0]
        velocity = (plus[:3, 3] - minus[:3, 3]) / (2 * h) / length
        spin = (plus[:3, :3] - minus[:3, :3]) / (2 * h) @ pose0[:3, :3].T
        w = np.array([spin[2, 1], spin[0, 2], spin[1, 0]])
        if target.kind == "pose":
            expected = np.concatenate([velocity, w])
        elif target.kind == "point":
            expected = velocity
        elif target.kind == "point_and_angle":
            expected = np.concatenate([velocity, [np.dot([float(v) for v in target.axis], w)]])
        else:
            a = "xyz".index(target.tool_axis)
            rate = (plus[:3, a] - minus[:3, a]) / (2 * h)
            expected = np.concatenate([velocity, rate])
        assert np.allclose(jacobian[:, column], expected, atol=1e-7), (stem, joint_index)


def test_a_declared_pose_for_a_four_joint_arm_is_refused_with_what_it_serves():
    data = benchtop_data()
    del data["joint"][4:]
    data["target"] = {"kind": "pose"}
    with pytest.raises(StructureError, match=r"4 joints and the target 'pose' has 6 freedoms.*serves no target"):
        build(arm_from_data(data))


def test_a_prismatic_third_joint_with_a_spherical_wrist_is_solved():
    """The jib replaced by a slide along z2 (an arm with a telescoping joint and a wrist)."""
    data = benchtop_data()
    data["joint"][2] = joint("p", a=20, alpha=-90, d=0, name="slide", limits=[100, 300])
    arm = arm_from_data(data)
    _, module = derived_solver(arm, "benchtop_slide_under_test")
    report = verify(arm, module, samples=300, seed=7)
    assert report.passed, report.failures


# ------------------------------------------------------------- special arms verify clean

@pytest.mark.parametrize("name", ["reversed_standard", "reversed_modified"])
def test_reversed_directions_offsets_and_frames_verify_clean(special_arms, name):
    arm, derivation, module = special_arms[name]
    assert derivation.max_solutions == 8
    report = verify(arm, module, samples=300, seed=7)
    assert report.passed, report.failures
    assert report.checked >= 290 and report.complete == report.checked
    assert sum(report.singular_tested.values()) > 0
    assert report.unreachable_ok == report.unreachable_tested > 0


def test_parallel_neighbours_are_moved_over_as_one_turn():
    """benchtop6's axes 2 and 3 are parallel (no twist between them): the known side with
    joints 1-3 moved over is written with the cosine and sine of th2 + th3, defined by the angle
    sum identities cos(a + b) = cos a cos b - sin a sin b, sin(a + b) = sin a cos b + cos a sin b
    (common practice; checked here by sympy's trigonometric expansion), and its rotation entries
    read no cosine or sine of th2 or th3 alone. The angle sum is exact: the round trips of the
    solver are checked in tests/test_verify.py and everywhere else."""
    import sympy as sp
    derivation = shared.derivation(demo_arm("benchtop6"))
    computes = [s for s in derivation.steps if isinstance(s, Compute)]
    [sums] = [s for s in computes if [str(n) for n in s.names] == ["c23", "s23"]]
    a, b = sp.symbols("a b", real=True)
    on_angles = {sp.Symbol("c2", real=True): sp.cos(a), sp.Symbol("s2", real=True): sp.sin(a),
                 sp.Symbol("c3", real=True): sp.cos(b), sp.Symbol("s3", real=True): sp.sin(b)}
    cos_sum, sin_sum = (e.xreplace(on_angles) for e in sums.exprs)
    assert sp.simplify(cos_sum - sp.expand_trig(sp.cos(a + b))) == 0
    assert sp.simplify(sin_sum - sp.expand_trig(sp.sin(a + b))) == 0
    [moved] = [s for s in computes if any(str(n) == "g36_11" for n in s.names)]
    alone = {sp.Symbol(n, real=True) for n in ("c2", "s2", "c3", "s3")}
    for name, expr in zip(moved.names, moved.exprs):
        if name.name[-2] != "4" and name.name[-1] != "4":         # rotation entries (r, c) with r, c < 4
            assert not (expr.free_symbols & alone), (name, expr)
    # joints 1 and 2 of benchtop6 are not parallel (twist -90 deg): no such sum for them
    assert not any([str(n) for n in s.names] == ["c12", "s12"] for s in computes)
