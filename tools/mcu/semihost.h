/* Semihosting for the emulated board: text out and the exit status, through the debug host
 * (QEMU with -semihosting-config enable=on,target=native). The calls follow Arm's published
 * semihosting interface (document "Semihosting for AArch32 and AArch64", operations SYS_WRITE0
 * 0x04 and SYS_EXIT_EXTENDED 0x20; on M-profile cores the trap is BKPT 0xAB). */
#ifndef IKGEN_MCU_SEMIHOST_H
#define IKGEN_MCU_SEMIHOST_H

#include <stdint.h>

/* Writes a NUL-terminated string to the host's standard output. */
void semihost_write(const char *text);

/* Writes a signed decimal integer. */
void semihost_write_int(long value);

/* Ends the emulation with `status` (0..255) as the host process's exit status. */
void semihost_exit(int status) __attribute__((noreturn));

#endif
