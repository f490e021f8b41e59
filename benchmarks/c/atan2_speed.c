/*
 * Timing harness for benchmarks/bench_atan2.py: the maths library's atan2 and atan2f against the
 * generated C's optional atan2 kernel (templates/c_atan2.c.j2), and a generated solver built
 * without and with the kernel.
 *
 * Compiled with -DIKGEN_FAST_ATAN2 and kernel.inc (the kernel rendered for double as kernel_atan2
 * and for float as kernel_f32_atan2, both static in this translation unit, as in a generated
 * source). With -DWITH_SOLVER it is also linked with four objects of one arm's generated solver:
 * the double and float builds, each compiled once as it is (exported names prefixed lib_) and
 * once with -DIKGEN_FAST_ATAN2 (prefixed fast_, by objcopy), and gets -DIK_HEADER, -DIK32_HEADER,
 * -DIK_PREFIX, -DIK32_PREFIX, -DIK_UPPER, -DIK32_UPPER as benchmarks/hand/speed_harness.c does.
 *
 *   atan2_speed ARGS.bin ROUNDS [POSES.bin]
 * ARGS.bin: pairs (y, x) of doubles; the float timings use the same pairs rounded to float.
 * POSES.bin: raw doubles, 16 a pose (row-major 4x4). ROUNDS rounds, each one timed pass of every
 * function over all its inputs, the order rotating from round to round; prints key=value lines,
 * best and median ns per call (per full solve, limits ignored, for the solvers), and for the
 * solvers the number of poses whose solution count differs between the builds.
 */
#define _POSIX_C_SOURCE 199309L

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "kernel.inc"

#ifdef WITH_SOLVER
#include IK_HEADER
#include IK32_HEADER
#define CAT_(a, b) a##b
#define CAT(a, b) CAT_(a, b)
#define NAME(build, prefix, suffix) CAT(build, CAT(prefix, suffix))
#define SOLUTION CAT(IK_PREFIX, _solution)
#define SOLUTION32 CAT(IK32_PREFIX, _solution)
#define STATUS CAT(IK_PREFIX, _status)
#define STATUS32 CAT(IK32_PREFIX, _status)
#define MAX_SOLUTIONS CAT(IK_UPPER, _MAX_SOLUTIONS)
#define MAX_SOLUTIONS32 CAT(IK32_UPPER, _MAX_SOLUTIONS)
#define IGNORE CAT(IK_UPPER, _LIMITS_IGNORE)
#define IGNORE32 CAT(IK32_UPPER, _LIMITS_IGNORE)
#define LIMITS CAT(IK_PREFIX, _limits)
#define LIMITS32 CAT(IK32_PREFIX, _limits)
/* the builds' renamed entry points (bench_atan2.py renames every exported symbol with objcopy) */
int NAME(lib_, IK_PREFIX, _inverse)(const double pose[16], const double *current, LIMITS limits,
                                    SOLUTION *out, STATUS *status);
int NAME(fast_, IK_PREFIX, _inverse)(const double pose[16], const double *current, LIMITS limits,
                                     SOLUTION *out, STATUS *status);
int NAME(lib_, IK32_PREFIX, _inverse)(const float pose[16], const float *current, LIMITS32 limits,
                                      SOLUTION32 *out, STATUS32 *status);
int NAME(fast_, IK32_PREFIX, _inverse)(const float pose[16], const float *current, LIMITS32 limits,
                                       SOLUTION32 *out, STATUS32 *status);
#endif

enum { LIB_DOUBLE, KERNEL_DOUBLE, LIB_FLOAT, KERNEL_FLOAT, SOLVER_LIB, SOLVER_FAST, SOLVER32_LIB, SOLVER32_FAST, ALL };
static const char *const NAMES[ALL] = { "atan2", "kernel", "atan2f", "kernel_f32",
                                        "solver_library", "solver_kernel", "solver_f32_library", "solver_f32_kernel" };

static volatile double sink; /* keeps every pass's results alive */

static double now_ns(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec * 1e9 + (double)t.tv_nsec;
}

static void *read_all(const char *path, size_t item, long *count)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        fprintf(stderr, "atan2_speed: cannot open %s\n", path);
        exit(2);
    }
    fseek(f, 0, SEEK_END);
    const long bytes = ftell(f);
    fseek(f, 0, SEEK_SET);
    *count = bytes / (long)item;
    void *data = malloc((size_t)(*count > 0 ? *count : 1) * item);
    if (!data || *count < 1 || fread(data, item, (size_t)*count, f) != (size_t)*count) {
        fprintf(stderr, "atan2_speed: cannot read %s\n", path);
        exit(2);
    }
    fclose(f);
    return data;
}

/* One pass of one per-call function over all pairs; elapsed ns. */
static double pass_calls(int which, const double *pairs, const float *pairs32, long count)
{
    double acc = 0.0;
    float acc32 = 0.0f;
    const double started = now_ns();
    switch (which) {
    case LIB_DOUBLE:
        for (long i = 0; i < count; ++i) acc += atan2(pairs[2 * i], pairs[2 * i + 1]);
        break;
    case KERNEL_DOUBLE:
        for (long i = 0; i < count; ++i) acc += kernel_atan2(pairs[2 * i], pairs[2 * i + 1]);
        break;
    case LIB_FLOAT:
        for (long i = 0; i < count; ++i) acc32 += atan2f(pairs32[2 * i], pairs32[2 * i + 1]);
        break;
    default:
        for (long i = 0; i < count; ++i) acc32 += kernel_f32_atan2(pairs32[2 * i], pairs32[2 * i + 1]);
        break;
    }
    const double elapsed = now_ns() - started;
    sink = acc + (double)acc32;
    return elapsed;
}

#ifdef WITH_SOLVER
static SOLUTION solutions[MAX_SOLUTIONS];
static SOLUTION32 solutions32[MAX_SOLUTIONS32];

/* One pass of one solver build over all poses; elapsed ns; counts[i] gets pose i's solutions. */
static double pass_solver(int which, const double *poses, const float *poses32, long count, int *counts)
{
    STATUS status;
    STATUS32 status32;
    double acc = 0.0;
    const double started = now_ns();
    for (long i = 0; i < count; ++i) {
        int n;
        if (which == SOLVER_LIB) {
            n = NAME(lib_, IK_PREFIX, _inverse)(poses + 16 * i, NULL, IGNORE, solutions, &status);
            acc += n > 0 ? solutions[0].joints[0] : 0.0;
        } else if (which == SOLVER_FAST) {
            n = NAME(fast_, IK_PREFIX, _inverse)(poses + 16 * i, NULL, IGNORE, solutions, &status);
            acc += n > 0 ? solutions[0].joints[0] : 0.0;
        } else if (which == SOLVER32_LIB) {
            n = NAME(lib_, IK32_PREFIX, _inverse)(poses32 + 16 * i, NULL, IGNORE32, solutions32, &status32);
            acc += n > 0 ? (double)solutions32[0].joints[0] : 0.0;
        } else {
            n = NAME(fast_, IK32_PREFIX, _inverse)(poses32 + 16 * i, NULL, IGNORE32, solutions32, &status32);
            acc += n > 0 ? (double)solutions32[0].joints[0] : 0.0;
        }
        counts[i] = n;
    }
    const double elapsed = now_ns() - started;
    sink = acc;
    return elapsed;
}
#endif

static int by_value(const void *a, const void *b)
{
    const double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    if (argc != 3 && argc != 4) {
        fprintf(stderr, "usage: atan2_speed ARGS.bin ROUNDS [POSES.bin]\n");
        return 2;
    }
    long count = 0, poses_count = 0;
    const double *pairs = read_all(argv[1], 2 * sizeof(double), &count);
    const int rounds = atoi(argv[2]);
    float *pairs32 = malloc((size_t)count * 2 * sizeof(float));
    for (long i = 0; i < 2 * count; ++i) pairs32[i] = (float)pairs[i];
    int first = LIB_DOUBLE, last = KERNEL_FLOAT;
    const double *poses = NULL;
    float *poses32 = NULL;
    int *counts[4] = { NULL, NULL, NULL, NULL };
#ifdef WITH_SOLVER
    if (argc == 4) {
        poses = read_all(argv[3], 16 * sizeof(double), &poses_count);
        poses32 = malloc((size_t)poses_count * 16 * sizeof(float));
        for (long i = 0; i < 16 * poses_count; ++i) poses32[i] = (float)poses[i];
        for (int k = 0; k < 4; ++k) counts[k] = malloc((size_t)poses_count * sizeof(int));
        last = SOLVER32_FAST;
    }
#endif
    const int functions = last - first + 1;
    double *times = malloc((size_t)(rounds * ALL) * sizeof(double));
    for (int r = 0; r < rounds; ++r) {
        for (int k = 0; k < functions; ++k) {
            const int which = first + (r + k) % functions;
            double elapsed;
            if (which <= KERNEL_FLOAT) {
                elapsed = pass_calls(which, pairs, pairs32, count) / (double)count;
            } else {
#ifdef WITH_SOLVER
                elapsed = pass_solver(which, poses, poses32, poses_count, counts[which - SOLVER_LIB])
                          / (double)poses_count;
#else
                elapsed = 0.0;
#endif
            }
            times[which * rounds + r] = elapsed;
        }
    }
    for (int which = first; which <= last; ++which) {
        double *row = times + which * rounds;
        qsort(row, (size_t)rounds, sizeof(double), by_value);
        printf("%s_best_ns=%.3f\n%s_median_ns=%.3f\n", NAMES[which], row[0], NAMES[which], row[rounds / 2]);
    }
    if (poses_count > 0) {
        long differ = 0, differ32 = 0;
        for (long i = 0; i < poses_count; ++i) {
            differ += counts[0][i] != counts[1][i];
            differ32 += counts[2][i] != counts[3][i];
        }
        printf("solver_count_differences=%ld\nsolver_f32_count_differences=%ld\n", differ, differ32);
    }
    printf("calls_per_pass=%ld\nposes_per_pass=%ld\n", count, poses_count);
    return 0;
}
