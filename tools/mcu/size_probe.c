/* Flash a solver adds to a firmware, maths library included: bench_mcu.py links this main with
 * -DIK_CALL=1 (it calls the solver's inverse) and with -DIK_CALL=0 (it does not), under
 * --gc-sections, and takes the difference. Build with -DIK_HEADER, -DIK_PREFIX, -DIK_UPPER as for
 * bench_main.c. */
#include IK_HEADER

#define IK_CAT_(a, b) a##b
#define IK_CAT(a, b) IK_CAT_(a, b)

int main(void);

/* The caller's pose and solution buffer exist in both builds, so the difference is the solver's. */
static volatile float pose[16];
static IK_CAT(IK_PREFIX, _solution) solutions[IK_CAT(IK_UPPER, _MAX_SOLUTIONS)];

int main(void)
{
#if IK_CALL
    return IK_CAT(IK_PREFIX, _inverse)((const float *)pose, 0, IK_CAT(IK_UPPER, _LIMITS_DROP), solutions, 0);
#else
    __asm__ volatile("" : : "r"(pose), "r"(solutions) : "memory");   /* both buffers kept */
    return 0;
#endif
}
