/*
 * C demo firmware: replays a framed binary field log on target through
 * libheadroom_c and writes one decision frame per record, exactly as the
 * Rust firmware's `replay` does, so that `cargo xtask c-demo` can compare
 * every decision with `headroom replay` bit for bit.
 *
 * Under QEMU: -append "LOG.hrlog DECISIONS.hrlog [RATES.spec]" (paths
 * relative to QEMU's working directory; with a spec, the replay chooses the
 * rate with the power, with the spec's rate table and energy profile: see
 * replay_spec_parse). Prints a one-line summary and exits 0, or prints why
 * it failed and exits 1.
 */
#include <stddef.h>
#include <stdint.h>

#include "headroom.h"
#include "replay_log.h"
#include "semihost.h"

/* Everything the replay keeps, in static memory (no heap). */
static replay_job job;
static char cmdline[256];
static headroom_rate rates[HEADROOM_MAX_RATES];
static headroom_energy_profile profile;

static size_t host_read(void *ctx, uint8_t *buf, size_t cap) {
    return sh_read(*(int *)ctx, buf, cap);
}

static int host_write(void *ctx, const uint8_t *data, size_t len) {
    return sh_write(*(int *)ctx, data, len);
}

/* Split `line` into its words in place (NUL-terminated); the words after
 * the program name go to `words` (at most `max`); their count. */
static int split(char *line, char **words, int max) {
    char *p = line;
    int n = -1;
    while (*p != '\0') {
        while (*p == ' ') {
            *p++ = '\0';
        }
        if (*p == '\0') {
            break;
        }
        if (n >= 0 && n < max) {
            words[n] = p;
        }
        n++;
        while (*p != '\0' && *p != ' ') {
            p++;
        }
    }
    return n < 0 ? 0 : n;
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

/* Read the spec at `path` and give its rates and profile to the job. The
 * text goes to the job's output buffer, unused until the replay starts
 * (the microbit's 16 KiB of RAM leave no room for a buffer of its own). */
static void load_spec(const char *path) {
    uint8_t *text = job.out;
    size_t n = 0, got, count = 0;
    int h = sh_open(path, 0);
    if (h < 0) {
        fail("cannot open", path);
    }
    while ((got = sh_read(h, text + n, sizeof job.out - n)) != 0) {
        if (got == (size_t)-1) {
            fail("cannot read", path);
        }
        n += got;
        if (n == sizeof job.out) {
            fail("spec too long", path);
        }
    }
    sh_close(h);
    if (replay_spec_parse((const char *)text, n, rates, &count, &profile) != 0) {
        fail("malformed spec", path);
    }
    job.rates = rates;
    job.rate_count = count;
    job.energy = &profile;
}

int main(void) {
    char *words[3];
    char *in_path, *out_path;
    int in, out, n;
    replay_report rep;
    headroom_summary sum;

    if (sh_cmdline(cmdline, sizeof cmdline) != 0) {
        fail("no command line", NULL);
    }
    n = split(cmdline, words, 3);
    if (n < 2 || n > 3) {
        fail("usage: c-replay LOG.hrlog DECISIONS.hrlog [RATES.spec]", NULL);
    }
    in_path = words[0];
    out_path = words[1];
    if (n == 3) {
        load_spec(words[2]);
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
