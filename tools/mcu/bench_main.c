/* Measures the solver on the emulated core; run under QEMU with -icount shift=0, where the virtual
 * clock advances 1 ns per executed instruction, so SysTick (clocked from the core's clock) counts
 * instructions at its resolution. Build with -DIK_HEADER='"<prefix>.h"', -DIK_PREFIX=<prefix>,
 * -DIK_UPPER=<PREFIX> and a poses.c that defines bench_poses and bench_pose_count; -DBENCH_SCALAR=double
 * for a double build (its poses.c then holds doubles), float by default.
 *
 * Prints, one per line (bench_mcu.py reads them):
 *   loop N TICKS          a loop of exactly 2N instructions (subs, bne), to calibrate ticks
 *   empty REPEATS TICKS   REPEATS calls of an empty function with the solver's signature
 *   pose I COUNT TICKS    REPEATS full solves of pose I (LIMITS_DROP), COUNT solutions
 *   stack BYTES           deepest stack below main's stack pointer over one solve of every pose
 * SysTick registers: ARMv7-M Architecture Reference Manual, B3.3 (SYST_CSR 0xE000E010, SYST_RVR
 * 0xE000E014, SYST_CVR 0xE000E018; a 24-bit down-counter; CSR = 5: enabled, core clock). */
#include <stdint.h>

#include IK_HEADER
#include "semihost.h"

#ifndef BENCH_SCALAR
#define BENCH_SCALAR float
#endif

#define IK_CAT_(a, b) a##b
#define IK_CAT(a, b) IK_CAT_(a, b)
#define IK_NAME(suffix) IK_CAT(IK_PREFIX, suffix)
#define IK_MACRO(suffix) IK_CAT(IK_UPPER, suffix)

#define SYST_CSR (*(volatile uint32_t *)0xE000E010u)
#define SYST_RVR (*(volatile uint32_t *)0xE000E014u)
#define SYST_CVR (*(volatile uint32_t *)0xE000E018u)

#define REPEATS 8
#define PAINT_BYTES 16384u
#define PAINT 0xC5A3E17Bu

typedef IK_NAME(_solution) solution;
typedef IK_NAME(_status) status_code;
typedef IK_NAME(_limits) limits_mode;

extern const BENCH_SCALAR bench_poses[][16];
extern const int bench_pose_count;

static solution solutions[IK_MACRO(_MAX_SOLUTIONS)];

static uint32_t ticks_since(uint32_t start)
{
    return (start - SYST_CVR) & 0xFFFFFFu;
}

static void print_line(const char *what, long a, long b, long c, int values)
{
    const long numbers[3] = { a, b, c };
    semihost_write(what);
    for (int k = 0; k < values; ++k) {
        semihost_write(" ");
        semihost_write_int(numbers[k]);
    }
    semihost_write("\n");
}

__attribute__((noinline)) static void known_loop(uint32_t n)
{
    __asm__ volatile("1:\n\tsubs %0, %0, #1\n\tbne 1b" : "+r"(n) : : "cc");
}

/* The solver's signature and nothing else: the cost of the timing loop and of the call itself. */
__attribute__((noinline)) static int empty_solver(const BENCH_SCALAR pose[16], const BENCH_SCALAR *current,
                                                  limits_mode limits, solution *out, status_code *status)
{
    __asm__ volatile("" : : "r"(pose), "r"(current), "r"(limits), "r"(out), "r"(status) : "memory");
    return 0;
}

typedef int (*solver_function)(const BENCH_SCALAR pose[16], const BENCH_SCALAR *current, limits_mode limits,
                               solution *out, status_code *status);

__attribute__((noinline)) static uint32_t timed(solver_function solve, const BENCH_SCALAR *pose, int *count)
{
    status_code status;
    const uint32_t start = SYST_CVR;
    for (int r = 0; r < REPEATS; ++r) {
        *count = solve(pose, 0, IK_MACRO(_LIMITS_DROP), solutions, &status);
    }
    return ticks_since(start);
}

static void calibrate(void)
{
    for (uint32_t n = 10000u; n <= 20000u; n += 10000u) {
        const uint32_t start = SYST_CVR;
        known_loop(n);
        print_line("loop", (long)n, (long)ticks_since(start), 0, 2);
    }
    int count = 0;
    print_line("empty", REPEATS, (long)timed(empty_solver, bench_poses[0], &count), 0, 2);
}

/* Paints the stack below main's frame, solves every pose once, and finds the lowest word that
 * changed: the deepest the solver (with every function it calls) went. */
static void measure_stack(void)
{
    uintptr_t top;
    __asm__ volatile("mov %0, sp" : "=r"(top));
    volatile uint32_t *const low = (volatile uint32_t *)(top - PAINT_BYTES);
    for (volatile uint32_t *word = low; word < (volatile uint32_t *)top - 2; ++word) {
        *word = PAINT;
    }
    status_code status;
    for (int i = 0; i < bench_pose_count; ++i) {
        (void)IK_NAME(_inverse)(bench_poses[i], 0, IK_MACRO(_LIMITS_DROP), solutions, &status);
    }
    volatile uint32_t *word = low;
    while (word < (volatile uint32_t *)top && *word == PAINT) {
        ++word;
    }
    print_line(word == low ? "stack-overflowed-paint" : "stack", (long)(top - (uintptr_t)word), 0, 0, 1);
}

int main(void)
{
    SYST_RVR = 0xFFFFFFu;
    SYST_CVR = 0u;
    SYST_CSR = 5u;
    measure_stack();
    calibrate();
    for (int i = 0; i < bench_pose_count; ++i) {
        int count = 0;
        const uint32_t ticks = timed(IK_NAME(_inverse), bench_poses[i], &count);
        print_line("pose", i, count, (long)ticks, 3);
    }
    return 0;
}
