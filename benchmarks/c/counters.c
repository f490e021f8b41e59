/*
 * Counting stand-ins for the maths-library calls of a generated solver (benchmark only).
 *
 * The counting build compiles the solver with `-include count_math.h`, which renames atan2, sqrt,
 * sin and cos to count_atan2, count_sqrt, count_sin and count_cos, so every call the solver makes
 * lands here, is counted and then forwarded to the real function. This file is compiled without it.
 */
#include <math.h>

unsigned long bench_atan2_calls, bench_sqrt_calls, bench_sin_calls, bench_cos_calls;

double count_atan2(double y, double x)
{
    ++bench_atan2_calls;
    return atan2(y, x);
}

double count_sqrt(double x)
{
    ++bench_sqrt_calls;
    return sqrt(x);
}

double count_sin(double x)
{
    ++bench_sin_calls;
    return sin(x);
}

double count_cos(double x)
{
    ++bench_cos_calls;
    return cos(x);
}
