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
