/*
 * Timing harness for benchmarks/bench_speed.py: the generated C solver (double and float builds,
 * limits ignored, every solution; and the double build's readings-only entry _inverse_joints)
 * against the hand-written one (benchtop6_hand.c: its readings-only build, and its full build,
 * benchtop6_hand_inverse_full, which returns what the generated full call returns), same poses,
 * interleaved rounds.
 *
 * Compiled with -DIK_HEADER='"<arm>_ik.h"' -DIK_PREFIX=<arm>_ik -DIK_UPPER=<ARM>_IK and the same
 * three for the float build (IK32_HEADER, IK32_PREFIX, IK32_UPPER); each solver is its own
 * translation unit, so every solve is a real call into it (no inlining across files).
 *
 *   speed_harness POSES.bin ROUNDS
 * POSES.bin: raw native-endian doubles, 16 a pose (row-major 4x4). First one checking pass (the
 * generated and hand solvers must find the same number of solutions on every pose, and the
 * readings-only entry the same readings as the full one, bit for bit; the hand-written full build
 * the same readings as the hand-written readings-only one, bit for bit, and the same labels, flags
 * and (within 1e-9 of 1 + their size: near a double root the two compute a small
 * measure with different cancellations) conditioning measures as the generated full call), then ROUNDS
 * rounds, each one timed pass of every solver over all poses, the order of the solvers rotating
 * from round to round. Prints key=value lines: best and median ns per pose of each solver.
 * Built with -DIK_COUNTING (the double solvers compiled with -include ../c/count_math.h and linked
 * with ../c/counters.c), it prints instead the atan2 and sqrt calls per pose of the generated and
 * hand-written double solvers, after the checking pass.
 */
#define _POSIX_C_SOURCE 199309L

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include IK_HEADER
#include IK32_HEADER
#include "benchtop6_hand.h"

#define CAT_(a, b) a##b
#define CAT(a, b) CAT_(a, b)
#define GEN_INVERSE CAT(IK_PREFIX, _inverse)
#define GEN_JOINTS CAT(IK_PREFIX, _inverse_joints)
#define GEN_DOF CAT(IK_UPPER, _JOINTS)
#define GEN_SOLUTION CAT(IK_PREFIX, _solution)
#define GEN_MAX CAT(IK_UPPER, _MAX_SOLUTIONS)
#define GEN_IGNORE CAT(IK_UPPER, _LIMITS_IGNORE)
#define F32_INVERSE CAT(IK32_PREFIX, _inverse)
#define F32_SOLUTION CAT(IK32_PREFIX, _solution)
#define F32_MAX CAT(IK32_UPPER, _MAX_SOLUTIONS)
#define F32_IGNORE CAT(IK32_UPPER, _LIMITS_IGNORE)

enum { GENERATED, HAND, FLOAT_BUILD, READINGS, HAND_FULL, SOLVERS };
static const char *const NAMES[SOLVERS] = { "generated", "hand", "float", "readings", "hand_full" };

static volatile double sink; /* keeps every pass's results alive */

static double now_ns(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec * 1e9 + (double)t.tv_nsec;
}

static double *read_poses(const char *path, long *count)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        fprintf(stderr, "speed_harness: cannot open %s\n", path);
        exit(2);
    }
    fseek(f, 0, SEEK_END);
    long bytes = ftell(f);
    fseek(f, 0, SEEK_SET);
    *count = bytes / (long)(16 * sizeof(double));
    double *poses = malloc((size_t)(*count > 0 ? *count : 1) * 16 * sizeof(double));
    if (!poses || *count < 1 || fread(poses, 16 * sizeof(double), (size_t)*count, f) != (size_t)*count) {
        fprintf(stderr, "speed_harness: cannot read poses from %s\n", path);
        exit(2);
    }
    fclose(f);
    return poses;
}

/* One pass of one solver over all poses; returns elapsed ns. */
static double pass(int solver, const double *poses, const float *poses32, long count)
{
    GEN_SOLUTION generated[GEN_MAX];
    F32_SOLUTION single[F32_MAX];
    double hand[BENCHTOP6_HAND_MAX][6];
    benchtop6_hand_solution hand_full[BENCHTOP6_HAND_MAX];
    double readings[GEN_MAX][GEN_DOF];
    double total = 0.0;
    const double started = now_ns();
    for (long i = 0; i < count; ++i) {
        int n;
        if (solver == GENERATED) {
            n = GEN_INVERSE(poses + 16 * i, NULL, GEN_IGNORE, generated, NULL);
            total += n ? generated[n - 1].joints[5] : 0.0;
        } else if (solver == HAND) {
            n = benchtop6_hand_inverse(poses + 16 * i, hand);
            total += n ? hand[n - 1][5] : 0.0;
        } else if (solver == READINGS) {
            n = GEN_JOINTS(poses + 16 * i, NULL, readings);
            total += n ? readings[n - 1][5] : 0.0;
        } else if (solver == HAND_FULL) {
            n = benchtop6_hand_inverse_full(poses + 16 * i, hand_full);
            total += n ? hand_full[n - 1].joints[5] : 0.0;
        } else {
            n = F32_INVERSE(poses32 + 16 * i, NULL, F32_IGNORE, single, NULL);
            total += n ? single[n - 1].joints[5] : 0.0;
        }
        total += n;
    }
    const double elapsed = now_ns() - started;
    sink += total;
    return elapsed;
}

#ifdef IK_COUNTING
extern unsigned long bench_atan2_calls, bench_sqrt_calls;

/* Prints the maths-library calls per pose of the two double solvers (source-level calls). */
static void count_calls(const double *poses, long count)
{
    GEN_SOLUTION generated[GEN_MAX];
    double hand[BENCHTOP6_HAND_MAX][6];
    for (int solver = GENERATED; solver <= HAND; ++solver) {
        bench_atan2_calls = bench_sqrt_calls = 0;
        for (long i = 0; i < count; ++i) {
            if (solver == GENERATED)
                GEN_INVERSE(poses + 16 * i, NULL, GEN_IGNORE, generated, NULL);
            else
                benchtop6_hand_inverse(poses + 16 * i, hand);
        }
        printf("%s_atan2_calls=%.4f\n%s_sqrt_calls=%.4f\n", NAMES[solver], (double)bench_atan2_calls / (double)count,
               NAMES[solver], (double)bench_sqrt_calls / (double)count);
    }
}
#endif

static int by_value(const void *a, const void *b)
{
    const double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: speed_harness POSES.bin ROUNDS\n");
        return 2;
    }
    long count;
    double *poses = read_poses(argv[1], &count);
    const int rounds = atoi(argv[2]) > 0 ? atoi(argv[2]) : 1;
    float *poses32 = malloc((size_t)count * 16 * sizeof(float));
    double *times = malloc((size_t)rounds * SOLVERS * sizeof(double));
    if (!poses32 || !times)
        return 2;
    for (long i = 0; i < 16 * count; ++i)
        poses32[i] = (float)poses[i];

    GEN_SOLUTION generated[GEN_MAX];
    F32_SOLUTION single[F32_MAX];
    double hand[BENCHTOP6_HAND_MAX][6];
    benchtop6_hand_solution hand_full[BENCHTOP6_HAND_MAX];
    double readings[GEN_MAX][GEN_DOF];
    long mismatched = 0, readings_differ = 0, full_differ = 0, solutions[SOLVERS] = { 0, 0, 0, 0, 0 };
    for (long i = 0; i < count; ++i) {
        const int g = GEN_INVERSE(poses + 16 * i, NULL, GEN_IGNORE, generated, NULL);
        const int h = benchtop6_hand_inverse(poses + 16 * i, hand);
        solutions[GENERATED] += g;
        solutions[HAND] += h;
        solutions[FLOAT_BUILD] += F32_INVERSE(poses32 + 16 * i, NULL, F32_IGNORE, single, NULL);
        mismatched += g != h;
        const int q = GEN_JOINTS(poses + 16 * i, NULL, readings);
        solutions[READINGS] += q;
        int differ = q != g;
        for (int k = 0; k < q && k < g; ++k)
            for (int j = 0; j < GEN_DOF; ++j)
                differ |= readings[k][j] != generated[k].joints[j];
        readings_differ += differ;
        /* the hand-written full build: its readings bit for bit those of the readings-only build,
         * its labels and flags those of the generated full call, its measures within 1e-9 */
        const int f = benchtop6_hand_inverse_full(poses + 16 * i, hand_full);
        solutions[HAND_FULL] += f;
        differ = f != h || f != g;
        for (int k = 0; k < f && k < h && k < g; ++k) {
            for (int j = 0; j < 6; ++j)
                differ |= hand_full[k].joints[j] != hand[k][j];
            for (int j = 0; j < 3; ++j) {
                differ |= hand_full[k].labels[j] != generated[k].labels[j];
                differ |= !(fabs(hand_full[k].conditioning[j] - generated[k].conditioning[j])
                            <= 1e-9 * (1.0 + fabs(generated[k].conditioning[j])));
            }
            differ |= hand_full[k].singular != generated[k].singular;
            differ |= hand_full[k].within_limits != generated[k].within_limits;
        }
        full_differ += differ;
    }

#ifdef IK_COUNTING
    printf("poses=%ld\ncount_mismatches=%ld\n", count, mismatched);
    count_calls(poses, count);
    return 0;
#endif
    for (int r = 0; r < rounds; ++r)
        for (int k = 0; k < SOLVERS; ++k) {
            const int solver = (r + k) % SOLVERS;
            times[solver * rounds + r] = pass(solver, poses, poses32, count);
        }

    printf("poses=%ld\nrounds=%d\ncount_mismatches=%ld\nreadings_mismatches=%ld\nhand_full_mismatches=%ld\n", count,
           rounds, mismatched, readings_differ, full_differ);
    for (int s = 0; s < SOLVERS; ++s) {
        qsort(times + s * rounds, (size_t)rounds, sizeof(double), by_value);
        printf("%s_solutions=%ld\n", NAMES[s], solutions[s]);
        printf("%s_best_ns=%.3f\n", NAMES[s], times[s * rounds] / (double)count);
        printf("%s_median_ns=%.3f\n", NAMES[s], times[s * rounds + rounds / 2] / (double)count);
    }
    free(poses);
    free(poses32);
    free(times);
    return 0;
}
