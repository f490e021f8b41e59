/* Runs one generated self-test. Build with -DIK_PREFIX=<prefix> (for example benchtop6_ik_f32)
 * together with <prefix>.c and <prefix>_selftest.c; prints the failure count, exits 1 on failures. */
#include <stdio.h>

#define IK_CAT_(a, b) a##b
#define IK_CAT(a, b) IK_CAT_(a, b)

int IK_CAT(IK_PREFIX, _selftest)(void);

int main(void)
{
    const int failures = IK_CAT(IK_PREFIX, _selftest)();
    printf("selftest failures: %d\n", failures);
    return failures != 0;
}
