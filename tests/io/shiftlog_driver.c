/*
 * tests/io/shiftlog_driver.c - writes a shift log of N generated parts for
 * ref_shiftlog.py, which reads it back with Python's json module.
 *
 *   shiftlog_driver FOLDER N
 *
 * Time zone UTC; shifts early 06:00, late 14:00, night 22:00; the first
 * part at 2026-12-01 13:50:00.000, one every 250 ms, so the run crosses
 * the 14:00 boundary. For every part it prints one line to stdout:
 *   seq verdict code x t2 size_mm cycle_ms n_reasons n_gauges text_hex
 * (%.17g numbers, "nan" for null; text_hex the first reason's text as
 * hex bytes, "-" when there is none), which the script compares with the
 * log.
 */
#include "error.h"
#include "shiftlog.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static uint64_t rng = 88172645463325252ull;

/* xorshift64 (Marsaglia 2003). */
static uint64_t next_u64(void)
{
    rng ^= rng << 13;
    rng ^= rng >> 7;
    rng ^= rng << 17;
    return rng;
}

static double uniform(void)
{
    return (double)(next_u64() >> 11) / 9007199254740992.0;
}

static const char *const texts[] = {
    "nick 0.3 mm deep at 87\xc2\xb0 on the outer edge",
    "flash \"outward\" 0.2 mm; back\\slash",
    "line\nbreak and\ttab and \x01 control",
    "Gr\xc3\xb6\xc3\x9f" "e 12 \xc2\xb5m, \xe2\x80\x94 dash, \xf0\x9f\x94\xa7 tool",
    /* longer than MB_SHIFTLOG_TEXT_MAX: cut at a UTF-8 boundary */
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "x\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"
    "\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9\xc3\xa9"};
static const char *const names[] = {"nick", "flash", "gap", "size"};
static const int codes[] = {9, 10, 11, 5};

static void print_num(double v)
{
    if (isfinite(v))
        printf(" %.17g", v);
    else
        printf(" nan");
}

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: shiftlog_driver FOLDER N\n");
        return 2;
    }
    setenv("TZ", "UTC", 1);
    tzset();
    int n = atoi(argv[2]);
    mb_shift_def d[3] = {{"early", 360}, {"late", 840}, {"night", 1320}};
    mb_shift_calendar cal;
    char err[MB_ERR_LEN];
    if (mb_shift_calendar_init(&cal, d, 3, "shifts", err) < 0) {
        fprintf(stderr, "%s\n", err);
        return 1;
    }
    /* fdatasync once a minute of log time: the check is about content. */
    mb_shiftlog_config c = {argv[1], "ref-station", &cal, 60, 0, 1,
                            "ring.json", "crc32:00c0ffee"};
    struct tm tm = {0};
    tm.tm_year = 126;
    tm.tm_mon = 11;
    tm.tm_mday = 1;
    tm.tm_hour = 13;
    tm.tm_min = 50;
    int64_t t0 = (int64_t)timegm(&tm) * 1000;
    mb_shiftlog *log = NULL;
    if (mb_shiftlog_open(&c, t0, &log, err) < 0 || mb_shiftlog_problem(log)) {
        fprintf(stderr, "%s\n", err);
        return 1;
    }
    mb_shiftlog_part_rec r;
    for (int i = 1; i <= n; i++) {
        memset(&r, 0, sizeof r);
        r.seq = (uint32_t)i;
        r.frame_seq = (uint64_t)i * 2u + 5u;
        r.slot = 1;
        r.part = "RG-4030";
        r.model_checksum = "crc32:00c0ffee";
        double u = uniform();
        r.verdict = u < 0.8 ? MB_SHIFTLOG_PASS
                    : u < 0.97 ? MB_SHIFTLOG_REJECT
                               : MB_SHIFTLOG_FAULT;
        if (r.verdict != MB_SHIFTLOG_PASS) {
            r.n_reasons = 1 + (int)(next_u64() % 3);
            for (int k = 0; k < r.n_reasons; k++) {
                int j = (int)(next_u64() % 4);
                mb_shiftlog_reason *q = &r.reasons[k];
                q->code = codes[j];
                q->name = names[j];
                q->text = texts[next_u64() % 5];
                q->value = uniform() * 2;
                q->limit = 0.25;
                q->located = j < 3;
                q->outline = (int)(next_u64() % 2);
                q->position = uniform();
                q->angle_deg = uniform() * 360 - 180;
                q->depth_mm = uniform() < 0.1 ? NAN : uniform();
                q->extent_mm = uniform() * 3;
            }
        }
        r.has_pose = r.verdict != MB_SHIFTLOG_FAULT;
        r.x = uniform() * 1280;
        r.y = uniform() * 1024;
        r.angle_deg = uniform() * 360 - 180;
        r.scale = 0.9 + 0.2 * uniform();
        r.n_modes = (int)(next_u64() % 9);
        for (int k = 0; k < r.n_modes; k++)
            r.modes[k] = uniform() * 8 - 4;
        r.t2 = r.verdict == MB_SHIFTLOG_FAULT ? NAN : uniform() * 30;
        r.residual = uniform() * 1e-3;
        r.size_mm = i % 7 == 0 ? NAN : 40 + uniform();
        r.n_gauges = (int)(next_u64() % 4);
        static const char *const gn[] = {"bore", "od", "width \"w\""};
        for (int k = 0; k < r.n_gauges; k++)
            r.gauges[k] = (mb_shiftlog_gauge){gn[k], 30 + uniform(), 30.5,
                                              -0.2, 0.2, (int)(next_u64() % 2)};
        r.cycle_ms = 2 + uniform() * 5;
        r.image = r.verdict == MB_SHIFTLOG_REJECT ? "rejects/a b.png" : NULL;
        if (mb_shiftlog_part(log, t0 + (int64_t)i * 250, &r, err) < 0) {
            fprintf(stderr, "part %d: %s\n", i, err);
            return 1;
        }
        printf("%d %d %d", i, r.verdict, r.n_reasons ? r.reasons[0].code : 0);
        print_num(r.has_pose ? r.x : NAN);
        print_num(r.t2);
        print_num(r.size_mm);
        print_num(r.cycle_ms);
        printf(" %d %d ", r.n_reasons, r.n_gauges);
        if (r.n_reasons) {
            for (const unsigned char *p =
                     (const unsigned char *)r.reasons[0].text;
                 *p; p++)
                printf("%02x", *p);
        } else {
            printf("-");
        }
        printf("\n");
    }
    /* End the late shift so both files carry a summary. */
    mb_shiftlog_tick(log, t0 + (int64_t)n * 250 + 8 * 3600 * 1000);
    mb_shiftlog_stats st;
    mb_shiftlog_get_stats(log, &st);
    mb_shiftlog_close(log);
    if (st.lost || st.problem) {
        fprintf(stderr, "records lost: %llu\n", (unsigned long long)st.lost);
        return 1;
    }
    return 0;
}
