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

#endif /* BENCHTOP6_HAND_H */
