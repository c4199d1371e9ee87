/*
 * tests/io/test_shiftlog.c - the shift log writer (io/shiftlog.h) and the
 * reject image store (io/rejects.h): every record parses back (cJSON) with
 * the members of io/shiftlog_format.h and the values given; a torn last
 * line is repaired on reopen and the counts are rebuilt; the shift switch
 * writes shift-end and shift-start into the right files; retention deletes
 * only old shift files; a full disk (/dev/full put under the descriptor),
 * a file size limit that cuts a record in half, and a missing folder raise
 * the logging-problem flag at once, lose only the records written meanwhile,
 * and clear with a "restored" record; the reject store keeps its cap by
 * deleting the oldest images.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "file_util.h"
#include "rejects.h"
#include "shiftlog.h"

#include <cjson/cJSON.h>
#include <fcntl.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

static char scratch[64];

static int setup(void **state)
{
    setenv("TZ", "UTC", 1);
    tzset();
    snprintf(scratch, sizeof scratch, "shiftlog_scratch_XXXXXX");
    return mkdtemp(scratch) ? 0 : -1;
}

static int teardown(void **state)
{
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", scratch);
    return system(cmd) == 0 ? 0 : -1;
}

/* ms of a UTC date and time. */
static int64_t ms_at(int y, int mo, int d, int h, int mi, int s, int ms)
{
    struct tm tm = {0};
    tm.tm_year = y - 1900;
    tm.tm_mon = mo - 1;
    tm.tm_mday = d;
    tm.tm_hour = h;
    tm.tm_min = mi;
    tm.tm_sec = s;
    return (int64_t)timegm(&tm) * 1000 + ms;
}

static mb_shift_calendar calendar3(void)
{
    mb_shift_def d[3] = {{"early", 360}, {"late", 840}, {"night", 1320}};
    mb_shift_calendar cal;
    assert_int_equal(mb_shift_calendar_init(&cal, d, 3, "shifts", NULL), 0);
    return cal;
}

static void config(mb_shiftlog_config *c, const char *folder,
                   const mb_shift_calendar *cal)
{
    memset(c, 0, sizeof *c);
    c->folder = folder;
    c->station = "cell \"7\"";
    c->calendar = cal;
    c->flush_interval_s = 1;
    c->retention_days = 0;
    c->slot = 2;
    c->model = "models/ring.json";
    c->model_checksum = "crc32:0badf00d";
}

/* A part record: seq decides verdict and reasons. */
static void fill_part(mb_shiftlog_part_rec *r, uint32_t seq)
{
    memset(r, 0, sizeof *r);
    r->seq = seq;
    r->frame_seq = 1000u + 3u * seq;
    r->slot = 2;
    r->part = "RG-4030";
    r->model_checksum = "crc32:0badf00d";
    r->verdict = seq % 10 == 3 ? MB_SHIFTLOG_FAULT
                 : seq % 5 == 1 ? MB_SHIFTLOG_REJECT
                                : MB_SHIFTLOG_PASS;
    if (r->verdict == MB_SHIFTLOG_REJECT) {
        r->n_reasons = 2;
        r->reasons[0] = (mb_shiftlog_reason){
            9, "nick", "nick 0.31 mm deep on the outer edge at 87\xc2\xb0",
            0.31, 0.15, 1, 0, 0.2417, 87.0, 0.31, 1.2};
        r->reasons[1] = (mb_shiftlog_reason){6, "mode", "mode 2 at 3.4 sd",
                                             3.4, 3.0, 0, 0, 0, 0, 0, 0};
    } else if (r->verdict == MB_SHIFTLOG_FAULT) {
        r->n_reasons = 1;
        r->reasons[0] = (mb_shiftlog_reason){4, "no-fit", "fit did not converge",
                                             NAN, NAN, 0, 0, 0, 0, 0, 0};
    }
    r->has_pose = r->verdict != MB_SHIFTLOG_FAULT;
    r->x = 640.25 + seq;
    r->y = 512.5;
    r->angle_deg = -12.75;
    r->scale = 1.0125;
    r->n_modes = 3;
    r->modes[0] = 0.5;
    r->modes[1] = -1.25;
    r->modes[2] = 3.4;
    r->t2 = r->verdict == MB_SHIFTLOG_FAULT ? NAN : 4.5;
    r->residual = 0.0625;
    r->size_mm = 42.125;
    r->n_gauges = 1;
    r->gauges[0] = (mb_shiftlog_gauge){"bore", 30.02, 30.0, -0.1, 0.1, 1};
    r->cycle_ms = 3.75;
    r->image = r->verdict == MB_SHIFTLOG_REJECT ? "rejects/x.png" : NULL;
}

/* Lines of a file, each parsed; *n_lines set; torn lines (not JSON) as
   NULL entries. Caller frees with free_lines. */
static cJSON **read_lines(const char *path, int *n_lines, int *n_bad)
{
    char *text = NULL;
    size_t len = 0;
    char err[MB_ERR_LEN];
    if (mb_file_read_all(path, (size_t)1 << 28, &text, &len, err) != 0)
        fail_msg("%s", err);
    int cap = 16, n = 0;
    cJSON **lines = malloc((size_t)cap * sizeof *lines);
    *n_bad = 0;
    char *p = text;
    while (*p) {
        char *e = strchr(p, '\n');
        assert_non_null(e); /* the writer ends every line */
        *e = '\0';
        if (n == cap)
            lines = realloc(lines, (size_t)(cap *= 2) * sizeof *lines);
        lines[n] = cJSON_Parse(p);
        if (!lines[n])
            (*n_bad)++;
        n++;
        p = e + 1;
    }
    free(text);
    *n_lines = n;
    return lines;
}

static void free_lines(cJSON **lines, int n)
{
    for (int i = 0; i < n; i++)
        cJSON_Delete(lines[i]);
    free(lines);
}

static const char *str_of(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    if (!cJSON_IsString(v))
        fail_msg("member \"%s\" is not a string", key);
    return v->valuestring;
}

static double num_of(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    if (!cJSON_IsNumber(v))
        fail_msg("member \"%s\" is not a number", key);
    return v->valuedouble;
}

static void assert_header(const cJSON *o, const char *kind)
{
    assert_string_equal(str_of(o, "format"), "modeband-shiftlog");
    assert_true(num_of(o, "version") == 1);
    assert_string_equal(str_of(o, "kind"), kind);
    const char *t = str_of(o, "time");
    /* "2026-12-01T07:00:00.125+00:00" */
    assert_int_equal(strlen(t), 29);
    assert_true(t[10] == 'T' && t[19] == '.' && t[26] == ':');
}

static void test_records(void **state)
{
    char folder[128];
    snprintf(folder, sizeof folder, "%s/rec", scratch);
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN];
    int64_t t = ms_at(2026, 12, 1, 7, 0, 0, 125);
    assert_int_equal(mb_shiftlog_open(&c, t, &log, err), 0);
    assert_int_equal(mb_shiftlog_problem(log), 0);
    char want[256];
    snprintf(want, sizeof want, "%s/2026-12-01_early.jsonl", folder);
    assert_string_equal(mb_shiftlog_path(log), want);
    assert_string_equal(mb_shiftlog_shift(log)->name, "early");

    mb_shiftlog_part_rec r;
    for (uint32_t s = 1; s <= 20; s++) {
        fill_part(&r, s);
        assert_int_equal(mb_shiftlog_part(log, t + s, &r, err), 0);
    }
    mb_shiftlog_drift_rec d = {"gauge:bore", 1, 1, 30.06, 30.0, 29.95, 30.05,
                               12, t + 12, 8};
    assert_int_equal(mb_shiftlog_drift(log, t + 30, &d, err), 0);
    assert_int_equal(mb_shiftlog_fault(log, t + 31, "camera", 1, MB_ENODEV,
                                       "camera unplugged", 0, err),
                     0);
    assert_int_equal(mb_shiftlog_fault(log, t + 32, "camera", 0, 0,
                                       "camera back", 2.5, err),
                     0);
    assert_int_equal(mb_shiftlog_model(log, t + 33, 1, 3, "models/f.json",
                                       "crc32:12345678", err),
                     0);
    fill_part(&r, 21);
    r.verdict = 7;
    assert_int_equal(mb_shiftlog_part(log, t + 34, &r, err), MB_EINVAL);

    mb_shiftlog_counts k;
    mb_shiftlog_get_counts(log, &k);
    /* seq 1..20: faults at 3, 13; rejects at 1, 6, 11, 16. */
    assert_true(k.parts == 20 && k.faults == 2 && k.rejects == 4 &&
                k.passes == 14 && k.drift_signals == 1);
    assert_true(k.by_code[9] == 4 && k.by_code[4] == 2 && k.by_code[6] == 0);
    assert_string_equal(mb_shiftlog_reason_name(log, 9), "nick");
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    assert_true(st.records == 25 && st.lost == 0 && st.problem == 0);
    mb_shiftlog_close(log);

    int n, bad;
    cJSON **lines = read_lines(want, &n, &bad);
    assert_int_equal(n, 25);
    assert_int_equal(bad, 0);
    const cJSON *h = lines[0];
    assert_header(h, "shift-start");
    assert_string_equal(str_of(h, "time"), "2026-12-01T07:00:00.125+00:00");
    assert_string_equal(str_of(h, "shift"), "early");
    assert_string_equal(str_of(h, "date"), "2026-12-01");
    assert_string_equal(str_of(h, "station"), "cell \"7\"");
    assert_string_equal(str_of(h, "model"), "models/ring.json");
    assert_string_equal(str_of(h, "model_checksum"), "crc32:0badf00d");
    assert_true(num_of(h, "slot") == 2);
    for (int i = 1; i <= 20; i++) {
        const cJSON *p = lines[i];
        fill_part(&r, (uint32_t)i);
        assert_header(p, "part");
        assert_true(num_of(p, "seq") == i);
        assert_true(num_of(p, "frame_seq") == 1000 + 3 * i);
        assert_true(num_of(p, "slot") == 2);
        assert_string_equal(str_of(p, "part"), "RG-4030");
        assert_string_equal(str_of(p, "model_checksum"), "crc32:0badf00d");
        const char *v = str_of(p, "verdict");
        const cJSON *reasons = cJSON_GetObjectItemCaseSensitive(p, "reasons");
        assert_true(cJSON_IsArray(reasons));
        assert_int_equal(cJSON_GetArraySize(reasons), r.n_reasons);
        if (r.verdict == MB_SHIFTLOG_PASS) {
            assert_string_equal(v, "pass");
            assert_true(cJSON_IsNull(cJSON_GetObjectItem(p, "reason")));
            assert_true(num_of(p, "code") == 0);
        } else if (r.verdict == MB_SHIFTLOG_REJECT) {
            assert_string_equal(v, "reject");
            assert_string_equal(str_of(p, "reason"), "nick");
            assert_true(num_of(p, "code") == 9);
            const cJSON *r0 = cJSON_GetArrayItem(reasons, 0);
            assert_true(num_of(r0, "code") == 9);
            assert_string_equal(str_of(r0, "name"), "nick");
            assert_string_equal(str_of(r0, "text"), r.reasons[0].text);
            assert_true(num_of(r0, "value") == 0.31);
            assert_true(num_of(r0, "limit") == 0.15);
            assert_true(num_of(r0, "outline") == 0);
            assert_true(num_of(r0, "position") == 0.2417);
            assert_true(num_of(r0, "angle_deg") == 87);
            assert_true(num_of(r0, "depth_mm") == 0.31);
            assert_true(num_of(r0, "extent_mm") == 1.2);
            const cJSON *r1 = cJSON_GetArrayItem(reasons, 1);
            assert_null(cJSON_GetObjectItem(r1, "outline"));
            assert_string_equal(str_of(p, "image"), "rejects/x.png");
        } else {
            assert_string_equal(v, "fault");
            const cJSON *r0 = cJSON_GetArrayItem(reasons, 0);
            assert_true(cJSON_IsNull(cJSON_GetObjectItem(r0, "value")));
            assert_true(cJSON_IsNull(cJSON_GetObjectItem(p, "pose")));
            assert_true(cJSON_IsNull(cJSON_GetObjectItem(p, "t2")));
        }
        if (r.has_pose) {
            const cJSON *pose = cJSON_GetObjectItem(p, "pose");
            assert_true(num_of(pose, "x") == 640.25 + i);
            assert_true(num_of(pose, "y") == 512.5);
            assert_true(num_of(pose, "angle") == -12.75);
            assert_true(num_of(pose, "scale") == 1.0125);
            assert_true(num_of(p, "t2") == 4.5);
        }
        const cJSON *modes = cJSON_GetObjectItem(p, "modes");
        assert_int_equal(cJSON_GetArraySize(modes), 3);
        assert_true(cJSON_GetArrayItem(modes, 2)->valuedouble == 3.4);
        assert_true(num_of(p, "residual") == 0.0625);
        assert_true(num_of(p, "size_mm") == 42.125);
        const cJSON *g = cJSON_GetArrayItem(cJSON_GetObjectItem(p, "gauges"), 0);
        assert_string_equal(str_of(g, "name"), "bore");
        assert_true(num_of(g, "value_mm") == 30.02);
        assert_true(num_of(g, "tol_lo_mm") == -0.1);
        assert_true(cJSON_IsTrue(cJSON_GetObjectItem(g, "ok")));
        assert_true(num_of(p, "cycle_ms") == 3.75);
        if (r.verdict != MB_SHIFTLOG_REJECT)
            assert_true(cJSON_IsNull(cJSON_GetObjectItem(p, "image")));
    }
    const cJSON *dr = lines[21];
    assert_header(dr, "drift");
    assert_string_equal(str_of(dr, "chart"), "gauge:bore");
    assert_string_equal(str_of(dr, "state"), "signal");
    assert_string_equal(str_of(dr, "direction"), "up");
    assert_true(num_of(dr, "ewma") == 30.06 && num_of(dr, "ucl") == 30.05);
    assert_true(num_of(dr, "since_seq") == 12 && num_of(dr, "parts_since") == 8);
    assert_string_equal(str_of(dr, "since_time"),
                        "2026-12-01T07:00:00.137+00:00");
    assert_header(lines[22], "fault");
    assert_string_equal(str_of(lines[22], "source"), "camera");
    assert_string_equal(str_of(lines[22], "state"), "lost");
    assert_true(num_of(lines[22], "code") == MB_ENODEV);
    assert_null(cJSON_GetObjectItem(lines[22], "duration_s"));
    assert_true(num_of(lines[23], "duration_s") == 2.5);
    assert_header(lines[24], "model");
    assert_string_equal(str_of(lines[24], "event"), "changed");
    assert_true(num_of(lines[24], "slot") == 3);
    assert_string_equal(str_of(lines[24], "path"), "models/f.json");
    free_lines(lines, n);
}

/* Append text to a file as a crash in mid-write would leave it. */
static void append_raw(const char *path, const char *text)
{
    int fd = open(path, O_WRONLY | O_APPEND);
    assert_true(fd >= 0);
    assert_int_equal(write(fd, text, strlen(text)), (ssize_t)strlen(text));
    close(fd);
}

static void test_torn_line(void **state)
{
    char folder[128];
    snprintf(folder, sizeof folder, "%s/torn", scratch);
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN];
    int64_t t = ms_at(2026, 12, 1, 15, 0, 0, 0);
    assert_int_equal(mb_shiftlog_open(&c, t, &log, err), 0);
    mb_shiftlog_part_rec r;
    for (uint32_t s = 1; s <= 10; s++) {
        fill_part(&r, s);
        assert_int_equal(mb_shiftlog_part(log, t + s, &r, err), 0);
    }
    mb_shiftlog_counts before;
    mb_shiftlog_get_counts(log, &before);
    char path[256];
    snprintf(path, sizeof path, "%s", mb_shiftlog_path(log));
    mb_shiftlog_close(log);
    /* The record in flight when the station died: a reject, half written. */
    append_raw(path, "{\"format\":\"modeband-shiftlog\",\"version\":1,"
                     "\"kind\":\"part\",\"time\":\"2026-12-01T15:00:01.000"
                     "+00:00\",\"seq\":11,\"verdict\":\"rej");

    assert_int_equal(mb_shiftlog_open(&c, t + 5000, &log, err), 0);
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    assert_int_equal(st.torn_repaired, 1);
    mb_shiftlog_counts after;
    mb_shiftlog_get_counts(log, &after);
    /* Rebuilt from the file: the torn record is not counted. */
    assert_true(after.parts == before.parts && after.passes == before.passes &&
                after.rejects == before.rejects &&
                after.faults == before.faults);
    assert_true(after.by_code[9] == before.by_code[9] &&
                after.by_code[4] == before.by_code[4]);
    assert_string_equal(mb_shiftlog_reason_name(log, 9), "nick");
    fill_part(&r, 11);
    assert_int_equal(mb_shiftlog_part(log, t + 6000, &r, err), 0);
    mb_shiftlog_close(log);

    int n, bad;
    cJSON **lines = read_lines(path, &n, &bad);
    /* shift-start, 10 parts, the torn line, the new part: no second
       shift-start; only the torn line fails to parse. */
    assert_int_equal(n, 13);
    assert_int_equal(bad, 1);
    assert_null(lines[11]);
    assert_header(lines[12], "part");
    assert_true(num_of(lines[12], "seq") == 11);
    int starts = 0;
    for (int i = 0; i < n; i++)
        if (lines[i] && strcmp(str_of(lines[i], "kind"), "shift-start") == 0)
            starts++;
    assert_int_equal(starts, 1);
    free_lines(lines, n);
}

static int kind_count(cJSON **lines, int n, const char *kind)
{
    int k = 0;
    for (int i = 0; i < n; i++)
        if (lines[i] && strcmp(str_of(lines[i], "kind"), kind) == 0)
            k++;
    return k;
}

static void test_shift_switch(void **state)
{
    char folder[128];
    snprintf(folder, sizeof folder, "%s/switch", scratch);
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN];
    int64_t t = ms_at(2026, 12, 1, 13, 59, 58, 0);
    assert_int_equal(mb_shiftlog_open(&c, t, &log, err), 0);
    mb_shiftlog_part_rec r;
    for (uint32_t s = 1; s <= 6; s++) {
        fill_part(&r, s);
        assert_int_equal(mb_shiftlog_part(log, t + 300 * s, &r, err), 0);
    }
    /* 13:59:59.999 is still early; 14:00:00.000 is late. */
    assert_int_equal(mb_shiftlog_tick(log, ms_at(2026, 12, 1, 13, 59, 59, 999)),
                     0);
    assert_string_equal(mb_shiftlog_last_summary(log), "");
    fill_part(&r, 7);
    assert_int_equal(
        mb_shiftlog_part(log, ms_at(2026, 12, 1, 14, 0, 0, 0), &r, err), 0);
    assert_string_equal(mb_shiftlog_shift(log)->name, "late");
    /* The summary of the early shift: 6 parts, 1 reject (seq 1, 6 -> 2),
       1 fault (seq 3). */
    const char *sum = mb_shiftlog_last_summary(log);
    assert_non_null(strstr(sum, "shift early 2026-12-01 ended: 6 parts"));
    assert_non_null(strstr(sum, "nick 2"));
    mb_shiftlog_counts k;
    mb_shiftlog_get_counts(log, &k);
    assert_true(k.parts == 1 && k.rejects == 0);

    /* No parts during the late shift: tick ends it at 22:00 exactly. */
    assert_int_equal(mb_shiftlog_tick(log, ms_at(2026, 12, 1, 21, 59, 59, 0)),
                     0);
    assert_int_equal(mb_shiftlog_tick(log, ms_at(2026, 12, 1, 22, 0, 0, 0)), 1);
    assert_string_equal(mb_shiftlog_shift(log)->date, "2026-12-01");
    /* The night shift crosses midnight and stays in one file. */
    fill_part(&r, 8);
    assert_int_equal(
        mb_shiftlog_part(log, ms_at(2026, 12, 2, 2, 0, 0, 0), &r, err), 0);
    assert_string_equal(mb_shiftlog_shift(log)->name, "night");
    assert_string_equal(mb_shiftlog_shift(log)->date, "2026-12-01");
    assert_int_equal(mb_shiftlog_tick(log, ms_at(2026, 12, 2, 6, 0, 0, 0)), 1);
    assert_string_equal(mb_shiftlog_shift(log)->date, "2026-12-02");
    mb_shiftlog_close(log);

    char path[256];
    int n, bad;
    snprintf(path, sizeof path, "%s/2026-12-01_early.jsonl", folder);
    cJSON **lines = read_lines(path, &n, &bad);
    assert_int_equal(n, 8); /* start, 6 parts, end */
    assert_int_equal(bad, 0);
    const cJSON *e = lines[7];
    assert_header(e, "shift-end");
    assert_string_equal(str_of(e, "shift"), "early");
    assert_string_equal(str_of(e, "date"), "2026-12-01");
    assert_true(num_of(e, "parts") == 6 && num_of(e, "passes") == 3 &&
                num_of(e, "rejects") == 2 && num_of(e, "faults") == 1);
    assert_true(fabs(num_of(e, "yield") - 0.5) < 1e-12);
    const cJSON *hist = cJSON_GetObjectItem(e, "reasons");
    assert_true(num_of(hist, "nick") == 2 && num_of(hist, "no-fit") == 1);
    assert_int_equal(cJSON_GetArraySize(hist), 2);
    assert_true(num_of(e, "drift_signals") == 0);
    free_lines(lines, n);

    snprintf(path, sizeof path, "%s/2026-12-01_late.jsonl", folder);
    lines = read_lines(path, &n, &bad);
    assert_int_equal(n, 3);
    assert_header(lines[0], "shift-start");
    assert_string_equal(str_of(lines[0], "time"),
                        "2026-12-01T14:00:00.000+00:00");
    assert_true(num_of(lines[1], "seq") == 7);
    assert_true(num_of(lines[2], "parts") == 1);
    free_lines(lines, n);

    snprintf(path, sizeof path, "%s/2026-12-01_night.jsonl", folder);
    lines = read_lines(path, &n, &bad);
    assert_int_equal(n, 3);
    assert_int_equal(kind_count(lines, n, "shift-start"), 1);
    assert_int_equal(kind_count(lines, n, "shift-end"), 1);
    free_lines(lines, n);
    snprintf(path, sizeof path, "%s/2026-12-02_early.jsonl", folder);
    assert_int_equal(access(path, F_OK), 0);
}

static void touch(const char *folder, const char *name)
{
    char path[256];
    snprintf(path, sizeof path, "%s/%s", folder, name);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs("{}\n", f);
    fclose(f);
}

static void test_retention(void **state)
{
    char folder[128], path[256];
    snprintf(folder, sizeof folder, "%s/ret", scratch);
    assert_int_equal(mkdir(folder, 0755), 0);
    touch(folder, "2026-10-01_early.jsonl");
    touch(folder, "2026-11-16_night.jsonl"); /* 15 days before: deleted */
    touch(folder, "2026-11-17_late.jsonl");  /* 14 days before: kept */
    touch(folder, "2026-11-30_x.txt");
    touch(folder, "notes.jsonl");
    touch(folder, "1999-01-01.jsonl");
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    c.retention_days = 14;
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN];
    assert_int_equal(
        mb_shiftlog_open(&c, ms_at(2026, 12, 1, 8, 0, 0, 0), &log, err), 0);
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    assert_int_equal(st.files_deleted, 2);
    const char *gone[] = {"2026-10-01_early.jsonl", "2026-11-16_night.jsonl"};
    const char *kept[] = {"2026-11-17_late.jsonl", "2026-11-30_x.txt",
                          "notes.jsonl", "1999-01-01.jsonl",
                          "2026-12-01_early.jsonl"};
    for (int i = 0; i < 2; i++) {
        snprintf(path, sizeof path, "%s/%s", folder, gone[i]);
        assert_int_not_equal(access(path, F_OK), 0);
    }
    for (int i = 0; i < 5; i++) {
        snprintf(path, sizeof path, "%s/%s", folder, kept[i]);
        if (access(path, F_OK) != 0)
            fail_msg("%s was deleted", kept[i]);
    }
    /* At the next shift change the 11-17 file is still within 14 days of
       12-01, but two weeks later it goes. */
    assert_int_equal(mb_shiftlog_tick(log, ms_at(2026, 12, 1, 14, 0, 0, 0)), 1);
    snprintf(path, sizeof path, "%s/2026-11-17_late.jsonl", folder);
    assert_int_equal(access(path, F_OK), 0);
    assert_int_equal(mb_shiftlog_tick(log, ms_at(2026, 12, 2, 6, 0, 0, 0)), 1);
    assert_int_not_equal(access(path, F_OK), 0);
    mb_shiftlog_close(log);
}

static double mono_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

/* Disk full: /dev/full put under the log's descriptor makes every write
   fail with ENOSPC; putting the file back lets the log recover. */
static void test_disk_full(void **state)
{
    char folder[128];
    snprintf(folder, sizeof folder, "%s/full", scratch);
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN];
    int64_t t = ms_at(2026, 12, 1, 9, 0, 0, 0);
    assert_int_equal(mb_shiftlog_open(&c, t, &log, err), 0);
    mb_shiftlog_part_rec r;
    fill_part(&r, 1);
    assert_int_equal(mb_shiftlog_part(log, t + 1, &r, err), 0);
    int fd = mb_shiftlog_fd(log);
    int full = open("/dev/full", O_WRONLY);
    assert_true(fd >= 0 && full >= 0);
    assert_int_equal(dup2(full, fd), fd);
    close(full);
    double t0 = mono_ms();
    for (uint32_t s = 2; s <= 1001; s++) {
        fill_part(&r, s);
        int rc = mb_shiftlog_part(log, t + s, &r, err);
        if (rc != MB_EIO)
            fail_msg("write on a full disk returned %d", rc);
    }
    double dt = mono_ms() - t0;
    assert_non_null(strstr(err, "No space left"));
    assert_int_equal(mb_shiftlog_problem(log), 1);
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    assert_int_equal(st.lost, 1000);
    /* Counting goes on: the PLC sees the parts inspected. */
    mb_shiftlog_counts k;
    mb_shiftlog_get_counts(log, &k);
    assert_int_equal(k.parts, 1001);
    /* Never blocking: 1000 failed records well under a second (a few ms). */
    if (dt > 500)
        fail_msg("1000 failed records took %.1f ms", dt);
    /* Space again. */
    int back = open(mb_shiftlog_path(log), O_WRONLY | O_APPEND);
    assert_true(back >= 0);
    assert_int_equal(dup2(back, fd), fd);
    close(back);
    fill_part(&r, 1002);
    assert_int_equal(mb_shiftlog_part(log, t + 5000, &r, err), 0);
    assert_int_equal(mb_shiftlog_problem(log), 0);
    char path[256];
    snprintf(path, sizeof path, "%s", mb_shiftlog_path(log));
    mb_shiftlog_close(log);
    int n, bad;
    cJSON **lines = read_lines(path, &n, &bad);
    assert_int_equal(n, 4); /* start, part 1, part 1002, restored */
    assert_int_equal(bad, 0);
    assert_true(num_of(lines[2], "seq") == 1002);
    assert_header(lines[3], "fault");
    assert_string_equal(str_of(lines[3], "source"), "log");
    assert_string_equal(str_of(lines[3], "state"), "restored");
    assert_non_null(strstr(str_of(lines[3], "text"), "1000 records"));
    assert_true(fabs(num_of(lines[3], "duration_s") - 4.998) < 1e-9);
    free_lines(lines, n);
}

/* A file size limit cuts a record in the middle (a short write): the log
   flags the problem, and the next record starts on a line of its own. */
static void test_short_write(void **state)
{
    char folder[128];
    snprintf(folder, sizeof folder, "%s/short", scratch);
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN];
    int64_t t = ms_at(2026, 12, 1, 10, 0, 0, 0);
    assert_int_equal(mb_shiftlog_open(&c, t, &log, err), 0);
    struct stat st0;
    assert_int_equal(stat(mb_shiftlog_path(log), &st0), 0);
    signal(SIGXFSZ, SIG_IGN);
    struct rlimit old, lim;
    getrlimit(RLIMIT_FSIZE, &old);
    lim = old;
    lim.rlim_cur = (rlim_t)st0.st_size + 100; /* part of one record */
    assert_int_equal(setrlimit(RLIMIT_FSIZE, &lim), 0);
    mb_shiftlog_part_rec r;
    fill_part(&r, 1);
    int rc = mb_shiftlog_part(log, t + 1, &r, err);
    fill_part(&r, 2);
    int rc2 = mb_shiftlog_part(log, t + 2, &r, err);
    setrlimit(RLIMIT_FSIZE, &old);
    assert_int_equal(rc, MB_EIO);
    assert_int_equal(rc2, MB_EIO);
    assert_int_equal(mb_shiftlog_problem(log), 1);
    fill_part(&r, 3);
    assert_int_equal(mb_shiftlog_part(log, t + 3, &r, err), 0);
    assert_int_equal(mb_shiftlog_problem(log), 0);
    char path[256];
    snprintf(path, sizeof path, "%s", mb_shiftlog_path(log));
    mb_shiftlog_close(log);
    int n, bad;
    cJSON **lines = read_lines(path, &n, &bad);
    /* start, the cut record (its own line), part 3, restored. */
    assert_int_equal(n, 4);
    assert_int_equal(bad, 1);
    assert_null(lines[1]);
    assert_true(num_of(lines[2], "seq") == 3);
    assert_string_equal(str_of(lines[3], "state"), "restored");
    free_lines(lines, n);
}

/* The folder cannot be made (its parent is missing): open succeeds with
   the flag up; once the folder exists the log opens it by itself, at most
   once a second. */
static void test_missing_folder(void **state)
{
    char parent[128], folder[160];
    snprintf(parent, sizeof parent, "%s/later", scratch);
    snprintf(folder, sizeof folder, "%s/logs", parent);
    mb_shift_calendar cal = calendar3();
    mb_shiftlog_config c;
    config(&c, folder, &cal);
    mb_shiftlog *log = NULL;
    char err[MB_ERR_LEN] = "";
    int64_t t = ms_at(2026, 12, 1, 11, 0, 0, 0);
    assert_int_equal(mb_shiftlog_open(&c, t, &log, err), 0);
    assert_int_equal(mb_shiftlog_problem(log), 1);
    assert_non_null(strstr(err, folder));
    mb_shiftlog_part_rec r;
    fill_part(&r, 1);
    assert_int_equal(mb_shiftlog_part(log, t + 10, &r, err), MB_EIO);
    assert_int_equal(mkdir(parent, 0755), 0);
    fill_part(&r, 2);
    /* Within the retry interval: still lost. */
    assert_int_equal(mb_shiftlog_part(log, t + 500, &r, err), MB_EIO);
    fill_part(&r, 3);
    assert_int_equal(mb_shiftlog_part(log, t + 1100, &r, err), 0);
    assert_int_equal(mb_shiftlog_problem(log), 0);
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    assert_int_equal(st.lost, 2);
    mb_shiftlog_close(log);
}

static void test_rejects(void **state)
{
    char folder[128];
    snprintf(folder, sizeof folder, "%s/rej", scratch);
    mb_rejects *rj = NULL;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_rejects_open(folder, 1, &rj, err), 0);
    assert_true(mb_rejects_bytes(rj) == 0);
    static char blob[300 * 1024];
    memset(blob, 7, sizeof blob);
    char paths[8][512];
    int64_t t = ms_at(2026, 12, 1, 23, 59, 59, 0);
    int deleted = 0;
    for (int i = 0; i < 8; i++) {
        /* Across midnight: images 0-1 on 12-01, the rest on 12-02. */
        assert_int_equal(mb_rejects_path(rj, t + 600 * i, (uint32_t)(100 + i),
                                         paths[i], sizeof paths[i], err),
                         0);
        assert_int_equal(mb_file_write_atomic(paths[i], blob, sizeof blob, err),
                         0);
        int rc = mb_rejects_added(rj, paths[i], err);
        assert_true(rc >= 0);
        deleted += rc;
        assert_true(mb_rejects_bytes(rj) <= 1024 * 1024);
    }
    char want[256];
    snprintf(want, sizeof want, "%s/2026-12-01/235959.000_100.png", folder);
    assert_string_equal(paths[0], want);
    snprintf(want, sizeof want, "%s/2026-12-02/000000.200_102.png", folder);
    assert_string_equal(paths[2], want);
    /* 3 images fit under 1 MiB; each time a 4th arrives the oldest go down
       to 90%: 8 images, 3 left. */
    assert_int_equal(deleted, 5);
    assert_true(mb_rejects_deleted(rj) == 5);
    for (int i = 0; i < 8; i++)
        assert_int_equal(access(paths[i], F_OK) == 0, i >= 5);
    /* The emptied day folder is gone. */
    snprintf(want, sizeof want, "%s/2026-12-01", folder);
    assert_int_not_equal(access(want, F_OK), 0);
    mb_rejects_close(rj);
    /* Reopening measures what is there. */
    assert_int_equal(mb_rejects_open(folder, 1, &rj, err), 0);
    assert_true(mb_rejects_bytes(rj) == 3 * sizeof blob);
    mb_rejects_close(rj);
    /* Cap 0: saving is off. */
    assert_int_equal(mb_rejects_open(folder, 0, &rj, err), 0);
    assert_int_equal(mb_rejects_path(rj, t, 1, want, sizeof want, err),
                     MB_ERANGE);
    mb_rejects_close(rj);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_records),
        cmocka_unit_test(test_torn_line),
        cmocka_unit_test(test_shift_switch),
        cmocka_unit_test(test_retention),
        cmocka_unit_test(test_disk_full),
        cmocka_unit_test(test_short_write),
        cmocka_unit_test(test_missing_folder),
        cmocka_unit_test(test_rejects),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
