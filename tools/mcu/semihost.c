/* Semihosting calls (see semihost.h): r0 holds the operation, r1 its argument, BKPT 0xAB traps
 * to the debug host. No C library stdio is used, so the firmware links without any syscalls. */
#include "semihost.h"

#define SYS_WRITE0 0x04u
#define SYS_EXIT_EXTENDED 0x20u
#define ADP_STOPPED_APPLICATION_EXIT 0x20026u

static uint32_t semihost_call(uint32_t operation, const void *argument)
{
    register uint32_t r0 __asm__("r0") = operation;
    register const void *r1 __asm__("r1") = argument;
    __asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
    return r0;
}

void semihost_write(const char *text)
{
    (void)semihost_call(SYS_WRITE0, text);
}

void semihost_write_int(long value)
{
    char digits[24];
    char *at = digits + sizeof digits;
    unsigned long magnitude = value < 0 ? 0ul - (unsigned long)value : (unsigned long)value;
    *--at = '\0';
    do {
        *--at = (char)('0' + magnitude % 10u);
        magnitude /= 10u;
    } while (magnitude != 0u);
    if (value < 0) {
        *--at = '-';
    }
    semihost_write(at);
}

void semihost_exit(int status)
{
    /* SYS_EXIT_EXTENDED takes a pointer to {reason, subcode}; the subcode becomes the exit status. */
    const uint32_t block[2] = { ADP_STOPPED_APPLICATION_EXIT, (uint32_t)status };
    (void)semihost_call(SYS_EXIT_EXTENDED, block);
    for (;;) {
        /* not reached under a debug host that honours the call */
    }
}
