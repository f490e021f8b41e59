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
