/* Runs one generated self-test on the target. Build with -DIK_PREFIX=<prefix> (for example
 * benchtop6_ik_f32) together with <prefix>.c and <prefix>_selftest.c; prints
 * "selftest failures: N" and returns 0 only when N is 0 (the start-up code makes that the exit
 * status of the emulator). */
#include "semihost.h"

#define IK_CAT_(a, b) a##b
#define IK_CAT(a, b) IK_CAT_(a, b)

int IK_CAT(IK_PREFIX, _selftest)(void);

int main(void)
{
    const int failures = IK_CAT(IK_PREFIX, _selftest)();
    semihost_write("selftest failures: ");
    semihost_write_int(failures);
    semihost_write("\n");
    return failures != 0;
}
