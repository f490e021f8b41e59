/* Counts the instructions of one atan2f call on the emulated core: newlib's atan2f against the
 * generated C's optional float kernel (kernel.inc: templates/c_atan2.c.j2 rendered as
 * kernel_f32_atan2, built with -DIKGEN_FAST_ATAN2). Run under QEMU with -icount shift=0 (see
 * bench_main.c: SysTick then counts instructions). Build with an args.c that defines
 * bench_args (pairs y, x) and bench_arg_count.
 *
 * Prints, one per line (benchmarks/bench_atan2.py reads them):
 *   loop N TICKS       a loop of exactly 2N instructions (subs, bne), to calibrate ticks
 *   empty N TICKS      the timing loop over N pairs without a call (the loop's own cost)
 *   atan2f N TICKS     N calls of newlib's atan2f
 *   kernel N TICKS     N calls of the kernel
 *   differ N           pairs whose two results differ by more than 2 ulps of the larger
 * SysTick registers: ARMv7-M Architecture Reference Manual, B3.3. */
#include <math.h>
#include <stdint.h>

#include "kernel.inc"
#include "semihost.h"

#define SYST_CSR (*(volatile uint32_t *)0xE000E010u)
#define SYST_RVR (*(volatile uint32_t *)0xE000E014u)
#define SYST_CVR (*(volatile uint32_t *)0xE000E018u)

extern const float bench_args[][2];
extern const int bench_arg_count;

static volatile float sink;

static uint32_t ticks_since(uint32_t start)
{
    return (start - SYST_CVR) & 0xFFFFFFu;
}

static void print_line(const char *what, long a, long b)
{
    semihost_write(what);
    semihost_write(" ");
    semihost_write_int(a);
    semihost_write(" ");
    semihost_write_int(b);
    semihost_write("\n");
}

__attribute__((noinline)) static void known_loop(uint32_t n)
{
    __asm__ volatile("1:\n\tsubs %0, %0, #1\n\tbne 1b" : "+r"(n) : : "cc");
}

/* the same loop around each function; an opaque identity stands in for the call in "empty" */
__attribute__((noinline)) static float identity(float y, float x)
{
    __asm__ volatile("" : "+t"(y) : "t"(x));
    return y;
}

#define TIMED_LOOP(name, call)                                                   \
    __attribute__((noinline)) static uint32_t name(void)                        \
    {                                                                            \
        float acc = 0.0f;                                                        \
        const uint32_t start = SYST_CVR;                                         \
        for (int i = 0; i < bench_arg_count; ++i) {                              \
            acc += call(bench_args[i][0], bench_args[i][1]);                     \
        }                                                                        \
        const uint32_t ticks = ticks_since(start);                               \
        sink = acc;                                                              \
        return ticks;                                                            \
    }

TIMED_LOOP(time_empty, identity)
TIMED_LOOP(time_library, atan2f)
TIMED_LOOP(time_kernel, kernel_f32_atan2)

int main(void)
{
    SYST_RVR = 0xFFFFFFu;
    SYST_CVR = 0u;
    SYST_CSR = 5u;
    for (uint32_t n = 10000u; n <= 20000u; n += 10000u) {
        const uint32_t start = SYST_CVR;
        known_loop(n);
        print_line("loop", (long)n, (long)ticks_since(start));
    }
    print_line("empty", bench_arg_count, (long)time_empty());
    print_line("atan2f", bench_arg_count, (long)time_library());
    print_line("kernel", bench_arg_count, (long)time_kernel());
    long differ = 0;
    for (int i = 0; i < bench_arg_count; ++i) {
        const float a = atan2f(bench_args[i][0], bench_args[i][1]);
        const float b = kernel_f32_atan2(bench_args[i][0], bench_args[i][1]);
        const float scale = fabsf(a) > fabsf(b) ? fabsf(a) : fabsf(b);
        differ += fabsf(a - b) > 2.0f * 1.1920929e-07f * scale;
    }
    semihost_write("differ ");
    semihost_write_int(differ);
    semihost_write("\n");
    return 0;
}
