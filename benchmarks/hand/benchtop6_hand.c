/*
 * Hand-written closed-form inverse kinematics of the demo arm examples/benchtop6.toml: the yardstick
 * that benchmarks/bench_speed.py times the generated C solver against. Written by hand, not by
 * ikgen, and independently of its generator.
 *
 * Method (published, the formulas for this table derived here): kinematic decoupling at the wrist
 * centre (D. L. Pieper, PhD thesis, Stanford, 1968: the last three axes meet in one point); joint 1
 * from the wrist centre's azimuth, joints 2 and 3 as a planar two-link problem by the law of
 * cosines with atan2, joints 4-6 as a ZYZ-type wrist from R36 = R03^T R (Spong, Hutchinson and
 * Vidyasagar, Robot Modeling and Control, 1st ed., sec. 5.3 "Inverse position" and "Inverse
 * orientation"; Craig, Introduction to Robotics, 3rd ed., sec. 4.7; section numbers from memory).
 *
 * Standard DH, A_i = Rz(th_i) Tz(d_i) Tx(a_i) Rx(alpha_i), mm and degrees:
 *   1: a=25  alpha=-90 d=220    2: a=260 (th2 = q2 - 90)    3: a=20 alpha=-90
 *   4: d=240 alpha=90           5: alpha=-90                6: d=70; tool Tz(95)
 * Derivation (ours):
 *   wrist centre w = p - 165 z, with z the tool's approach (third rotation column);
 *   w = (c1 (25 + x1), s1 (25 + x1), 220 - y1) with, in the plane of links 2 and 3,
 *   x1 = 260 c2 + 20 c23 - 240 s23,  y1 = 260 s2 + 20 s23 + 240 c23.
 *   Joint 1: th1 = atan2(wy, wx) with r = 25 + x1 = +|w_xy|, or th1 + 180 with r = -|w_xy|
 *            (the offset a1 = 25 makes x1 = r - 25 differ between the two).
 *   Joint 3 (elbow offset a3 = 20 folded into L3 = sqrt(20^2 + 240^2) at phi = atan2(240, 20)):
 *            x1^2 + y1^2 = 260^2 + L3^2 + 520 L3 cos(th3 + phi), so
 *            K = L3 cos(th3 + phi) = (x1^2 + y1^2 - 125600) / 520, S = L3 sin(th3 + phi) = +-sqrt(L3^2 - K^2),
 *            th3 = atan2(S, K) - phi (the elbow's two branches are +-S: one atan2 for both).
 *   Joint 2: (x1, y1) = Rot(th2) (u, v) with u = 260 + K, v = S, so with rho2 = x1^2 + y1^2 = u^2 + v^2
 *            c2 = (u x1 + v y1) / rho2, s2 = (u y1 - v x1) / rho2, th2 = atan2(s2, c2).
 *   Wrist:   R03 columns x3 = (c1 c23, s1 c23, -s23), y3 = (s1, -c1, 0), z3 = (-c1 s23, -s1 s23, -c23);
 *            R36 = R03^T R = Rz(th4) Rx(90) Rz(th5) Rx(-90) Rz(th6) has
 *            m13 = -c4 s5, m23 = -s4 s5, m33 = c5, m31 = c6 s5, m32 = -s6 s5, so with s5 > 0:
 *            th5 = atan2(sqrt(m13^2 + m23^2), m33), th4 = atan2(-m23, -m13), th6 = atan2(-m32, m31);
 *            the other wrist is (th4 + 180, -th5, th6 + 180). At s5 = 0 only th4 + th6 (or th6 - th4)
 *            is fixed: th4 = 0 and th6 = atan2(m21, m22).
 * Readings: q = DH angle - theta offset (direction +1), in degrees, wrapped into (-180, 180].
 * Joint limits are ignored (all closed-form solutions); a pose out of reach gives 0 solutions.
 *
 * Two builds of this one file: as it is, benchtop6_hand_inverse (the readings and nothing else);
 * with -DBENCHTOP6_HAND_FULL, benchtop6_hand_inverse_full, the same solver writing what ikgen's
 * full call returns beside the readings (benchtop6_hand_solution in the header): the three
 * configuration labels, the singular flag, the three conditioning measures and whether the
 * readings lie within the arm file's limits, each computed where its inputs are known. The
 * readings-only build's code is the same with or without the full one (the FULL parts are
 * preprocessor blocks; READING(row, j) is row[j] there).
 *
 * Safety: a benchmark yardstick, not a product. Check every solution in simulation before moving a
 * real arm; limits and collisions are the integrator's job (ISO 10218-1/-2, ISO/TS 15066).
 * C99, <math.h> only.
 */
#include <math.h>

#include "benchtop6_hand.h"

#define R2D 57.295779513082321          /* 180 / pi */
#define PHI_DEG 85.236358309273826      /* atan2(240, 20) in degrees */
#define L3_SQ 58000.0                   /* 20^2 + 240^2 */
#define INV_L3_SQ (1.0 / 58000.0)
#define REACH_SLACK (1e-9 * L3_SQ)      /* S^2 this far below 0 is rounding: arm stretched or folded */
#define WRIST_FREE 1e-12                /* sin(th5) below this: joints 4 and 6 share one axis */

#ifdef BENCHTOP6_HAND_FULL
typedef benchtop6_hand_solution hand_row;
#define READING(row, j) ((row).joints[j])
/* ikgen's reach measure for this arm: the wrist centre's distance from axis 1 over sqrt(1e5) mm
 * (its typical squared size rounded to a power of ten, as its derivation prints); the elbow's is
 * |sin| of the elbow's angle from full stretch, S / L3; the wrist's |sin(th5)| */
#define REACH_GAIN 0.0031622776601683794
/* the arm file's joint limits (deg) of the joints whose range is less than a turn: 1, 2, 3, 5 */
#define HIGH1 170.0
#define HIGH2 120.0
#define HIGH3 150.0
#define HIGH5 125.0
#else
typedef double hand_row[6];
#define READING(row, j) ((row)[j])
#endif

static double wrap(double q)
{
    return q > 180.0 ? q - 360.0 : (q <= -180.0 ? q + 360.0 : q);
}

/* Joints 4-6 for one arm configuration, both wrists: writes two rows, returns 2. */
static int wrist(double m13, double m23, double m33, double m31, double m32,
                 double m21, double m22, hand_row q[2])
{
    const double s5 = sqrt(m13 * m13 + m23 * m23);
    double q4, q5, q6;
    if (s5 > WRIST_FREE) {
        q4 = atan2(-m23, -m13) * R2D;
        q5 = atan2(s5, m33) * R2D;
        q6 = atan2(-m32, m31) * R2D;
    } else {
        q4 = 0.0;
        q5 = m33 > 0.0 ? 0.0 : 180.0;
        q6 = atan2(m21, m22) * R2D;
    }
    READING(q[0], 3) = wrap(q4);
    READING(q[0], 4) = q5;
    READING(q[0], 5) = wrap(q6);
    READING(q[1], 3) = wrap(q4 + 180.0);
    READING(q[1], 4) = wrap(-q5);
    READING(q[1], 5) = wrap(q6 + 180.0);
#ifdef BENCHTOP6_HAND_FULL
    q[0].labels[2] = 1; /* bend_positive: sin(th5) >= 0 */
    q[1].labels[2] = -1;
    q[0].conditioning[2] = q[1].conditioning[2] = s5;
    const int free = s5 <= WRIST_FREE;
    q[0].singular = free;
    q[1].singular = free;
    q[0].within_limits = fabs(q5) <= HIGH5;
    q[1].within_limits = fabs(READING(q[1], 4)) <= HIGH5;
#endif
    return 2;
}

#ifdef BENCHTOP6_HAND_FULL
int benchtop6_hand_inverse_full(const double pose[16], hand_row q[BENCHTOP6_HAND_MAX])
#else
int benchtop6_hand_inverse(const double pose[16], hand_row q[BENCHTOP6_HAND_MAX])
#endif
{
    const double xx = pose[0], yx = pose[1], zx = pose[2], px = pose[3];
    const double xy = pose[4], yy = pose[5], zy = pose[6], py = pose[7];
    const double xz = pose[8], yz = pose[9], zz = pose[10], pz = pose[11];
    const double probe = xx + yx + zx + px + xy + yy + zy + py + xz + yz + zz + pz;
    if (probe - probe != 0.0)
        return 0; /* a NaN or an infinity in the pose */

    const double wx = px - 165.0 * zx, wy = py - 165.0 * zy, wz = pz - 165.0 * zz;
    const double rr = wx * wx + wy * wy;
    const double y1 = 220.0 - wz;
    double c1, s1, r, q1;
    int shoulders = 2;
    if (rr > 1e-24) {
        r = sqrt(rr);
        c1 = wx / r;
        s1 = wy / r;
        q1 = wrap(atan2(wy, wx) * R2D);
    } else { /* wrist centre on axis 1: joint 1 is free, keep it at 0 */
        r = 0.0, c1 = 1.0, s1 = 0.0, q1 = 0.0;
        shoulders = 1;
    }
    /* pose columns seen from joint 1 (shoulder 1; shoulder 2 negates them) */
    const double az1 = c1 * zx + s1 * zy, bz1 = s1 * zx - c1 * zy;
    const double ax1 = c1 * xx + s1 * xy, bx1 = s1 * xx - c1 * xy;
    const double ay1 = c1 * yx + s1 * yy, by1 = s1 * yx - c1 * yy;

#ifdef BENCHTOP6_HAND_FULL
    const double reach_measure = r * REACH_GAIN;
#endif
    int n = 0;
    for (int shoulder = 0; shoulder < shoulders; ++shoulder) {
        const double sign = shoulder ? -1.0 : 1.0;
        const double x1 = sign * r - 25.0;
        const double rho2 = x1 * x1 + y1 * y1;
        const double k = (rho2 - 125600.0) * (1.0 / 520.0);
        double ss = L3_SQ - k * k;
        if (ss < 0.0) {
            if (ss < -REACH_SLACK)
                continue; /* out of reach on this side */
            ss = 0.0;
        }
        const double s = sqrt(ss);
#ifdef BENCHTOP6_HAND_FULL
        const double elbow_measure = s * (1.0 / 240.83189157584592); /* S / L3, L3 = sqrt(58000) */
        const int arm_singular = shoulders == 1 || s == 0.0;
#endif
        const double q1s = shoulder ? wrap(q1 + 180.0) : q1;
        const double th3 = atan2(s, k) * R2D; /* th3 + phi of the first elbow; the other is -th3 */
        const double az = sign * az1, bz = sign * bz1, ax = sign * ax1;
        const double ay = sign * ay1, bx = sign * bx1, by = sign * by1;
        const double u = 260.0 + k, scale = INV_L3_SQ / rho2;
        for (int elbow = 0; elbow < 2; ++elbow) {
            const double v = elbow ? -s : s;
            /* cos and sin of th2 times rho2, of th3 times L3^2: atan2 needs no division, c23 and s23 one */
            const double c2 = u * x1 + v * y1, s2 = u * y1 - v * x1;
            const double c3 = 20.0 * k + 240.0 * v, s3 = 20.0 * v - 240.0 * k;
            const double c23 = (c2 * c3 - s2 * s3) * scale, s23 = (s2 * c3 + c2 * s3) * scale;
            hand_row *row = q + n;
            READING(row[0], 0) = READING(row[1], 0) = q1s;
            READING(row[0], 1) = READING(row[1], 1) = wrap(atan2(s2, c2) * R2D + 90.0);
            READING(row[0], 2) = READING(row[1], 2) = wrap((elbow ? -th3 : th3) - PHI_DEG);
            n += wrist(c23 * az - s23 * zz, bz, -s23 * az - c23 * zz, -s23 * ax - c23 * xz,
                       -s23 * ay - c23 * yz, bx, by, row);
#ifdef BENCHTOP6_HAND_FULL
            const int arm_inside = (fabs(q1s) <= HIGH1) & (fabs(READING(row[0], 1)) <= HIGH2)
                                   & (fabs(READING(row[0], 2)) <= HIGH3);
            const signed char elbow_label = elbow ? -1 : 1; /* elbow_up: the first root, v = +S */
            for (int w = 0; w < 2; ++w) { /* both wrists (wrist() set their own parts) */
                row[w].labels[0] = (signed char)sign; /* reach_forward: the wrist centre on link 1's x side */
                row[w].labels[1] = elbow_label;
                row[w].conditioning[0] = reach_measure;
                row[w].conditioning[1] = elbow_measure;
                row[w].singular |= arm_singular;
                row[w].within_limits &= arm_inside;
            }
#endif
        }
    }
    return n;
}
