/*
 * Benchmark harness for one generated double-precision C solver (driven by benchmarks/bench_c.py).
 *
 * Compiled with -DIK_HEADER='"<arm>_ik.h"' -DIK_PREFIX=<arm>_ik -DIK_UPPER=<ARM>_IK.
 *
 * Counting build (-DIK_COUNTING, linked with counters.c and a solver compiled with the counting
 * renames):  harness POSES.bin COUNTS.bin
 *   solves every pose once, records per pose the number of atan2, sqrt, sin and cos calls and of
 *   solutions into COUNTS.bin (5 bytes a pose), checks every solution by the solver's own forward
 *   kinematics, and prints totals as key=value lines.
 * Timing build:  harness POSES.bin COUNTS.bin REPEATS [solve-only]
 *   alternates, REPEATS times, one pass of full solves over all poses with one pass of "the
 *   floor" (per pose, exactly as many atan2 and sqrt calls as the solver made on it, on the
 *   pose's own entries), and prints the best and the median pass of each as key=value lines;
 *   with solve-only, times the solver alone (for the diagnostic build with atan2 stubbed).
 *
 * POSES.bin: raw native-endian doubles, 16 a pose (row-major 4x4 tool pose in the world frame).
 */
#define _POSIX_C_SOURCE 199309L

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include IK_HEADER

#define CAT_(a, b) a##b
#define CAT(a, b) CAT_(a, b)
#define IK_INVERSE CAT(IK_PREFIX, _inverse)
#define IK_FORWARD CAT(IK_PREFIX, _forward)
#define SOLVER_RESULT CAT(IK_PREFIX, _solution)
#define IK_STATUS CAT(IK_PREFIX, _status)
#define IK_MAX CAT(IK_UPPER, _MAX_SOLUTIONS)
#define IK_DOF CAT(IK_UPPER, _JOINTS)
#define IK_CLOSED_FORM CAT(IK_UPPER, _LIMITS_IGNORE) /* the closed-form solve alone, no limit handling */

#define RECORD 5 /* bytes a pose in COUNTS.bin: atan2, sqrt, sin, cos, solutions */

static void *read_file(const char *path, size_t *size)
{
    FILE *f = fopen(path, "rb");
    if (!f) {
        fprintf(stderr, "harness: cannot open %s\n", path);
        exit(2);
    }
    fseek(f, 0, SEEK_END);
    long length = ftell(f);
    fseek(f, 0, SEEK_SET);
    void *data = malloc(length > 0 ? (size_t)length : 1);
    if (!data || fread(data, 1, (size_t)length, f) != (size_t)length) {
        fprintf(stderr, "harness: cannot read %s\n", path);
        exit(2);
    }
    fclose(f);
    *size = (size_t)length;
    return data;
}

static const double *load_poses(const char *path, size_t *count)
{
    size_t size;
    const double *poses = read_file(path, &size);
    if (size == 0 || size % (16 * sizeof(double)) != 0) {
        fprintf(stderr, "harness: %s holds %zu bytes, expected a multiple of %zu (16 doubles a pose)\n",
                path, size, 16 * sizeof(double));
        exit(2);
    }
    *count = size / (16 * sizeof(double));
    return poses;
}

#ifdef IK_COUNTING

extern unsigned long bench_atan2_calls, bench_sqrt_calls, bench_sin_calls, bench_cos_calls;

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: %s POSES.bin COUNTS.bin\n", argv[0]);
        return 2;
    }
    size_t n;
    const double *poses = load_poses(argv[1], &n);
    unsigned char *record = calloc(n, RECORD);
    SOLVER_RESULT solutions[IK_MAX];
    IK_STATUS status;
    unsigned long totals[4] = {0, 0, 0, 0}, maxima[4] = {0, 0, 0, 0}, minima[4] = {~0ul, ~0ul, ~0ul, ~0ul};
    unsigned long solution_total = 0, no_solution = 0, histogram[IK_MAX + 1];
    double max_position = 0.0, max_rotation = 0.0;
    memset(histogram, 0, sizeof histogram);
    for (size_t i = 0; i < n; ++i) {
        const double *pose = poses + 16 * i;
        bench_atan2_calls = bench_sqrt_calls = bench_sin_calls = bench_cos_calls = 0;
        int count = IK_INVERSE(pose, NULL, IK_CLOSED_FORM, solutions, &status);
        unsigned long calls[4] = {bench_atan2_calls, bench_sqrt_calls, bench_sin_calls, bench_cos_calls};
        for (int k = 0; k < 4; ++k) {
            if (calls[k] > 255) {
                fprintf(stderr, "harness: %lu calls on one pose do not fit the record\n", calls[k]);
                return 1;
            }
            record[RECORD * i + k] = (unsigned char)calls[k];
            totals[k] += calls[k];
            maxima[k] = calls[k] > maxima[k] ? calls[k] : maxima[k];
            minima[k] = calls[k] < minima[k] ? calls[k] : minima[k];
        }
        record[RECORD * i + 4] = (unsigned char)count;
        solution_total += (unsigned long)count;
        histogram[count] += 1;
        no_solution += count == 0;
        for (int s = 0; s < count; ++s) { /* round trip through the solver's own forward kinematics */
            double back[16];
            IK_FORWARD(solutions[s].joints, back);
            for (int e = 0; e < 12; ++e) {
                double gap = fabs(back[e] - pose[e]);
                if (e % 4 == 3) {
                    max_position = gap > max_position ? gap : max_position;
                } else {
                    max_rotation = gap > max_rotation ? gap : max_rotation;
                }
            }
        }
    }
    FILE *out = fopen(argv[2], "wb");
    if (!out || fwrite(record, RECORD, n, out) != n || fclose(out) != 0) {
        fprintf(stderr, "harness: cannot write %s\n", argv[2]);
        return 2;
    }
    const char *names[4] = {"atan2", "sqrt", "sin", "cos"};
    printf("poses=%zu\nsolutions=%lu\nno_solution=%lu\n", n, solution_total, no_solution);
    for (int k = 0; k < 4; ++k) {
        printf("%s_total=%lu\n%s_min=%lu\n%s_max=%lu\n", names[k], totals[k], names[k], minima[k], names[k],
               maxima[k]);
    }
    for (int c = 0; c <= IK_MAX; ++c) {
        printf("poses_with_%d=%lu\n", c, histogram[c]);
    }
    printf("max_position_gap=%.3e\nmax_rotation_gap=%.3e\n", max_position, max_rotation);
    return 0;
}

#else /* timing build */

static volatile double sink;

static double now_ns(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec * 1e9 + (double)t.tv_nsec;
}

static double solve_pass(const double *poses, size_t n, unsigned long *solution_total)
{
    SOLVER_RESULT solutions[IK_MAX];
    IK_STATUS status;
    unsigned long total = 0;
    double started = now_ns();
    for (size_t i = 0; i < n; ++i) {
        int count = IK_INVERSE(poses + 16 * i, NULL, IK_CLOSED_FORM, solutions, &status);
        total += (unsigned long)count;
        sink = count ? solutions[count - 1].joints[IK_DOF - 1] : 0.0;
    }
    double elapsed = now_ns() - started;
    *solution_total = total;
    return elapsed;
}

/* Arguments of the floor's calls: pose entries in a fixed order (rotation and position mixed). */
static const unsigned char first[32] = {0, 3, 5, 7, 9, 11, 1, 2, 4, 6, 8, 10, 3, 7, 11, 0,
                                         1, 2, 4, 5, 6, 8, 9, 10, 0, 3, 7, 11, 2, 6, 10, 1};
static const unsigned char second[32] = {4, 7, 1, 11, 2, 3, 8, 10, 0, 5, 6, 9, 11, 3, 7, 10,
                                          9, 6, 8, 0, 1, 4, 5, 2, 7, 11, 3, 1, 5, 9, 0, 4};

static double floor_pass(const double *poses, const unsigned char *record, size_t n)
{
    double started = now_ns();
    for (size_t i = 0; i < n; ++i) {
        const double *p = poses + 16 * i;
        const unsigned atan2_calls = record[RECORD * i], sqrt_calls = record[RECORD * i + 1];
        double acc = 0.0;
        for (unsigned k = 0; k < atan2_calls; ++k) {
            acc += atan2(p[first[k & 31]], p[second[k & 31]]);
        }
        for (unsigned k = 0; k < sqrt_calls; ++k) {
            acc += sqrt(fabs(p[first[(k + 7) & 31]]));
        }
        sink = acc;
    }
    return now_ns() - started;
}

static int compare(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    if (argc != 4 && !(argc == 5 && strcmp(argv[4], "solve-only") == 0)) {
        fprintf(stderr, "usage: %s POSES.bin COUNTS.bin REPEATS [solve-only]\n", argv[0]);
        return 2;
    }
    size_t n, size;
    const double *poses = load_poses(argv[1], &n);
    const unsigned char *record = read_file(argv[2], &size);
    int repeats = atoi(argv[3]);
    if (size != n * RECORD || repeats < 1) {
        fprintf(stderr, "harness: %s does not match %s, or REPEATS < 1\n", argv[2], argv[1]);
        return 2;
    }
    unsigned long floor_atan2 = 0, floor_sqrt = 0, solutions = 0;
    for (size_t i = 0; i < n; ++i) {
        floor_atan2 += record[RECORD * i];
        floor_sqrt += record[RECORD * i + 1];
    }
    double *solve = malloc(sizeof(double) * (size_t)repeats), *base = malloc(sizeof(double) * (size_t)repeats);
    const int with_floor = argc == 4;
    solve_pass(poses, n, &solutions); /* warm-up: pages, caches, branch predictors */
    if (with_floor) {
        floor_pass(poses, record, n);
    }
    for (int r = 0; r < repeats; ++r) { /* alternate so that a change of machine load hits both */
        solve[r] = solve_pass(poses, n, &solutions);
        base[r] = with_floor ? floor_pass(poses, record, n) : 0.0;
    }
    qsort(solve, (size_t)repeats, sizeof(double), compare);
    qsort(base, (size_t)repeats, sizeof(double), compare);
    printf("poses=%zu\nrepeats=%d\nsolutions=%lu\n", n, repeats, solutions);
    printf("solve_best_ns=%.0f\nsolve_median_ns=%.0f\n", solve[0], solve[repeats / 2]);
    printf("floor_best_ns=%.0f\nfloor_median_ns=%.0f\n", base[0], base[repeats / 2]);
    printf("floor_atan2_total=%lu\nfloor_sqrt_total=%lu\n", floor_atan2, floor_sqrt);
    return 0;
}

#endif
