/*
 * Hand-written closed-form inverse kinematics of the demo arm examples/benchtop6.toml (a benchmark
 * yardstick for the generated solver; see benchtop6_hand.c for the method and the derivation).
 * C99, <math.h> only, no state.
 */
#ifndef BENCHTOP6_HAND_H
#define BENCHTOP6_HAND_H

#define BENCHTOP6_HAND_MAX 8

/* Every closed-form solution of a tool pose (row-major 4x4, mm), joint limits ignored: writes up to
 * 8 rows of 6 joint readings in degrees, each in (-180, 180], and returns their number (0 when the
 * pose is out of reach or holds a NaN or an infinity). */
int benchtop6_hand_inverse(const double pose[16], double q[BENCHTOP6_HAND_MAX][6]);

/* One solution with what ikgen's full call returns beside the readings (its labels' and measures'
 * definitions, docs/derivation.md and docs/solvers.md, computed here from this solver's own
 * quantities). */
typedef struct {
    double joints[6];         /* readings in degrees, each in (-180, 180] */
    double conditioning[3];   /* reach: |w_xy| / sqrt(1e5) mm; elbow: |sin| from full stretch; wrist: |sin(th5)| */
    signed char labels[3];    /* +1 / -1: reach forward / backward, elbow up / down, wrist bend positive / negative */
    int singular;             /* joint 1, 4 or 6 free, or the elbow's two roots coincide */
    int within_limits;        /* every reading within the joint limits of examples/benchtop6.toml */
} benchtop6_hand_solution;

/* The same solutions in the same order as benchtop6_hand_inverse, each with its labels, flags and
 * measures (built from benchtop6_hand.c with -DBENCHTOP6_HAND_FULL). */
int benchtop6_hand_inverse_full(const double pose[16], benchtop6_hand_solution q[BENCHTOP6_HAND_MAX]);

#endif /* BENCHTOP6_HAND_H */
