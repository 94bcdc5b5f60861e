/* The replay loop shared by the C demo firmware and the host C test (see replay_log.h). */
#include "replay_log.h"

static int flush(replay_job *job, replay_write_fn write, void *ctx, replay_report *rep) {
    if (job->out_len == 0) {
        return 0;
    }
    if (write(ctx, job->out, job->out_len) != 0) {
        rep->io_error = 1;
        return -1;
    }
    job->out_len = 0;
    return 0;
}

static int push(replay_job *job, size_t n, replay_write_fn write, void *ctx, replay_report *rep) {
    size_t i;
    if (job->out_len + n > sizeof job->out && flush(job, write, ctx, rep) != 0) {
        return -1;
    }
    for (i = 0; i < n; i++) {
        job->out[job->out_len + i] = job->frame[i];
    }
    job->out_len += n;
    rep->bytes_out += n;
    return 0;
}

/* Start the replay over `header` (NULL: none), with the job's energy
 * profile when it has one. */
static headroom_status start(replay_job *job, const headroom_log_header *header) {
    if (job->energy != NULL) {
        return headroom_replay_init_energy(&job->replay, &job->settings, header, job->energy);
    }
    return headroom_replay_init(&job->replay, &job->settings, header);
}

/* One event of the decoder: start, step, write. */
static int handle(replay_job *job, const headroom_event *ev, replay_write_fn write, void *ctx,
                  replay_report *rep) {
    headroom_replayed_record step;
    headroom_decision_record d;
    size_t n = 0;
    headroom_status st;

    switch (ev->kind) {
    case HEADROOM_EVENT_HEADER:
        if (job->started) {
            rep->other_frames++;
            return 0;
        }
        st = start(job, &ev->header);
        break;
    case HEADROOM_EVENT_RECORD:
        st = HEADROOM_OK;
        if (!job->started) {
            st = start(job, NULL);
        }
        break;
    case HEADROOM_EVENT_DAMAGED:
        rep->damaged++;
        return 0;
    default:
        rep->other_frames++;
        return 0;
    }
    if (st != HEADROOM_OK) {
        rep->status = st;
        return -1;
    }
    job->started = 1;
    rep->started = 1;
    if (ev->kind != HEADROOM_EVENT_RECORD) {
        return 0;
    }
    st = headroom_replay_step(&job->replay, &ev->record, &step);
    if (st == HEADROOM_OK) {
        d.t_ms = step.t_ms;
        d.tx_dbm = step.chosen_dbm;
        d.outcome = step.outcome;
        d.reason = step.reason;
        d.rate = step.rate;
        d.has_rate = step.has_rate;
        st = headroom_encode_decision(&job->encoder, &d, job->frame, sizeof job->frame, &n);
    }
    if (st != HEADROOM_OK) {
        rep->status = st;
        return -1;
    }
    return push(job, n, write, ctx, rep);
}

int replay_log(replay_job *job, replay_read_fn read, void *read_ctx, replay_write_fn write,
               void *write_ctx, replay_report *rep) {
    headroom_log_header none = {0};
    headroom_event ev;
    size_t n = 0;
    headroom_status st;

    rep->bytes_in = rep->bytes_out = rep->damaged = rep->other_frames = 0;
    rep->started = 0;
    rep->io_error = 0;
    job->out_len = 0;
    job->started = 0;
    st = headroom_settings_init(&job->settings);
    if (st == HEADROOM_OK && job->rate_count > 0) {
        st = headroom_settings_set_rates(&job->settings, job->rates, job->rate_count);
    }
    if (st == HEADROOM_OK) {
        st = headroom_decoder_init(&job->decoder);
    }
    if (st == HEADROOM_OK) {
        st = headroom_encoder_init(&job->encoder);
    }
    if (st == HEADROOM_OK) {
        st = headroom_encode_header(&job->encoder, &none, job->frame, sizeof job->frame, &n);
    }
    rep->status = st;
    if (st != HEADROOM_OK || push(job, n, write, write_ctx, rep) != 0) {
        return -1;
    }
    for (;;) {
        const uint8_t *p = job->in;
        size_t left = read(read_ctx, job->in, sizeof job->in);
        int more;
        if (left == (size_t)-1) {
            rep->io_error = 1;
            return -1;
        }
        if (left == 0) {
            break;
        }
        rep->bytes_in += left;
        while ((more = headroom_decoder_feed(&job->decoder, &p, &left, &ev)) == 1) {
            if (handle(job, &ev, write, write_ctx, rep) != 0) {
                return -1;
            }
        }
        if (more < 0) {
            rep->status = HEADROOM_ERR_NOT_INITIALISED;
            return -1;
        }
    }
    if (headroom_decoder_finish(&job->decoder, &ev) == 1 &&
        handle(job, &ev, write, write_ctx, rep) != 0) {
        return -1;
    }
    return flush(job, write, write_ctx, rep);
}

/* The next word of the spec at *pos: its start and length (0 at the end). */
static size_t next_word(const char *text, size_t len, size_t *pos, const char **word) {
    size_t start, i = *pos;
    while (i < len && (text[i] == ' ' || text[i] == '\n' || text[i] == '\r' || text[i] == '\t')) {
        i++;
    }
    start = i;
    while (i < len && text[i] != ' ' && text[i] != '\n' && text[i] != '\r' && text[i] != '\t') {
        i++;
    }
    *pos = i;
    *word = text + start;
    return i - start;
}

static int same(const char *word, size_t n, const char *lit) {
    size_t i = 0;
    while (i < n && lit[i] != '\0' && word[i] == lit[i]) {
        i++;
    }
    return i == n && lit[i] == '\0';
}

/* A decimal count, or -1. */
static long decimal(const char *text, size_t len, size_t *pos) {
    const char *w;
    size_t n = next_word(text, len, pos, &w), i;
    long v = 0;
    if (n == 0 || n > 9) {
        return -1;
    }
    for (i = 0; i < n; i++) {
        if (w[i] < '0' || w[i] > '9') {
            return -1;
        }
        v = v * 10 + (w[i] - '0');
    }
    return v;
}

/* A float from the 8 hex digits of its bits; 0 on success. */
static int bits_float(const char *text, size_t len, size_t *pos, float *out) {
    const char *w;
    size_t n = next_word(text, len, pos, &w), i;
    union {
        uint32_t u;
        float f;
    } v;
    v.u = 0;
    if (n != 8) {
        return -1;
    }
    for (i = 0; i < n; i++) {
        char c = w[i];
        uint32_t d;
        if (c >= '0' && c <= '9') {
            d = (uint32_t)(c - '0');
        } else if (c >= 'a' && c <= 'f') {
            d = (uint32_t)(c - 'a' + 10);
        } else if (c >= 'A' && c <= 'F') {
            d = (uint32_t)(c - 'A' + 10);
        } else {
            return -1;
        }
        v.u = (v.u << 4) | d;
    }
    *out = v.f;
    return 0;
}

int replay_spec_parse(const char *text, size_t len, headroom_rate *rates, size_t *count,
                      headroom_energy_profile *profile) {
    size_t pos = 0, n, i;
    const char *w;
    headroom_energy_profile none = {0};
    int have_profile = 0;
    *count = 0;
    *profile = none;
    while ((n = next_word(text, len, &pos, &w)) != 0) {
        if (same(w, n, "rate")) {
            headroom_rate *r;
            long air, has;
            if (*count >= HEADROOM_MAX_RATES) {
                return -1;
            }
            r = &rates[*count];
            for (i = 0; i < sizeof r->name; i++) {
                r->name[i] = '\0';
            }
            n = next_word(text, len, &pos, &w);
            if (n == 0 || n > HEADROOM_RATE_NAME_LEN) {
                return -1;
            }
            for (i = 0; i < n; i++) {
                r->name[i] = w[i];
            }
            if (bits_float(text, len, &pos, &r->required_snr_db) != 0) {
                return -1;
            }
            air = decimal(text, len, &pos);
            if (air < 0 || bits_float(text, len, &pos, &r->noise_bandwidth_hz) != 0) {
                return -1;
            }
            has = decimal(text, len, &pos);
            if (has < 0 || has > 1) {
                return -1;
            }
            r->airtime_us = (uint32_t)air;
            r->has_noise_bandwidth = (uint8_t)has;
            (*count)++;
        } else if (same(w, n, "profile")) {
            long points = decimal(text, len, &pos);
            float *tail[6];
            if (points <= 0 || points > HEADROOM_TX_POINTS) {
                return -1;
            }
            for (i = 0; i < (size_t)points; i++) {
                if (bits_float(text, len, &pos, &profile->tx_points[i].power_dbm) != 0 ||
                    bits_float(text, len, &pos, &profile->tx_points[i].current_ma) != 0) {
                    return -1;
                }
            }
            profile->tx_point_count = (uint32_t)points;
            tail[0] = &profile->supply_v;
            tail[1] = &profile->airtime_ms;
            tail[2] = &profile->rx_window_ms;
            tail[3] = &profile->rx_current_ma;
            tail[4] = &profile->per_packet_uc;
            tail[5] = &profile->sleep_current_ua;
            for (i = 0; i < 6; i++) {
                if (bits_float(text, len, &pos, tail[i]) != 0) {
                    return -1;
                }
            }
            have_profile = 1;
        } else {
            return -1;
        }
    }
    return *count > 0 && have_profile ? 0 : -1;
}
