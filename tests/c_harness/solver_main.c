/* Exercises a generated solver in both precisions (self-tests, NULL and non-NULL `current`, NaN,
 * infinity and unreachable poses, inverse_rp, each limits mode, distance, sort_nearest, nearest). Build with the double and float solver sources and
 * self-tests, and with these macros (tests/test_c_backend.py passes them):
 *   IK_HEADER_D, IK_HEADER_F     the two headers, as "name.h"
 *   IK_PREFIX_D, IK_PREFIX_F     the two name prefixes (benchtop6_ik, benchtop6_ik_f32)
 *   IK_UPPER_D, IK_UPPER_F       the same in capitals
 *   IK_SAMPLE_D, IK_SAMPLE_F     readings of a regular pose ({...} in the arm's units)
 *   IK_SINGULAR_D, IK_SINGULAR_F readings of a wrist-singular pose
 *   IK_MANY_D, IK_MANY_F         readings with every joint that spans a turn at its lower limit
 *   IK_LENGTH_SCALE              the arm's length scale (reach), in its length unit
 * Prints "failures: N" last and exits 1 when N > 0. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include IK_HEADER_D
#include IK_HEADER_F

#define IK_CAT_(a, b) a##b
#define IK_CAT(a, b) IK_CAT_(a, b)

#define REAL double
#define FN(x) IK_CAT(IK_PREFIX_D, x)
#define UP(x) IK_CAT(IK_UPPER_D, x)
#define ABS fabs
#define CHECK(x) IK_CAT(check_double_, x)
#define SAMPLE IK_SAMPLE_D
#define SINGULAR IK_SINGULAR_D
#define MANY IK_MANY_D
#define POS_TOL ((REAL)(1e-9 * IK_LENGTH_SCALE))
#define ROT_TOL ((REAL)1e-9)
#define SINGULAR_FLAGGED 1
#include "solver_checks.inc"
#undef REAL
#undef FN
#undef UP
#undef ABS
#undef CHECK
#undef SAMPLE
#undef SINGULAR
#undef MANY
#undef POS_TOL
#undef ROT_TOL
#undef SINGULAR_FLAGGED

/* float: the self-test's own tolerances (1e-4 of the length scale, 1e-4 per rotation entry) */
#define REAL float
#define FN(x) IK_CAT(IK_PREFIX_F, x)
#define UP(x) IK_CAT(IK_UPPER_F, x)
#define ABS fabsf
#define CHECK(x) IK_CAT(check_float_, x)
#define SAMPLE IK_SAMPLE_F
#define SINGULAR IK_SINGULAR_F
#define MANY IK_MANY_F
#define POS_TOL ((REAL)(1e-4 * IK_LENGTH_SCALE))
#define ROT_TOL ((REAL)1e-4)
#define SINGULAR_FLAGGED 0
#include "solver_checks.inc"

int main(void)
{
    const int failures = check_double_all("double") + check_float_all("float");
    printf("failures: %d\n", failures);
    return failures != 0;
}
