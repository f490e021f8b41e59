/*
 * Forced into the counting build of a generated solver with `-include count_math.h`.
 *
 * <math.h> is read first, under the real names (glibc's declarations paste the function names
 * into other macros, so renaming them on the command line with -D breaks the header); its
 * include guard then makes the solver's own #include <math.h> a no-op, and from here on every
 * atan2, sqrt, sin and cos in the solver calls the counting stand-ins in counters.c.
 */
#ifndef BENCH_COUNT_MATH_H
#define BENCH_COUNT_MATH_H

#include <math.h>

double count_atan2(double y, double x);
double count_sqrt(double x);
double count_sin(double x);
double count_cos(double x);

#define atan2 count_atan2
#define sqrt count_sqrt
#define sin count_sin
#define cos count_cos

#endif
