/* Minimal start-up for a Cortex-M4F board (QEMU's mps2-an386): the vector table, a reset handler
 * that enables the FPU, copies .data, clears .bss, runs main() and reports its return value as the
 * exit status through semihosting, and fault handlers that say which fault struck and exit with
 * status 120 + the exception number (so a fault can never look like a pass).
 * The register addresses are the architecture's (ARMv7-M Architecture Reference Manual, B3.2:
 * CPACR at 0xE000ED88, CP10/CP11 full access in bits 20-23). */
#include <stdint.h>

#include "semihost.h"

extern uint32_t __data_load__, __data_start__, __data_end__, __bss_start__, __bss_end__, __stack_top__;

int main(void);
void reset_handler(void);

#define CPACR (*(volatile uint32_t *)0xE000ED88u)

void reset_handler(void)
{
    /* The FPU must be on before the first floating-point instruction: -mfloat-abi=hard code may
     * use s-registers anywhere after this point. */
    CPACR |= 0xFu << 20;
    __asm__ volatile("dsb\n\tisb" ::: "memory");
    for (uint32_t *from = &__data_load__, *to = &__data_start__; to < &__data_end__;) {
        *to++ = *from++;
    }
    for (uint32_t *to = &__bss_start__; to < &__bss_end__;) {
        *to++ = 0u;
    }
    const int status = main();
    semihost_exit(status);
}

static void fault(const char *what, int number)
{
    semihost_write("fault: ");
    semihost_write(what);
    semihost_write("\n");
    semihost_exit(120 + number);
}

static void nmi_handler(void) { fault("NMI", 2); }
static void hard_fault_handler(void) { fault("HardFault", 3); }
static void mem_manage_handler(void) { fault("MemManage", 4); }
static void bus_fault_handler(void) { fault("BusFault", 5); }
static void usage_fault_handler(void) { fault("UsageFault", 6); }
static void other_handler(void) { fault("unexpected exception", 0); }

/* Initial stack pointer, then the handlers of exceptions 1..15 (ARMv7-M ARM, B1.5.3). */
__attribute__((section(".vectors"), used))
static void (*const vector_table[16])(void) = {
    (void (*)(void))&__stack_top__,
    reset_handler,
    nmi_handler,
    hard_fault_handler,
    mem_manage_handler,
    bus_fault_handler,
    usage_fault_handler,
    other_handler, other_handler, other_handler, other_handler,   /* reserved */
    other_handler,                                                /* SVCall */
    other_handler, other_handler,                                 /* debug monitor, reserved */
    other_handler,                                                /* PendSV */
    other_handler,                                                /* SysTick */
};
