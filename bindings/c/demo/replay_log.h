/*
 * Replay of a framed binary field log through libheadroom_c, from any byte
 * source to any byte sink: the one replay loop of the C demo firmware
 * (bytes through semihosting) and of the host C test (bytes through stdio).
 *
 * The settings are those `headroom replay LOG` uses without flags: the log
 * header's over the engine's defaults (the replay starts at the first
 * header frame, or without a header at a record that comes first). One
 * decision frame is written per record, after a header frame, so the
 * output reads with the engine's decoder as the Rust firmware's does.
 */
#ifndef REPLAY_LOG_H
#define REPLAY_LOG_H

#include <stddef.h>
#include <stdint.h>

#include "headroom.h"

/* Read up to `cap` bytes into `buf`: the count, 0 at the end, or
 * (size_t)-1 on a read error. */
typedef size_t (*replay_read_fn)(void *ctx, uint8_t *buf, size_t cap);
/* Write `len` bytes: 0 when all were written. */
typedef int (*replay_write_fn)(void *ctx, const uint8_t *data, size_t len);

/* Bytes gathered before one write to the sink. */
#define REPLAY_OUT_BUFFER 512
/* Bytes read from the source at a time. */
#define REPLAY_IN_CHUNK 256

/* Everything the loop keeps: caller-allocated (static on a device). The
 * caller may set `rates` (`rate_count` of them) and `energy` before
 * replay_log: the replay then chooses the rate with the power, costed by
 * the profile (`headroom replay --energy PROFILE LOG` with that rate
 * table); left zero, the power only. */
typedef struct {
    const headroom_rate *rates;
    size_t rate_count;
    const headroom_energy_profile *energy;
    headroom_settings settings;
    headroom_replay replay;
    headroom_decoder decoder;
    headroom_encoder encoder;
    uint8_t frame[HEADROOM_MAX_FRAME];
    uint8_t in[REPLAY_IN_CHUNK];
    uint8_t out[REPLAY_OUT_BUFFER];
    size_t out_len;
    int started;
} replay_job;

/* What happened. */
typedef struct {
    uint64_t bytes_in;
    uint64_t bytes_out;
    uint64_t damaged;      /* damaged regions skipped */
    uint64_t other_frames; /* later headers, decision frames, unknown kinds */
    int started;           /* a replay was set up (the log had a header or a record) */
    headroom_status status;  /* HEADROOM_OK, or the library's refusal */
    int io_error;          /* non-zero: the source or the sink failed */
} replay_report;

/* Replay the log read from `read` into decision frames written to `write`.
 * Returns 0 on success; on failure `report` says why. The totals are then
 * in `job->replay` (headroom_replay_summary). */
int replay_log(replay_job *job, replay_read_fn read, void *read_ctx, replay_write_fn write,
               void *write_ctx, replay_report *report);

/* A rate table and an energy profile from the text of a spec (the one
 * format the host C test and the demo read, written by their Rust drivers
 * from the engine's demo node): words separated by white space, one
 * "rate NAME SNR AIRTIME_US BANDWIDTH HAS_BANDWIDTH" per rate, then
 * "profile N P0 I0 ... P(N-1) I(N-1) SUPPLY_V AIRTIME_MS RX_WINDOW_MS
 * RX_CURRENT_MA PER_PACKET_UC SLEEP_UA"; floats as the 8 hex digits of
 * their IEEE-754 bits, counts in decimal. Returns 0 and fills `rates`
 * (`*count` of at most HEADROOM_MAX_RATES) and `profile`, or -1 on any
 * malformed or missing word. No library call: it runs on the device. */
int replay_spec_parse(const char *text, size_t len, headroom_rate *rates, size_t *count,
                      headroom_energy_profile *profile);

#endif
