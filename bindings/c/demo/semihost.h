/* Host services through semihosting (`bkpt 0xab`): files, the command
 * line, text output and the exit status. QEMU provides them with
 * `-semihosting-config enable=on,target=native`; paths are relative to
 * QEMU's working directory. */
#ifndef SEMIHOST_H
#define SEMIHOST_H

#include <stddef.h>
#include <stdint.h>

/* A host file handle, or -1. */
int sh_open(const char *path, int write);
int sh_close(int handle);
/* Bytes read (0 at the end of the file), or (size_t)-1 on an error. */
size_t sh_read(int handle, uint8_t *buf, size_t len);
/* 0 when all bytes were written. */
int sh_write(int handle, const uint8_t *data, size_t len);
/* The command line ("ELF ARGS...") into buf, NUL-terminated; 0 on success. */
int sh_cmdline(char *buf, size_t len);
/* Text to the host's standard output. */
void sh_print(const char *text);
/* Text of an unsigned number. */
void sh_print_u64(uint64_t x);
/* End the program: QEMU exits with status 0 (ok != 0) or 1. */
void sh_exit(int ok) __attribute__((noreturn));

#endif
