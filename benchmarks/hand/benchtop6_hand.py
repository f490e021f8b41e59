"""Hand-written closed-form inverse kinematics of the demo arm examples/benchtop6.toml, in pure Python.

The yardstick that benchmarks/bench_speed.py times the generated Python solver against. Written by
hand, not by ikgen, and independently of its generator; the same formulas as benchtop6_hand.c, where
the method (wrist-centre decoupling, Pieper 1968; planar two-link law of cosines with atan2; a
ZYZ-type wrist; Spong, Hutchinson and Vidyasagar, Robot Modeling and Control, 1st ed., sec. 5.3, and
Craig, Introduction to Robotics, 3rd ed., sec. 4.7, section numbers from memory) and the derivation
for this DH table are written out.

``inverse(pose)`` takes a row-major 4x4 tool pose (nested sequences, mm) and returns every
closed-form solution, joint limits ignored, as a list of 6-tuples of readings in degrees, each in
(-180, 180]; an empty list when the pose is out of reach or holds a NaN or an infinity.
``inverse_full(pose)`` returns the same solutions in the same order with what ikgen's full call
returns beside the readings, for the side-by-side timing of that call: a HandSolution each,
(readings, labels, singular, conditioning, within_limits), the labels as ikgen names them and its
measures as it defines them (docs/solvers.md, docs/derivation.md), computed from this solver's own
quantities where they are known. It repeats inverse's lines rather than sharing them, so that
neither pays for the other's outputs (benchtop6_hand.c does the same with one source built twice).
Imports only ``math``.

Safety: a benchmark yardstick, not a product. Check every solution in simulation before moving a
real arm; limits and collisions are the integrator's job (ISO 10218-1/-2, ISO/TS 15066).
"""

from math import atan2, sqrt

R2D = 57.295779513082321          # 180 / pi
PHI_DEG = 85.236358309273826      # atan2(240, 20) in degrees: the elbow offset a3 = 20 against d4 = 240
L3_SQ = 58000.0                   # 20^2 + 240^2
REACH_SLACK = 1e-9 * L3_SQ        # S^2 this far below 0 is rounding: arm stretched or folded
WRIST_FREE = 1e-12                # sin(th5) below this: joints 4 and 6 share one axis
# inverse_full: ikgen's reach measure for this arm, the wrist centre's distance from axis 1 over
# sqrt(1e5) mm (its typical squared size rounded to a power of ten, as ikgen's derivation prints);
# the elbow's is |sin| of the elbow's angle from full stretch, S / L3; the wrist's |sin(th5)|
REACH_GAIN = 0.0031622776601683794
INV_L3 = 1.0 / 240.83189157584592  # 1 / sqrt(58000)
# every configuration, [reach][elbow][wrist bend], with the first value of each label first
CONFIGS = tuple(tuple(tuple((reach, elbow, bend) for bend in ("bend_positive", "bend_negative"))
                      for elbow in ("elbow_up", "elbow_down")) for reach in ("reach_forward", "reach_backward"))


def inverse(pose, atan2=atan2, sqrt=sqrt):
    """Every closed-form solution of a tool pose (see the module docstring); atan2 and sqrt are
    bound as defaults because local names are faster to look up than globals in CPython."""
    # atan2(...) * R2D lies in [-180, 180] (180/pi * pi rounds to 180 exactly), so a reading needs at
    # most one comparison to land in (-180, 180]; helpers are inlined: a call costs more than the maths
    (xx, yx, zx, px), (xy, yy, zy, py), (xz, yz, zz, pz) = pose[0], pose[1], pose[2]
    probe = xx + yx + zx + px + xy + yy + zy + py + xz + yz + zz + pz
    if probe - probe != 0.0:
        return []
    wx, wy, wz = px - 165.0 * zx, py - 165.0 * zy, pz - 165.0 * zz
    rr = wx * wx + wy * wy
    y1 = 220.0 - wz
    if rr > 1e-24:
        r = sqrt(rr)
        c1, s1 = wx / r, wy / r
        q1 = atan2(wy, wx) * R2D
        if q1 <= -180.0:
            q1 = 180.0
        sides = ((r, 1.0, q1), (-r, -1.0, q1 - 180.0 if q1 > 0.0 else q1 + 180.0))
    else:  # wrist centre on axis 1: joint 1 is free, keep it at 0
        c1, s1 = 1.0, 0.0
        sides = ((0.0, 1.0, 0.0),)
    # pose columns seen from joint 1 (shoulder side 1; side 2 negates them)
    az1, bz1 = c1 * zx + s1 * zy, s1 * zx - c1 * zy
    ax1, bx1 = c1 * xx + s1 * xy, s1 * xx - c1 * xy
    ay1, by1 = c1 * yx + s1 * yy, s1 * yx - c1 * yy
    out = []
    for r, sign, q1 in sides:
        x1 = r - 25.0
        rho2 = x1 * x1 + y1 * y1
        k = (rho2 - 125600.0) * (1.0 / 520.0)
        ss = L3_SQ - k * k
        if ss < 0.0:
            if ss < -REACH_SLACK:
                continue  # out of reach on this side
            ss = 0.0
        s = sqrt(ss)
        th3 = atan2(s, k) * R2D  # th3 + phi of the first elbow, in [0, 180]; the other elbow has -th3
        q3b = -th3 - PHI_DEG
        if q3b <= -180.0:
            q3b += 360.0
        az, bz, ax, ay = sign * az1, sign * bz1, sign * ax1, sign * ay1
        u = 260.0 + k
        scale = 1.0 / (rho2 * L3_SQ)
        for v, q3 in ((s, th3 - PHI_DEG), (-s, q3b)):
            # cos and sin of th2 times rho2, of th3 times L3^2: atan2 needs no division, c23 and s23 one
            c2, s2 = u * x1 + v * y1, u * y1 - v * x1
            c3, s3 = 20.0 * k + 240.0 * v, 20.0 * v - 240.0 * k
            c23, s23 = (c2 * c3 - s2 * s3) * scale, (s2 * c3 + c2 * s3) * scale
            q2 = atan2(s2, c2) * R2D + 90.0
            if q2 > 180.0:
                q2 -= 360.0
            # wrist: R36 = R03^T R, entries m13, m23 (= bz), m33, m31, m32
            m13 = c23 * az - s23 * zz
            s5 = sqrt(m13 * m13 + bz * bz)
            if s5 > WRIST_FREE:
                q4 = atan2(-bz, -m13) * R2D
                q5 = atan2(s5, -s23 * az - c23 * zz) * R2D
                q6 = atan2(s23 * ay + c23 * yz, -s23 * ax - c23 * xz) * R2D
                if q4 <= -180.0:
                    q4 = 180.0
                if q6 <= -180.0:
                    q6 = 180.0
                q5b = -q5
            else:  # joints 4 and 6 on one axis: keep joint 4 at 0, th6 = atan2(m21, m22)
                q4, q5 = 0.0, (0.0 if -s23 * az - c23 * zz > 0.0 else 180.0)
                q5b = q5  # 0 and 180 are their own negatives in (-180, 180]
                q6 = atan2(sign * bx1, sign * by1) * R2D
                if q6 <= -180.0:
                    q6 = 180.0
            out += ((q1, q2, q3, q4, q5, q6),
                    (q1, q2, q3, q4 - 180.0 if q4 > 0.0 else q4 + 180.0, q5b, q6 - 180.0 if q6 > 0.0 else q6 + 180.0))
    return out


class HandSolution(tuple):
    """(joints, config, singular, conditioning, within_limits), with those names as properties."""

    __slots__ = ()

    @property
    def joints(self):
        return self[0]

    @property
    def config(self):
        return self[1]

    @property
    def singular(self):
        return self[2]

    @property
    def conditioning(self):
        return self[3]

    @property
    def within_limits(self):
        return self[4]


def inverse_full(pose, atan2=atan2, sqrt=sqrt, row=HandSolution):
    """inverse's solutions, in its order, each a HandSolution: the labels from prebuilt tuples
    picked where they are known (the reach per shoulder side, the elbow per elbow, the wrist bend
    per row), singular when joint 1 is free, the elbow's roots coincide or joints 4 and 6 share an
    axis, the conditioning measures (reach, elbow, wrist), and whether every reading lies within
    the joint limits of examples/benchtop6.toml (joints 4 and 6 can turn a whole turn)."""
    (xx, yx, zx, px), (xy, yy, zy, py), (xz, yz, zz, pz) = pose[0], pose[1], pose[2]
    probe = xx + yx + zx + px + xy + yy + zy + py + xz + yz + zz + pz
    if probe - probe != 0.0:
        return []
    wx, wy, wz = px - 165.0 * zx, py - 165.0 * zy, pz - 165.0 * zz
    rr = wx * wx + wy * wy
    y1 = 220.0 - wz
    if rr > 1e-24:
        r = sqrt(rr)
        c1, s1 = wx / r, wy / r
        q1 = atan2(wy, wx) * R2D
        if q1 <= -180.0:
            q1 = 180.0
        sides = ((r, 1.0, q1, CONFIGS[0]), (-r, -1.0, q1 - 180.0 if q1 > 0.0 else q1 + 180.0, CONFIGS[1]))
        free1 = False
    else:  # wrist centre on axis 1: joint 1 is free, keep it at 0
        c1, s1, r = 1.0, 0.0, 0.0
        sides = ((0.0, 1.0, 0.0, CONFIGS[0]),)
        free1 = True
    reach_measure = r * REACH_GAIN
    az1, bz1 = c1 * zx + s1 * zy, s1 * zx - c1 * zy
    ax1, bx1 = c1 * xx + s1 * xy, s1 * xx - c1 * xy
    ay1, by1 = c1 * yx + s1 * yy, s1 * yx - c1 * yy
    out = []
    for r, sign, q1, side in sides:
        x1 = r - 25.0
        rho2 = x1 * x1 + y1 * y1
        k = (rho2 - 125600.0) * (1.0 / 520.0)
        ss = L3_SQ - k * k
        if ss < 0.0:
            if ss < -REACH_SLACK:
                continue
            ss = 0.0
        s = sqrt(ss)
        th3 = atan2(s, k) * R2D
        q3b = -th3 - PHI_DEG
        if q3b <= -180.0:
            q3b += 360.0
        az, bz, ax, ay = sign * az1, sign * bz1, sign * ax1, sign * ay1
        u = 260.0 + k
        scale = 1.0 / (rho2 * L3_SQ)
        arm_singular = free1 or ss == 0.0
        elbow_measure = s * INV_L3
        in1 = -170.0 <= q1 <= 170.0
        for v, q3, configs in ((s, th3 - PHI_DEG, side[0]), (-s, q3b, side[1])):
            c2, s2 = u * x1 + v * y1, u * y1 - v * x1
            c3, s3 = 20.0 * k + 240.0 * v, 20.0 * v - 240.0 * k
            c23, s23 = (c2 * c3 - s2 * s3) * scale, (s2 * c3 + c2 * s3) * scale
            q2 = atan2(s2, c2) * R2D + 90.0
            if q2 > 180.0:
                q2 -= 360.0
            m13 = c23 * az - s23 * zz
            s5 = sqrt(m13 * m13 + bz * bz)
            if s5 > WRIST_FREE:
                q4 = atan2(-bz, -m13) * R2D
                q5 = atan2(s5, -s23 * az - c23 * zz) * R2D
                q6 = atan2(s23 * ay + c23 * yz, -s23 * ax - c23 * xz) * R2D
                if q4 <= -180.0:
                    q4 = 180.0
                if q6 <= -180.0:
                    q6 = 180.0
                q5b = -q5
                singular = arm_singular
            else:
                q4, q5 = 0.0, (0.0 if -s23 * az - c23 * zz > 0.0 else 180.0)
                q5b = q5
                q6 = atan2(sign * bx1, sign * by1) * R2D
                if q6 <= -180.0:
                    q6 = 180.0
                singular = True
            conditioning = (reach_measure, elbow_measure, s5)
            inside = in1 and -120.0 <= q2 <= 120.0 and -150.0 <= q3 <= 150.0
            out += (row(((q1, q2, q3, q4, q5, q6), configs[0], singular, conditioning,
                         inside and -125.0 <= q5 <= 125.0)),
                    row(((q1, q2, q3, q4 - 180.0 if q4 > 0.0 else q4 + 180.0, q5b,
                          q6 - 180.0 if q6 > 0.0 else q6 + 180.0), configs[1], singular, conditioning,
                         inside and -125.0 <= q5b <= 125.0)))
    return out
