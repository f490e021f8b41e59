"""The documented tolerances at the edges, tested on both sides of each edge.

- the reach guard (docs/derivation.md section 5): a radicand a^2 + b^2 - c^2 down to
  -2e-9 (a^2 + b^2) is clamped to 0 (a double root, flagged singular), below that the branch has no
  solution; poses pushed 1e-12, 1e-9, 1e-7 and 1e-5 of the length scale beyond the stretched and
  folded elbow and inside the shoulder offset's cylinder;
- the radian snap (docs/arm-file.md, "Numbers and exact values"): a double within 4 units in the
  last place of k pi/12 is read as k pi/12, one farther is not;
- the limits (docs/solvers.md): a reading exactly at the limit widened by 1e-9 of the range is
  within it, the next double beyond is not, in the Python and the C solver.

References: the elbow arm's reach is the planar two-link law of cosines (Spong, Hutchinson and
Vidyasagar, *Robot Modeling and Control*, 1st ed. (2006), sec. 5.3, from memory), evaluated with
mpmath at 50 digits; the doubles of k pi/12 come from mpmath; neighbouring doubles from
math.nextafter.
"""

from __future__ import annotations

import math

import mpmath
import pytest
import sympy as sp

import shared
from helpers import build_arm, joint
from ikgen.exact import parse_exact, snap_radians
from ikgen.generate import load_module

D1, A2, A3, D2 = 0.4, 0.35, 0.3, 0.1
GUARD = 2e-9                                    # docs/derivation.md section 5


@pytest.fixture(scope="module")
def elbow():
    """An elbow arm with a shoulder offset D2 (point target): its reach is A2 + A3 in the arm's plane,
    at least |A2 - A3|, and the point must lie at least D2 from axis 1."""
    arm = build_arm([joint("r", a=0, alpha=90, d=D1), joint("r", a=A2, alpha=0, d=D2), joint("r", a=A3, alpha=0, d=0)],
                    name="guard3")
    return arm, load_module(shared.python_source(arm), "guard3_ik_under_test")


def point_at(planar: mpmath.mpf, radial: mpmath.mpf):
    """A point whose distance from axis 1 is ``radial`` and whose in-plane distance from the shoulder
    (through the offset D2) is ``planar`` (split evenly between reach and height where possible)."""
    horizontal_sq = radial ** 2 - D2 ** 2               # along the arm's plane, from axis 1
    height = mpmath.sqrt(max(planar ** 2 - horizontal_sq, 0)) if planar ** 2 > horizontal_sq else 0
    return [float(radial), 0.0, float(D1 + height)]


def relative_radicands(x, y, z):
    """The elbow's and the base's radicands over a^2 + b^2, at 50 digits: law of cosines
    cos(elbow) = (r^2 - A2^2 - A3^2) / (2 A2 A3) gives 1 - cos^2; the base angle from
    rho cos(phi) = D2 gives 1 - D2^2 / rho^2."""
    with mpmath.workdps(50):
        x, y, z = mpmath.mpf(x), mpmath.mpf(y), mpmath.mpf(z)
        rho_sq = x * x + y * y
        planar_sq = rho_sq - D2 ** 2 + (z - D1) ** 2
        cos3 = (planar_sq - A2 ** 2 - A3 ** 2) / (2 * mpmath.mpf(A2) * A3)
        return float(1 - cos3 ** 2), float(1 - D2 ** 2 / rho_sq)


def pose_of(point):
    return [[1.0, 0.0, 0.0, point[0]], [0.0, 1.0, 0.0, point[1]], [0.0, 0.0, 1.0, point[2]], [0.0, 0.0, 0.0, 1.0]]


@pytest.mark.parametrize("push", [1e-12, 1e-9, 1e-7, 1e-5])
@pytest.mark.parametrize("edge", ["stretched", "folded", "cylinder"])
def test_a_pose_just_beyond_a_reach_edge(elbow, edge, push):
    arm, module = elbow
    scale = arm.reach_scale()
    with mpmath.workdps(50):
        radial = mpmath.mpf(D2) + mpmath.mpf("0.2")
        if edge == "stretched":
            point = point_at(mpmath.mpf(A2 + A3) + push * scale, radial)
        elif edge == "folded":
            point = point_at(mpmath.mpf(A2 - A3) - push * scale, mpmath.mpf(D2) + mpmath.mpf("0.01"))
        else:
            point = point_at(mpmath.mpf("0.5"), mpmath.mpf(D2) - push * scale)
    elbow_radicand, base_radicand = relative_radicands(*point)
    radicand = base_radicand if edge == "cylinder" else elbow_radicand
    assert radicand < 0 and abs(abs(radicand) / GUARD - 1) > 0.05      # beyond the edge, not at the guard
    solutions = module.inverse(pose_of(point), limits="ignore")
    if radicand >= -GUARD:              # clamped: a double root on the edge, the point missed by about the push
        assert solutions, (edge, push, radicand)
        assert all(s[2] for s in solutions)                              # flagged singular
        for s in solutions:
            reached = module.forward(s[0])
            miss = math.dist([reached[i][3] for i in range(3)], point)
            assert miss <= 10 * push * scale + 1e-9 * scale, (edge, push, miss)
    else:
        assert solutions == [], (edge, push, radicand)


# ----------------------------------------------------------------------------- the radian snap

def double_of(k: int) -> float:
    with mpmath.workdps(60):
        return float(mpmath.mpf(k) * mpmath.pi / 12)


def ulps_away(x: float, n: int) -> float:
    for _ in range(abs(n)):
        x = math.nextafter(x, math.inf if n > 0 else -math.inf)
    return x


@pytest.mark.parametrize("k", [6, 3, 12, -6])
def test_the_snap_boundary_on_both_sides(k):
    x = double_of(k)
    assert x == k * math.pi / 12                         # the reference the reader compares with
    assert math.ulp(ulps_away(x, -5)) == math.ulp(ulps_away(x, 5)) == math.ulp(x)   # one binade
    for n in (-4, 4, -1, 1):
        assert snap_radians(parse_exact(ulps_away(x, n))) == sp.Rational(k, 12) * sp.pi, n
    for n in (-5, 5, -450, 450):
        value = parse_exact(ulps_away(x, n))
        assert snap_radians(value) == value, n


# ----------------------------------------------------------------------------- widened limits

def slide_arm(low: float, high: float):
    """A slide along z (point target with two revolute joints before it: RRP)."""
    return build_arm([joint("r", a=0, alpha=-90, d=0.3), joint("r", a=0, alpha=90, d=0.1),
                      joint("p", a=0, alpha=0, theta=0, limits=[low, high])], name="slide3")


def widened_high(low: float, high: float) -> float:
    """The upper limit as the solvers hold it (docs/solvers.md: widened by 1e-9 of the range)."""
    return float(high + 1e-9 * max(1.0, high - low))


def high_for(reading: float, low: float) -> float:
    """An upper limit whose widened value is exactly ``reading``."""
    high = reading - 1e-9 if reading - low - 1e-9 <= 1.0 else (reading + 1e-9 * low) / (1 + 1e-9)
    for _ in range(200):
        widened = widened_high(low, high)
        if widened == reading:
            return high
        high = math.nextafter(high, -math.inf if widened > reading else math.inf)
    raise AssertionError("no upper limit widens to the reading")


@pytest.fixture(scope="module")
def slide_reading():
    """A pose and the slide's reading the solvers compute for it (a stroke far wider than needed)."""
    arm = slide_arm(0.0, 2.0)
    module = load_module(shared.python_source(arm), "slide3_wide")
    pose = module.forward([30.0, 40.0, 0.6543210987])
    readings = sorted(s[0][2] for s in module.inverse(pose, limits="ignore"))
    return pose, readings[-1]


@pytest.mark.parametrize("solver", ["python", "c"])
@pytest.mark.parametrize("beyond", [False, True])
def test_a_reading_exactly_at_the_widened_limit(slide_reading, solver, beyond):
    pose, reading = slide_reading
    limit = reading if not beyond else math.nextafter(reading, -math.inf)     # the reading 1 ulp beyond it
    arm = slide_arm(0.0, high_for(limit, 0.0))
    if solver == "python":
        module = load_module(shared.python_source(arm), f"slide3_{int(beyond)}")
    else:
        module = shared.c_solver(arm)
    found = [s[0][2] for s in module.inverse(pose)]
    if beyond:
        assert reading not in found
    else:
        assert reading in found


def test_the_wrist_centre_on_joint_2s_axis_reads_no_reciprocal_of_zero():
    """benchtop6's elbow pair divides by minus the squared distance of the wrist centre from joint
    2's axis, through a reciprocal computed once per joint-1 root, before the elbow's reach test
    (hoist, docs/derivation.md section 3). With the wrist centre exactly on that axis the
    distance is 0: the arm cannot reach there (the law of cosines needs a distance of at least
    |a2 - sqrt(a3^2 + d4^2)| = 260 - sqrt(20^2 + 240^2) > 0 from joint 2; common practice), and
    the Python solver must say so without dividing by 0 (Python raises there), the C solver
    alike. Identity rotation: the wrist centre is the position less 70 + 95 mm along z, and with
    joint 1 at 0 it sits at a1 = 25 mm out and d1 = 220 mm up: the position (25, 0, 385). Joint 1
    turned by half a turn puts joint 2's axis 50 mm from it, within reach: only those solutions
    come back, and they take the arm to the pose."""
    from helpers import demo_arm
    arm = demo_arm("benchtop6")
    pose = [[1.0, 0.0, 0.0, 25.0], [0.0, 1.0, 0.0, 0.0], [0.0, 0.0, 1.0, 385.0], [0.0, 0.0, 0.0, 1.0]]
    assert 260.0 - math.hypot(20.0, 240.0) < 50.0
    module = load_module(shared.python_source(arm), "benchtop6_ik_reciprocal")
    found = module.inverse_joints(pose)
    assert found and all(abs(q[0]) == 180.0 for q in found)
    for q in found:
        reached = module.forward(q)
        assert max(abs(reached[i][k] - pose[i][k]) for i in range(3) for k in range(4)) < 1e-9
    assert shared.c_solver(arm).inverse_joints(pose) == found
