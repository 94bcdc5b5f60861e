/*
 * Host test of libheadroom_c, driven by tests/c_api.rs: it runs every part
 * of the C interface and prints what it got, one fact per line, floats as
 * their IEEE-754 bits; the Rust side computes the same with the engine's
 * Rust API and compares. A line "fail ..." is a check that failed here.
 *
 * Usage: c_api LOG.hrlog DECISIONS.hrlog [RATES.txt RATE-LOG.hrlog RATE-DECISIONS.hrlog]
 *
 * With the last three, the rate-bearing log is replayed too, with the rate
 * table and the energy profile of RATES.txt (written by c_api.rs from the
 * engine's demo node; read by the demo's `replay_spec_parse`).
 */
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "headroom.h"
#include "replay_log.h"

static int failures = 0;

static uint32_t bits(float x) {
    uint32_t u;
    memcpy(&u, &x, sizeof u);
    return u;
}

static uint64_t bits64(double x) {
    uint64_t u;
    memcpy(&u, &x, sizeof u);
    return u;
}

static void expect(int ok, const char *what) {
    if (!ok) {
        printf("fail %s\n", what);
        failures++;
    }
}

static void expect_status(headroom_status got, headroom_status want, const char *what) {
    if (got != want) {
        printf("fail %s: status %d (%s), want %d (%s)\n", what, (int)got,
               headroom_status_message((int)got), (int)want, headroom_status_message((int)want));
        failures++;
    }
}

/* A settings refusal: its code and the setting named. */
static void refused(headroom_settings *s, headroom_status want, const char *setting) {
    char name[32] = "";
    headroom_status st = headroom_settings_check(s, NULL, name, sizeof name);
    expect_status(st, want, setting);
    if (strcmp(name, setting) != 0) {
        printf("fail check names '%s', want '%s'\n", name, setting);
        failures++;
    }
    printf("refused %s %d %s\n", name, (int)st, headroom_status_message((int)st));
}

static void settings_checks(void) {
    headroom_settings s;
    headroom_controller c;
    float tx;

    /* A state that was never initialised is refused, not read. */
    memset(&c, 0, sizeof c);
    expect_status(headroom_controller_tx(&c, &tx), HEADROOM_ERR_NOT_INITIALISED, "uninitialised");
    expect_status(headroom_settings_init(NULL), HEADROOM_ERR_NULL, "null settings");

    expect_status(headroom_settings_init(&s), HEADROOM_OK, "init");
    refused(&s, HEADROOM_ERR_SETTING_MISSING, "required_snr_db");
    expect_status(headroom_settings_set_number(&s, "no_such_setting", 1.0f),
                  HEADROOM_ERR_UNKNOWN_SETTING, "unknown key");
    expect_status(headroom_settings_set_number(&s, "min_readings", 8.0f),
                  HEADROOM_ERR_SETTING_WRONG_KIND, "number for a count");
    expect_status(headroom_settings_set_whole(&s, "min_readings", 70000u),
                  HEADROOM_ERR_SETTING_TOO_LARGE, "count too large");
    expect_status(headroom_settings_set_number(&s, "required_snr_db", -12.5f), HEADROOM_OK, "snr");
    expect_status(headroom_settings_check(&s, NULL, NULL, 0), HEADROOM_OK, "valid");
    expect_status(headroom_settings_set_number(&s, "target_outage", 2.0f), HEADROOM_OK, "set");
    refused(&s, HEADROOM_ERR_OUT_OF_RANGE, "target_outage");
    expect_status(headroom_settings_unset(&s, "target_outage"), HEADROOM_OK, "unset");
    expect_status(headroom_settings_set_number(&s, "margin_step_db", NAN), HEADROOM_OK, "set");
    refused(&s, HEADROOM_ERR_NOT_FINITE, "margin_step_db");
    expect_status(headroom_settings_unset(&s, "margin_step_db"), HEADROOM_OK, "unset");
    expect_status(headroom_settings_set_number(&s, "min_tx_dbm", 20.0f), HEADROOM_OK, "set");
    expect_status(headroom_settings_set_number(&s, "max_tx_dbm", 10.0f), HEADROOM_OK, "set");
    refused(&s, HEADROOM_ERR_INCONSISTENT, "min_tx_dbm");
    /* A refused controller is left uninitialised. */
    expect_status(headroom_controller_init(&c, &s, NULL), HEADROOM_ERR_INCONSISTENT, "init");
    expect_status(headroom_controller_tx(&c, &tx), HEADROOM_ERR_NOT_INITIALISED, "after refusal");
    {
        float levels[3] = {0.0f, -3.0f, 5.0f};
        expect_status(headroom_settings_set_steps_table(&s, levels, 3), HEADROOM_ERR_INCONSISTENT,
                      "descending table");
    }
    {
        float many[HEADROOM_MAX_LEVELS + 4] = {0};
        expect_status(headroom_settings_set_steps_table(&s, many, HEADROOM_MAX_LEVELS + 4),
                      HEADROOM_ERR_OUT_OF_RANGE, "table too long");
        expect_status(headroom_settings_set_steps_table(&s, NULL, 3), HEADROOM_ERR_NULL,
                      "no table");
    }
}

/* Settings of the controller run below (an invented device). */
static void device_settings(headroom_settings *s) {
    headroom_settings_init(s);
    headroom_settings_set_number(s, "required_snr_db", -7.5f);
    headroom_settings_set_number(s, "min_tx_dbm", -4.0f);
    headroom_settings_set_number(s, "max_tx_dbm", 20.0f);
    headroom_settings_set_number(s, "eirp_cap_dbm", 16.15f);
    headroom_settings_set_number(s, "antenna_gain_dbi", 2.15f);
    headroom_settings_set_whole(s, "min_readings", 6u);
    /* The table's widest gap is 4 dB: a smaller largest fall is refused. */
    headroom_settings_set_number(s, "max_step_down_db", 4.0f);
    {
        float levels[6] = {-4.0f, 0.0f, 4.0f, 8.0f, 11.0f, 14.0f};
        headroom_settings_set_steps_table(s, levels, 6);
    }
}

static uint32_t lcg(uint32_t *state) {
    *state = *state * 1664525u + 1013904223u;
    return *state >> 8;
}

/* A controller fed a seeded mix of every kind of observation. */
static void controller_run(void) {
    headroom_settings s;
    headroom_controller c;
    headroom_decision d;
    uint32_t seed = 20261203u;
    uint8_t reason;
    float tx, margin, lo, hi;
    int i;

    device_settings(&s);
    expect_status(headroom_controller_init(&c, &s, NULL), HEADROOM_OK, "controller init");
    if (failures > 0) {
        return;
    }
    expect_status(headroom_controller_reason(&c, &reason), HEADROOM_ERR_NO_DECISION_YET, "reason");
    expect_status(headroom_controller_limits(&c, &lo, &hi), HEADROOM_OK, "limits");
    printf("limits %08" PRIx32 " %08" PRIx32 "\n", bits(lo), bits(hi));
    for (i = 0; i < 400; i++) {
        headroom_observation o;
        uint32_t r = lcg(&seed);
        memset(&o, 0, sizeof o);
        o.t_ms = (uint64_t)i * 30000u;
        expect_status(headroom_controller_tx(&c, &tx), HEADROOM_OK, "tx");
        o.kind = (uint8_t)(r % 16u < 11u ? HEADROOM_OBSERVATION_FEEDBACK : r % 5u);
        o.tx_dbm = tx;
        o.rssi_dbm = -110.0f + (float)(lcg(&seed) % 400u) / 10.0f + tx;
        o.noise_dbm = -118.0f + (float)(lcg(&seed) % 30u) / 10.0f;
        o.has_snr = (uint8_t)(r % 7u == 0u);
        o.snr_db = o.rssi_dbm - o.noise_dbm - 0.5f;
        o.beacon_tx_dbm = 14.0f;
        if (i == 200) {
            o.rssi_dbm = NAN; /* a reading the controller must ignore */
        }
        expect_status(headroom_controller_update(&c, &o, &d), HEADROOM_OK, "update");
        printf("obs %u %" PRIu64 " %08" PRIx32 " %08" PRIx32 " %08" PRIx32 " %u %08" PRIx32
               " %08" PRIx32 "\n",
               (unsigned)o.kind, o.t_ms, bits(o.tx_dbm), bits(o.rssi_dbm), bits(o.noise_dbm),
               (unsigned)o.has_snr, bits(o.snr_db), bits(o.beacon_tx_dbm));
        printf("dec %08" PRIx32 " %08" PRIx32 " %u %u %s\n", bits(d.tx_dbm), bits(d.margin_db),
               (unsigned)d.reason, (unsigned)d.readings, headroom_reason_name(d.reason));
    }
    expect_status(headroom_controller_reason(&c, &reason), HEADROOM_OK, "reason");
    expect(reason == d.reason, "reason getter is the last decision's");
    expect_status(headroom_controller_margin(&c, &margin), HEADROOM_OK, "margin");
    expect(bits(margin) == bits(d.margin_db), "margin getter is the last decision's");
    {
        headroom_observation bad;
        memset(&bad, 0, sizeof bad);
        bad.kind = 9;
        expect_status(headroom_controller_update(&c, &bad, NULL), HEADROOM_ERR_OBSERVATION_KIND,
                      "bad kind");
    }
}

static size_t file_read(void *ctx, uint8_t *buf, size_t cap) {
    size_t n = fread(buf, 1, cap, (FILE *)ctx);
    return (n == 0 && ferror((FILE *)ctx)) ? (size_t)-1 : n;
}

static int file_write(void *ctx, const uint8_t *data, size_t len) {
    return fwrite(data, 1, len, (FILE *)ctx) == len ? 0 : -1;
}

static replay_job job;

/* Replay `log` into `out` with the job as set; the summary's lines start
 * with `tag`. */
static void replay_run(const char *log, const char *out, const char *tag) {
    FILE *in = fopen(log, "rb");
    FILE *dst = fopen(out, "wb");
    replay_report rep;
    headroom_summary sum;
    int i;

    if (in == NULL || dst == NULL) {
        printf("fail cannot open %s or %s\n", log, out);
        failures++;
        return;
    }
    expect(replay_log(&job, file_read, in, file_write, dst, &rep) == 0, "replay_log");
    fclose(in);
    if (fclose(dst) != 0) {
        expect(0, "close output");
    }
    expect_status(rep.status, HEADROOM_OK, "replay status");
    expect_status(headroom_replay_summary(&job.replay, &sum), HEADROOM_OK, "summary");
    printf("%sreport %" PRIu64 " %" PRIu64 " %" PRIu64 " %" PRIu64 "\n", tag, rep.bytes_in, rep.bytes_out,
           rep.damaged, rep.other_frames);
    printf("%scounts %" PRIu64 " %" PRIu64 " %" PRIu64 " %" PRIu64 " %" PRIu64 " %" PRIu64
           " %" PRIu64 " %" PRIu64 " %" PRIu64 "\n", tag,
           sum.logs, sum.records, sum.judged, sum.lost, sum.unjudged, sum.judged_at_max,
           sum.lost_at_max, sum.power_changes, sum.logged_judged);
    printf("%slogged %" PRIu64 " %" PRIu64 " %" PRIu64 " %016" PRIx64 " %016" PRIx64 "\n", tag,
           sum.logged_lost, sum.logged_without_readings, sum.logged_records_with_tx,
           bits64(sum.logged_tx_mw_sum), bits64(sum.logged_chosen_mw_sum));
    printf("%ssums %016" PRIx64 " %016" PRIx64 " %08" PRIx32 " %u %08" PRIx32 "\n", tag,
           bits64(sum.tx_mw_sum), bits64(sum.max_mw_sum), bits(sum.max_tx_dbm_used),
           (unsigned)sum.has_max_tx_used, bits(sum.max_allowed_dbm));
    printf("%signored", tag);
    for (i = 0; i < HEADROOM_REASON_COUNT; i++) {
        printf(" %" PRIu64, sum.ignored_readings[i]);
    }
    printf("\n");
}

static void codec_run(void) {
    headroom_encoder enc;
    headroom_decoder dec;
    headroom_log_header h;
    headroom_log_record r;
    headroom_event ev;
    uint8_t stream[3 * HEADROOM_MAX_FRAME];
    uint8_t tiny[4];
    size_t len = 0, n = 0, i;
    const uint8_t *p;
    int got = 0;

    memset(&h, 0, sizeof h);
    h.device_id = 77;
    h.max_tx_dbm = 14.0f;
    h.has_max_tx = 1;
    h.required_snr_db = -12.5f;
    h.has_required_snr = 1;
    memset(&r, 0, sizeof r);
    r.t_ms = 123456;
    r.tx_dbm = 14.0f;
    r.has_tx = 1;
    r.rssi_dbm = -91.5f;
    r.has_rssi = 1;
    expect_status(headroom_encoder_init(&enc), HEADROOM_OK, "encoder init");
    expect_status(headroom_encode_header(&enc, &h, stream, sizeof stream, &n), HEADROOM_OK,
                  "header");
    len += n;
    expect_status(headroom_encode_record(&enc, &r, tiny, sizeof tiny, &n),
                  HEADROOM_ERR_BUFFER_TOO_SMALL, "small buffer");
    expect_status(headroom_encode_record(&enc, &r, stream + len, sizeof stream - len, &n),
                  HEADROOM_OK, "record");
    len += n;
    printf("frames");
    for (i = 0; i < len; i++) {
        printf(" %02x", stream[i]);
    }
    printf("\n");
    /* Read back one byte at a time; a damaged copy is reported, not read. */
    expect_status(headroom_decoder_init(&dec), HEADROOM_OK, "decoder init");
    for (i = 0; i < len; i++) {
        size_t one = 1;
        p = stream + i;
        while (headroom_decoder_feed(&dec, &p, &one, &ev) == 1) {
            got++;
            if (ev.kind == HEADROOM_EVENT_RECORD) {
                expect(ev.record.t_ms == r.t_ms && ev.record.has_noise == 0 &&
                           bits(ev.record.rssi_dbm) == bits(r.rssi_dbm) && ev.seq == 1,
                       "record read back");
            } else {
                expect(ev.kind == HEADROOM_EVENT_HEADER && ev.header.device_id == 77 &&
                           ev.header.has_min_tx == 0 && ev.header.has_required_snr == 1,
                       "header read back");
            }
        }
    }
    expect(got == 2, "two frames");
    stream[len - 3] ^= 0x40;
    expect_status(headroom_decoder_init(&dec), HEADROOM_OK, "decoder init");
    p = stream;
    n = len;
    got = 0;
    while (headroom_decoder_feed(&dec, &p, &n, &ev) == 1) {
        if (ev.kind == HEADROOM_EVENT_DAMAGED) {
            printf("damaged %" PRIu64 " %" PRIu64 " %s\n", ev.offset, ev.length,
                   headroom_status_message(ev.error));
            got++;
        }
    }
    expect(got == 1 && n == 0, "damage reported");
}

static void energy_run(void) {
    headroom_link link;
    headroom_link_result lr;
    headroom_chirp_modem m;
    headroom_energy_profile prof;
    float x, airtime, q, ua, days;

    expect_status(headroom_free_space_path_loss(868e6f, 1000.0f, &x), HEADROOM_OK, "fspl");
    printf("fspl %08" PRIx32 "\n", bits(x));
    expect_status(headroom_free_space_path_loss(868e6f, 0.0f, &x), HEADROOM_ERR_NOT_POSITIVE,
                  "fspl at 0 m");
    expect_status(headroom_log_distance_path_loss(868e6f, 2500.0f, 1.0f, 0.0f, 0, 3.2f, &x),
                  HEADROOM_OK, "log-distance");
    printf("logdist %08" PRIx32 "\n", bits(x));
    expect_status(headroom_log_distance_path_loss(868e6f, 2500.0f, 1.0f, 0.0f, 0, 30.0f, &x),
                  HEADROOM_ERR_OUT_OF_VALIDITY, "exponent 30");

    memset(&link, 0, sizeof link);
    link.tx_power_dbm = 14.0f;
    link.tx_gain_db = 2.15f;
    link.path_loss_db = 128.0f;
    link.rx_gain_db = 5.0f;
    link.bandwidth_hz = 125e3f;
    link.noise_figure_db = 6.0f;
    link.required_snr_db = -12.5f;
    link.fade_margin_db = 10.0f;
    expect_status(headroom_link_margin(&link, &lr), HEADROOM_OK, "link");
    printf("link %08" PRIx32 " %08" PRIx32 " %08" PRIx32 " %08" PRIx32 "\n", bits(lr.eirp_dbm),
           bits(lr.rx_power_dbm), bits(lr.noise_power_dbm), bits(lr.margin_db));

    memset(&m, 0, sizeof m);
    m.spreading_factor = 9;
    m.bandwidth_hz = 125e3f;
    m.coding_rate = 1;
    m.preamble_symbols = 8;
    m.explicit_header = 1;
    m.crc = 1;
    m.low_data_rate = HEADROOM_LOW_DATA_RATE_AUTO;
    expect_status(headroom_airtime_chirp(&m, 20, &airtime), HEADROOM_OK, "airtime");
    printf("airtime %08" PRIx32 "\n", bits(airtime));

    memset(&prof, 0, sizeof prof);
    prof.tx_points[0].power_dbm = 2.0f;
    prof.tx_points[0].current_ma = 20.0f;
    prof.tx_points[1].power_dbm = 14.0f;
    prof.tx_points[1].current_ma = 44.0f;
    prof.tx_point_count = 2;
    prof.supply_v = 3.3f;
    prof.airtime_ms = airtime;
    prof.rx_window_ms = 50.0f;
    prof.rx_current_ma = 11.0f;
    prof.per_packet_uc = 2500.0f;
    prof.sleep_current_ua = 2.0f;
    expect_status(headroom_battery_life(&prof, 20.0f, &days), HEADROOM_ERR_NO_SOLUTION,
                  "life without a battery");
    prof.battery_mah = 2600.0f;
    prof.has_battery = 1;
    expect_status(headroom_charge_per_packet(&prof, 9.5f, &q), HEADROOM_OK, "charge");
    expect_status(headroom_charge_per_packet(&prof, 20.0f, &q), HEADROOM_ERR_OUT_OF_VALIDITY,
                  "power beyond the table");
    expect_status(headroom_charge_per_packet(&prof, 9.5f, &q), HEADROOM_OK, "charge");
    expect_status(headroom_mean_current(&prof, 9.5f, 300.0f, &ua), HEADROOM_OK, "current");
    expect_status(headroom_battery_life(&prof, ua, &days), HEADROOM_OK, "life");
    printf("energy %08" PRIx32 " %08" PRIx32 " %08" PRIx32 "\n", bits(q), bits(ua), bits(days));
    prof.tx_points[1].power_dbm = 1.0f;
    expect_status(headroom_charge_per_packet(&prof, 1.5f, &q), HEADROOM_ERR_TABLE_NOT_INCREASING,
                  "unsorted table");
}

static headroom_rate spec_rates[HEADROOM_MAX_RATES];
static headroom_energy_profile spec_profile;
static char spec_text[8192];

/* The rate table and the energy profile of `path`, by the demo's parser. */
static int read_spec(const char *path, size_t *count) {
    FILE *f = fopen(path, "rb");
    size_t n;
    *count = 0;
    if (f == NULL) {
        return -1;
    }
    n = fread(spec_text, 1, sizeof spec_text, f);
    fclose(f);
    if (n == sizeof spec_text) {
        return -1;
    }
    return replay_spec_parse(spec_text, n, spec_rates, count, &spec_profile);
}

/* The rate-bearing log with the spec's rates and profile; then the
 * refusals of a bad table. */
static void rates_run(const char *spec, const char *log, const char *out) {
    size_t count = 0;
    headroom_settings s;
    headroom_rate two[2];
    if (read_spec(spec, &count) != 0) {
        printf("fail cannot read %s\n", spec);
        failures++;
        return;
    }
    memset(&job, 0, sizeof job);
    job.rates = spec_rates;
    job.rate_count = count;
    job.energy = &spec_profile;
    replay_run(log, out, "rates-");
    memset(&job, 0, sizeof job);
    /* Refusals: two rates of one name, a name too long, too many. */
    expect_status(headroom_settings_init(&s), HEADROOM_OK, "settings for rates");
    two[0] = spec_rates[0];
    two[1] = spec_rates[0];
    expect_status(headroom_settings_set_rates(&s, two, 2), HEADROOM_ERR_INCONSISTENT,
                  "duplicate rate name");
    two[1] = spec_rates[1];
    memset(two[1].name, 'x', sizeof two[1].name);
    expect_status(headroom_settings_set_rates(&s, two, 2), HEADROOM_ERR_INVALID_INPUT,
                  "rate name without its NUL");
    expect_status(headroom_settings_set_rates(&s, spec_rates, HEADROOM_MAX_RATES + 1),
                  HEADROOM_ERR_TABLE_FULL, "too many rates");
    expect_status(headroom_settings_set_rates(&s, NULL, 1), HEADROOM_ERR_NULL, "no rates");
    expect_status(headroom_settings_set_rates(&s, NULL, 0), HEADROOM_OK, "an empty table");
}

int main(int argc, char **argv) {
    if (argc != 3 && argc != 6) {
        fprintf(stderr, "usage: c_api LOG.hrlog DECISIONS.hrlog [RATES.txt RATE-LOG.hrlog "
                        "RATE-DECISIONS.hrlog]\n");
        return 2;
    }
    settings_checks();
    controller_run();
    replay_run(argv[1], argv[2], "");
    if (argc == 6) {
        rates_run(argv[3], argv[4], argv[5]);
    }
    codec_run();
    energy_run();
    printf("failures %d\n", failures);
    return failures == 0 ? 0 : 1;
}
