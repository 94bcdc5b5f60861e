/* Semihosting calls (see semihost.h). Operation numbers and the exit
 * reason codes are those of the Arm semihosting specification. */
#include "semihost.h"

#define SYS_OPEN 0x01
#define SYS_CLOSE 0x02
#define SYS_WRITE0 0x04
#define SYS_WRITE 0x05
#define SYS_READ 0x06
#define SYS_GET_CMDLINE 0x15
#define SYS_EXIT 0x18
#define ADP_STOPPED_APPLICATION_EXIT 0x20026
#define ADP_STOPPED_RUN_TIME_ERROR 0x20023
/* fopen modes of SYS_OPEN: "rb" and "wb". */
#define MODE_RB 1
#define MODE_WB 5

static int call(int op, void *arg) {
    register int r0 __asm__("r0") = op;
    register void *r1 __asm__("r1") = arg;
    __asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
    return r0;
}

static size_t length(const char *s) {
    size_t n = 0;
    while (s[n] != '\0') {
        n++;
    }
    return n;
}

int sh_open(const char *path, int write) {
    uintptr_t block[3];
    block[0] = (uintptr_t)path;
    block[1] = write ? MODE_WB : MODE_RB;
    block[2] = length(path);
    return call(SYS_OPEN, block);
}

int sh_close(int handle) {
    uintptr_t block[1];
    block[0] = (uintptr_t)handle;
    return call(SYS_CLOSE, block);
}

size_t sh_read(int handle, uint8_t *buf, size_t len) {
    uintptr_t block[3];
    int not_read;
    if (len == 0) {
        return 0;
    }
    block[0] = (uintptr_t)handle;
    block[1] = (uintptr_t)buf;
    block[2] = len;
    not_read = call(SYS_READ, block);
    if (not_read < 0 || (size_t)not_read > len) {
        return (size_t)-1;
    }
    return len - (size_t)not_read;
}

int sh_write(int handle, const uint8_t *data, size_t len) {
    uintptr_t block[3];
    if (len == 0) {
        return 0;
    }
    block[0] = (uintptr_t)handle;
    block[1] = (uintptr_t)data;
    block[2] = len;
    return call(SYS_WRITE, block) == 0 ? 0 : -1;
}

int sh_cmdline(char *buf, size_t len) {
    uintptr_t block[2];
    if (len < 2) {
        return -1;
    }
    block[0] = (uintptr_t)buf;
    block[1] = len - 1;
    if (call(SYS_GET_CMDLINE, block) != 0 || block[1] > len - 1) {
        return -1;
    }
    buf[block[1]] = '\0';
    return 0;
}

void sh_print(const char *text) {
    call(SYS_WRITE0, (void *)text);
}

void sh_print_u64(uint64_t x) {
    char digits[21];
    int i = 20;
    digits[i] = '\0';
    do {
        digits[--i] = (char)('0' + (int)(x % 10u));
        x /= 10u;
    } while (x != 0u && i > 0);
    sh_print(&digits[i]);
}

void sh_exit(int ok) {
    call(SYS_EXIT, (void *)(uintptr_t)(ok ? ADP_STOPPED_APPLICATION_EXIT : ADP_STOPPED_RUN_TIME_ERROR));
    for (;;) {
        __asm__ volatile("wfi");
    }
}
