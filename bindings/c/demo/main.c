/*
 * C demo firmware: replays a framed binary field log on target through
 * libheadroom_c and writes one decision frame per record, exactly as the
 * Rust firmware's `replay` does, so that `cargo xtask c-demo` can compare
 * every decision with `headroom replay` bit for bit.
 *
 * Under QEMU: -append "LOG.hrlog DECISIONS.hrlog" (paths relative to
 * QEMU's working directory). Prints a one-line summary and exits 0, or
 * prints why it failed and exits 1.
 */
#include <stddef.h>
#include <stdint.h>

#include "headroom.h"
#include "replay_log.h"
#include "semihost.h"

/* Everything the replay keeps, in static memory (no heap). */
static replay_job job;
static char cmdline[256];

static size_t host_read(void *ctx, uint8_t *buf, size_t cap) {
    return sh_read(*(int *)ctx, buf, cap);
}

static int host_write(void *ctx, const uint8_t *data, size_t len) {
    return sh_write(*(int *)ctx, data, len);
}

/* The i-th word after the program name, NUL-terminated in place. */
static char *arg(char *line, int i) {
    char *p = line;
    int word = -1;
    while (*p != '\0') {
        while (*p == ' ') {
            *p++ = '\0';
        }
        if (*p == '\0') {
            break;
        }
        if (word++ == i) {
            char *start = p;
            while (*p != '\0' && *p != ' ') {
                p++;
            }
            *p = '\0';
            return start;
        }
        while (*p != '\0' && *p != ' ') {
            p++;
        }
    }
    return NULL;
}

static void fail(const char *why, const char *detail) {
    sh_print("c-replay: ");
    sh_print(why);
    if (detail != NULL) {
        sh_print(": ");
        sh_print(detail);
    }
    sh_print("\n");
    sh_exit(0);
}

int main(void) {
    char copy[sizeof cmdline];
    char *in_path, *out_path;
    int in, out;
    size_t i;
    replay_report rep;
    headroom_summary sum;

    if (sh_cmdline(cmdline, sizeof cmdline) != 0) {
        fail("no command line", NULL);
    }
    for (i = 0; i < sizeof copy; i++) {
        copy[i] = cmdline[i];
    }
    in_path = arg(cmdline, 0);
    out_path = arg(copy, 1);
    if (in_path == NULL || out_path == NULL) {
        fail("usage: c-replay LOG.hrlog DECISIONS.hrlog", NULL);
    }
    in = sh_open(in_path, 0);
    if (in < 0) {
        fail("cannot open", in_path);
    }
    out = sh_open(out_path, 1);
    if (out < 0) {
        fail("cannot create", out_path);
    }
    if (replay_log(&job, host_read, &in, host_write, &out, &rep) != 0) {
        sh_close(out);
        if (rep.io_error) {
            fail("host read or write failed", NULL);
        }
        fail("refused", headroom_status_message((int)rep.status));
    }
    sh_close(in);
    if (sh_close(out) != 0) {
        fail("cannot close", out_path);
    }
    sh_print("c-replay: ");
    sh_print_u64(rep.bytes_in);
    sh_print(" bytes in, ");
    if (rep.started && headroom_replay_summary(&job.replay, &sum) == HEADROOM_OK) {
        sh_print_u64(sum.records);
        sh_print(" records, ");
        sh_print_u64(sum.lost);
        sh_print(" lost of ");
        sh_print_u64(sum.judged);
        sh_print(" judged, ");
        sh_print_u64(sum.unjudged);
        sh_print(" unjudged, ");
    } else {
        sh_print("no record, ");
    }
    sh_print_u64(rep.damaged);
    sh_print(" damaged, ");
    sh_print_u64(rep.other_frames);
    sh_print(" other frames, ");
    sh_print_u64(rep.bytes_out);
    sh_print(" bytes out\n");
    sh_exit(1);
}
