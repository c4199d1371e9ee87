/*
 * tests/io/test_shiftlog_read.c - the shift-log reader (io/shiftlog_read.h):
 * the scanner against cJSON on random generated lines (same records out,
 * bit for bit), torn and invalid lines, newer versions, long lines and
 * lines across the read buffer's boundary, and numbers against strtod.
 */
#include "error.h"
#include "shiftlog_read.h"

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>

static uint64_t rs = 12345;
static uint64_t rnd(void)
{
    uint64_t z = (rs += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
}
static int rint_(int n) { return (int)(rnd() % (uint64_t)n); }
static double runit(void) { return (double)(rnd() >> 11) / 9007199254740992.0; }

typedef struct {
    char *p;
    size_t n, cap;
} sbuf;

static void put(sbuf *b, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    char tmp[512];
    int k = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    assert_true(k >= 0 && (size_t)k < sizeof tmp);
    if (b->n + (size_t)k + 1 > b->cap) {
        b->cap = 2 * (b->n + (size_t)k + 1);
        b->p = realloc(b->p, b->cap);
        assert_non_null(b->p);
    }
    memcpy(b->p + b->n, tmp, (size_t)k + 1);
    b->n += (size_t)k;
}

/* A random number in one of the forms a writer may produce. */
static void rnum(sbuf *b)
{
    double v = (runit() - 0.5) * pow(10.0, rint_(12) - 5);
    switch (rint_(7)) {
    case 0: put(b, "%.17g", v); break;
    case 1: put(b, "%.6g", v); break;
    case 2: put(b, "%.3f", v); break;
    case 3: put(b, "%d", rint_(2000) - 1000); break;
    case 4: put(b, "%.15e", v * 1e-200); break;
    case 5: put(b, "%.16E", v * 1e250); break;
    default: put(b, "%.17g", v * 1e-30); break;
    }
}

static void rstr(sbuf *b)
{
    static const char *const pieces[] = {
        "abc", "\\\"", "\\\\", "\\n", "\\u00e9", "\\u20ac", "\\ud83d\\ude00",
        "caf\xc3\xa9", "/", "\\/", " ", "x_y-z", "\\t", "0123456789"};
    put(b, "\"");
    int n = rint_(6);
    if (rint_(10) == 0)
        n = 60; /* longer than most fields: cut at a character boundary */
    for (int i = 0; i < n; i++)
        put(b, "%s", pieces[rint_(14)]);
    put(b, "\"");
}

static void rjunk(sbuf *b, int depth)
{
    switch (rint_(depth > 2 ? 4 : 6)) {
    case 0: rnum(b); break;
    case 1: rstr(b); break;
    case 2: put(b, rint_(2) ? "true" : "null"); break;
    case 3: put(b, "false"); break;
    case 4:
        put(b, "[");
        for (int i = 0, n = rint_(4); i < n; i++) {
            if (i)
                put(b, ", ");
            rjunk(b, depth + 1);
        }
        put(b, "]");
        break;
    default:
        put(b, "{");
        for (int i = 0, n = rint_(4); i < n; i++) {
            put(b, "%s\"k%d\" : ", i ? "," : "", i);
            rjunk(b, depth + 1);
        }
        put(b, "}");
        break;
    }
}

static const char *const num_keys[] = {
    "t2", "residual", "size_mm", "cycle_ms", "ewma", "target", "lcl", "ucl",
    "duration_s", "yield", "seq", "frame_seq", "slot", "code", "parts",
    "passes", "rejects", "faults", "drift_signals", "since_seq", "parts_since"};
static const char *const str_keys[] = {
    "time", "shift", "date", "station", "model", "part", "model_checksum",
    "reason", "image", "chart", "state", "direction", "since_time", "source",
    "text", "event", "path"};

static void robject_entry(sbuf *b, int gauge)
{
    static const char *const rk[] = {"code", "name", "text", "value", "limit",
                                     "outline", "position", "angle_deg",
                                     "depth_mm", "extent_mm", "other"};
    static const char *const gk[] = {"name", "value_mm", "nominal_mm",
                                     "tol_lo_mm", "tol_hi_mm", "ok", "other"};
    put(b, "{");
    int n = rint_(8);
    for (int i = 0; i < n; i++) {
        const char *k = gauge ? gk[rint_(7)] : rk[rint_(11)];
        put(b, "%s\"%s\":", i ? "," : "", k);
        if (!strcmp(k, "name") || !strcmp(k, "text"))
            rstr(b);
        else if (!strcmp(k, "ok"))
            put(b, rint_(2) ? "true" : "false");
        else if (!strcmp(k, "other"))
            rjunk(b, 2);
        else if (rint_(8) == 0)
            put(b, "null");
        else
            rnum(b);
    }
    put(b, "}");
}

/* One random line: the header members and a random selection of known and
   unknown members in random order, with random white space. */
static void rline(sbuf *b)
{
    b->n = 0;
    put(b, " {");
    int first = 1;
    int n = 4 + rint_(30);
    int put_format = rint_(40) != 0, put_version = rint_(40) != 0;
    int put_kind = rint_(40) != 0;
    int pos_f = rint_(n), pos_v = rint_(n), pos_k = rint_(n);
    static const char *const kinds[] = {"part", "drift", "fault", "model",
                                        "shift-start", "shift-end", "later"};
    for (int i = 0; i < n; i++) {
        const char *sep = first ? "" : (rint_(3) ? "," : " ,\n ");
        first = 0;
        if (i == pos_f && put_format) {
            put(b, "%s\"format\":\"%s\"", sep,
                rint_(30) ? MB_SHIFTLOG_FORMAT : "other-log");
            continue;
        }
        if (i == pos_v && put_version) {
            put(b, "%s\"version\" : %d", sep, rint_(20) ? 1 : 2);
            continue;
        }
        if (i == pos_k && put_kind) {
            put(b, "%s\"kind\":\"%s\"", sep, kinds[rint_(7)]);
            continue;
        }
        int what = rint_(10);
        if (what < 3) {
            put(b, "%s\"%s\":", sep, num_keys[rint_(21)]);
            if (rint_(10) == 0)
                put(b, "null");
            else if (rint_(20) == 0)
                rstr(b); /* mistyped: ignored */
            else
                rnum(b);
        } else if (what < 6) {
            put(b, "%s\"%s\":", sep, str_keys[rint_(17)]);
            if (rint_(10) == 0)
                put(b, "null");
            else
                rstr(b);
        } else if (what == 6) {
            int g = rint_(2);
            put(b, "%s\"%s\":[", sep, g ? "gauges" : "reasons");
            for (int k = 0, m = rint_(g ? 20 : 11); k < m; k++) {
                if (k)
                    put(b, ",");
                if (rint_(10) == 0)
                    rjunk(b, 2);
                else
                    robject_entry(b, g);
            }
            put(b, "]");
        } else if (what == 7) {
            put(b, "%s\"modes\":[", sep);
            for (int k = 0, m = rint_(11); k < m; k++) {
                if (k)
                    put(b, ",");
                if (rint_(10) == 0)
                    put(b, "null");
                else
                    rnum(b);
            }
            put(b, "]");
        } else if (what == 8) {
            put(b, "%s\"pose\":", sep);
            if (rint_(4) == 0) {
                put(b, "null");
            } else {
                put(b, "{\"x\":");
                rnum(b);
                put(b, ",\"angle\":");
                rnum(b);
                put(b, ",\"junk\":");
                rjunk(b, 2);
                put(b, ",\"scale\":1}");
            }
        } else {
            put(b, "%s\"unknown_%d\":", sep, rint_(5));
            rjunk(b, 0);
        }
    }
    put(b, "}\t");
}

static void test_scan_equals_cjson(void **state)
{
    (void)state;
    sbuf b = {0};
    mb_slog_record *a = malloc(sizeof *a), *c = malloc(sizeof *c);
    assert_non_null(a);
    assert_non_null(c);
    int ok = 0, bad = 0, newer = 0;
    for (int it = 0; it < 20000; it++) {
        rline(&b);
        memset(a, 0, sizeof *a);
        memset(c, 0, sizeof *c);
        int ra = mb_slog_parse_line(b.p, b.n, MB_SLOG_PARSER_SCAN, a, NULL);
        int rc = mb_slog_parse_line(b.p, b.n, MB_SLOG_PARSER_CJSON, c, NULL);
        if (ra != rc || memcmp(a, c, sizeof *a))
            fail_msg("scanner and cJSON differ (%d vs %d) on: %s", ra, rc, b.p);
        ok += ra == 0;
        bad += ra == MB_EFORMAT;
        newer += ra == MB_EVERSION;
        /* every strict prefix is invalid for both */
        size_t cut = 1 + (size_t)rint_((int)b.n - 3);
        ra = mb_slog_parse_line(b.p, cut, MB_SLOG_PARSER_SCAN, a, NULL);
        rc = mb_slog_parse_line(b.p, cut, MB_SLOG_PARSER_CJSON, c, NULL);
        assert_int_equal(ra, MB_EFORMAT);
        assert_int_equal(rc, MB_EFORMAT);
    }
    /* all three outcomes were exercised */
    assert_true(ok > 10000);
    assert_true(bad > 500);
    assert_true(newer > 200);
    free(a);
    free(c);
    free(b.p);
}

static void test_numbers_match_strtod(void **state)
{
    (void)state;
    mb_slog_record *r = malloc(sizeof *r);
    assert_non_null(r);
    char line[256];
    for (int it = 0; it < 200000; it++) {
        double v;
        uint64_t bits = rnd();
        memcpy(&v, &bits, sizeof v);
        if (!isfinite(v))
            continue;
        char num[64];
        switch (it % 4) {
        case 0: snprintf(num, sizeof num, "%.17g", v); break;
        case 1: snprintf(num, sizeof num, "%.*g", 1 + rint_(17), (runit() - 0.5) * 1e4); break;
        case 2: snprintf(num, sizeof num, "%.*f", rint_(9), (runit() - 0.5) * 1e3); break;
        default: snprintf(num, sizeof num, "%.16e", (runit() - 0.5) * pow(10, rint_(60) - 30)); break;
        }
        snprintf(line, sizeof line,
                 "{\"format\":\"modeband-shiftlog\",\"version\":1,\"kind\":"
                 "\"part\",\"t2\":%s}", num);
        assert_int_equal(mb_slog_parse_line(line, strlen(line), MB_SLOG_PARSER_SCAN,
                                            r, NULL), 0);
        double want = strtod(num, NULL);
        if (memcmp(&want, &r->t2, sizeof want))
            fail_msg("%s read as %.17g, strtod gives %.17g", num, r->t2, want);
    }
    free(r);
}

typedef struct {
    long parts, drift, other;
    double sum_t2;
} counts;

static int count_fn(const mb_slog_record *rec, void *user)
{
    counts *c = user;
    if (rec->kind == MB_SLOG_PART) {
        c->parts++;
        c->sum_t2 += rec->t2;
    } else if (rec->kind == MB_SLOG_DRIFT) {
        c->drift++;
    } else {
        c->other++;
    }
    return 0;
}

static void test_file_bad_lines(void **state)
{
    (void)state;
    char path[] = "/tmp/mb_test_slog_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    FILE *f = fdopen(fd, "w");
    assert_non_null(f);
    const char *hdr = "{\"format\":\"modeband-shiftlog\",\"version\":1,";
    fprintf(f, "%s\"kind\":\"shift-start\",\"time\":\"2026-12-01T06:00:00.000+01:00\"}\n", hdr);
    fprintf(f, "\n   \n");                        /* 2 blank */
    fprintf(f, "{\"format\":\"modeband-shiftlog\",\"version\":1,\"kind\":\"part\",\"t2\":1.5\n"); /* invalid */
    fprintf(f, "{\"format\":\"modeband-shiftlog\",\"version\":3,\"kind\":\"part\"}\n"); /* newer */
    fprintf(f, "not json at all\n");              /* invalid */
    /* a line longer than MB_SLOG_MAX_LINE: invalid, skipped */
    fprintf(f, "%s\"kind\":\"part\",\"text\":\"", hdr);
    for (int i = 0; i < MB_SLOG_MAX_LINE / 10 + 10; i++)
        fputs("0123456789", f);
    fprintf(f, "\"}\n");
    /* enough parts to cross the 1 MiB read buffer several times */
    long n = 40000;
    for (long i = 0; i < n; i++)
        fprintf(f, "%s\"kind\":\"part\",\"t2\":%ld,\"pad\":\"%040ld\"}\n", hdr,
                i % 7, i);
    fprintf(f, "%s\"kind\":\"drift\",\"chart\":\"gauge:od\"}\n", hdr);
    fprintf(f, "%s\"kind\":\"part\",\"t2\":1", hdr); /* torn, no newline */
    fclose(f);

    for (int p = 0; p < 2; p++) {
        counts c = {0};
        mb_slog_stats st;
        char err[MB_ERR_LEN];
        assert_int_equal(mb_slog_read_file(path, p ? MB_SLOG_PARSER_CJSON
                                                   : MB_SLOG_PARSER_SCAN,
                                           count_fn, &c, &st, err), 0);
        assert_int_equal(c.parts, n);
        assert_int_equal(c.drift, 1);
        assert_int_equal(c.other, 1);
        double want = 0;
        for (long i = 0; i < n; i++)
            want += (double)(i % 7);
        assert_true(c.sum_t2 == want);
        assert_int_equal(st.records, n + 2);
        assert_int_equal(st.blank, 2);
        assert_int_equal(st.invalid, 3);
        assert_int_equal(st.first_invalid, 4);
        assert_int_equal(st.newer, 1);
        assert_int_equal(st.newest_version, 3);
        assert_int_equal(st.torn, 1);
        assert_int_equal(st.lines, n + 9);
    }
    char err[MB_ERR_LEN];
    counts c = {0};
    assert_int_equal(mb_slog_read_file("/nonexistent/x.jsonl", MB_SLOG_PARSER_SCAN,
                                       count_fn, &c, NULL, err),
                     MB_ENOTFOUND);
    assert_non_null(strstr(err, "/nonexistent/x.jsonl"));
    unlink(path);
}

static void test_time(void **state)
{
    (void)state;
    double u, l;
    /* 2026-12-01T06:00:00+01:00 is 05:00 UTC; 2026-12-01 is day 20788
       since 1970-01-01 (checked: date -u -d 2026-12-01 +%s = 1796083200) */
    assert_int_equal(mb_slog_parse_time("2026-12-01T06:00:00.125+01:00", &u, &l), 0);
    assert_true(fabs(u - (1796083200.0 + 5 * 3600 + 0.125)) < 1e-6);
    assert_true(fabs(l - (1796083200.0 + 6 * 3600 + 0.125)) < 1e-6);
    assert_int_equal(mb_slog_parse_time("2000-02-29 23:59", &u, &l), 0);
    assert_true(u == 951868740.0); /* date -u -d '2000-02-29 23:59' +%s */
    assert_int_equal(mb_slog_parse_time("2026-13-01T00:00", &u, &l), MB_EFORMAT);
    assert_int_equal(mb_slog_parse_time("2026-12-01T06:00:00+01:00x", &u, &l), MB_EFORMAT);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_scan_equals_cjson),
        cmocka_unit_test(test_numbers_match_strtod),
        cmocka_unit_test(test_file_bad_lines),
        cmocka_unit_test(test_time),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
