/*
 * Forced into a diagnostic build of a generated solver with `-include stub_atan2.h`: every atan2
 * becomes a cheap inline stand-in, so timing that build shows what the solver costs apart from
 * its atan2 calls (algebra, divisions, branches, stores). In the generated solvers an atan2
 * result only feeds the joint readings written out, never a branch, so the control flow and
 * the number of solutions stay those of the real build (the harness checks the count).
 */
#ifndef BENCH_STUB_ATAN2_H
#define BENCH_STUB_ATAN2_H

#include <math.h>

static inline double bench_atan2_stub(double y, double x)
{
    return y + 0.5 * x;
}

#define atan2 bench_atan2_stub

#endif
