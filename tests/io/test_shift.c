/*
 * tests/io/test_shift.c - the shift calendar (io/shift.h): midnight
 * crossing, boundaries exactly at a start, both DST jumps of
 * Europe/Berlin (EU rule: last Sunday of March 01:00 UTC forward, last
 * Sunday of October 01:00 UTC back; 2026: 29 March and 25 October, from
 * the tz database as installed by Debian's tzdata) and invariants over a
 * year of random instants.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "shift.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

static void set_tz(const char *tz)
{
    setenv("TZ", tz, 1);
    tzset();
}

/* Instant of a UTC date and time. */
static time_t utc(int y, int mo, int d, int h, int mi, int s)
{
    struct tm tm = {0};
    tm.tm_year = y - 1900;
    tm.tm_mon = mo - 1;
    tm.tm_mday = d;
    tm.tm_hour = h;
    tm.tm_min = mi;
    tm.tm_sec = s;
    return timegm(&tm);
}

static void make_cal(mb_shift_calendar *cal, int n, const char *const *names,
                     const int *starts)
{
    mb_shift_def defs[MB_SHIFT_MAX];
    for (int i = 0; i < n; i++) {
        snprintf(defs[i].name, sizeof defs[i].name, "%s", names[i]);
        defs[i].start_min = starts[i];
    }
    char err[MB_ERR_LEN];
    int rc = mb_shift_calendar_init(cal, defs, n, "shifts", err);
    if (rc != 0)
        fail_msg("calendar refused: %s", err);
}

static void expect_at(const mb_shift_calendar *cal, time_t t, const char *name,
                      const char *date, time_t start, time_t next)
{
    mb_shift_now now;
    assert_int_equal(mb_shift_at(cal, t, &now), 0);
    if (strcmp(now.name, name) != 0 || strcmp(now.date, date) != 0 ||
        now.start != start || now.next != next)
        fail_msg("at %lld: got %s %s start %lld next %lld; expected %s %s "
                 "start %lld next %lld",
                 (long long)t, now.name, now.date, (long long)now.start,
                 (long long)now.next, name, date, (long long)start,
                 (long long)next);
}

static void test_parse(void **state)
{
    int m = -1;
    assert_int_equal(mb_shift_parse_hhmm("00:00", &m), 0);
    assert_int_equal(m, 0);
    assert_int_equal(mb_shift_parse_hhmm("23:59", &m), 0);
    assert_int_equal(m, 1439);
    assert_int_equal(mb_shift_parse_hhmm("06:30", &m), 0);
    assert_int_equal(m, 390);
    const char *bad[] = {"24:00", "6:30", "06:60", "06-30", "06:300", "",
                         "ab:cd", "06:3", " 6:30"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        if (mb_shift_parse_hhmm(bad[i], &m) != MB_EFORMAT)
            fail_msg("\"%s\" was accepted", bad[i]);
    assert_true(mb_shift_name_ok("night-2_b"));
    assert_false(mb_shift_name_ok("night 2"));
    assert_false(mb_shift_name_ok(""));
    assert_false(mb_shift_name_ok("a/b"));
}

static void test_init_errors(void **state)
{
    mb_shift_calendar cal;
    mb_shift_def d[3] = {{"a", 360}, {"b", 840}, {"a", 1320}};
    char err[MB_ERR_LEN];
    assert_int_equal(mb_shift_calendar_init(&cal, d, 3, "shifts", err),
                     MB_EINVAL);
    assert_non_null(strstr(err, "shifts[2].name"));
    snprintf(d[2].name, sizeof d[2].name, "c");
    d[2].start_min = 360;
    assert_int_equal(mb_shift_calendar_init(&cal, d, 3, "shifts", err),
                     MB_EINVAL);
    assert_non_null(strstr(err, "shifts[2].start"));
    d[2].start_min = 1440;
    assert_int_equal(mb_shift_calendar_init(&cal, d, 3, "shifts", err),
                     MB_EINVAL);
    assert_int_equal(mb_shift_calendar_init(&cal, d, 0, "shifts", err),
                     MB_EINVAL);
    d[2].start_min = 1320;
    assert_int_equal(mb_shift_calendar_init(&cal, d, 3, "shifts", err), 0);
}

/* Three shifts in UTC: the night one crosses midnight and keeps its date. */
static void test_midnight_utc(void **state)
{
    set_tz("UTC");
    mb_shift_calendar cal;
    const char *names[] = {"night", "early", "late"}; /* unsorted on purpose */
    const int starts[] = {22 * 60, 6 * 60, 14 * 60};
    make_cal(&cal, 3, names, starts);
    assert_string_equal(cal.shifts[0].name, "early");
    time_t n30 = utc(2026, 11, 30, 22, 0, 0), e1 = utc(2026, 12, 1, 6, 0, 0),
           l1 = utc(2026, 12, 1, 14, 0, 0), n1 = utc(2026, 12, 1, 22, 0, 0),
           e2 = utc(2026, 12, 2, 6, 0, 0);
    expect_at(&cal, e1 - 1, "night", "2026-11-30", n30, e1);
    expect_at(&cal, e1, "early", "2026-12-01", e1, l1); /* exactly at start */
    expect_at(&cal, l1 - 1, "early", "2026-12-01", e1, l1);
    expect_at(&cal, l1, "late", "2026-12-01", l1, n1);
    expect_at(&cal, n1, "night", "2026-12-01", n1, e2);
    expect_at(&cal, utc(2026, 12, 1, 23, 59, 59), "night", "2026-12-01", n1,
              e2);
    expect_at(&cal, utc(2026, 12, 2, 0, 0, 0), "night", "2026-12-01", n1, e2);
    /* Across a month and a year end. */
    expect_at(&cal, utc(2027, 1, 1, 3, 0, 0), "night", "2026-12-31",
              utc(2026, 12, 31, 22, 0, 0), utc(2027, 1, 1, 6, 0, 0));

    /* One shift: 24 hours, dated by its start. */
    const char *one[] = {"all"};
    const int s1[] = {6 * 60};
    make_cal(&cal, 1, one, s1);
    expect_at(&cal, utc(2026, 12, 1, 5, 0, 0), "all", "2026-11-30",
              utc(2026, 11, 30, 6, 0, 0), e1);
    expect_at(&cal, e1, "all", "2026-12-01", e1, e2);
}

/* A zone east of UTC: the local date, not the UTC date, names the shift. */
static void test_local_date(void **state)
{
    set_tz("Asia/Tokyo"); /* UTC+9, no DST */
    mb_shift_calendar cal;
    const char *names[] = {"day", "night"};
    const int starts[] = {8 * 60, 20 * 60};
    make_cal(&cal, 2, names, starts);
    /* 2026-12-01 23:00 UTC = 2026-12-02 08:00 JST. */
    time_t t = utc(2026, 12, 1, 23, 0, 0);
    expect_at(&cal, t, "day", "2026-12-02", t, utc(2026, 12, 2, 11, 0, 0));
    expect_at(&cal, t - 1, "night", "2026-12-01", utc(2026, 12, 1, 11, 0, 0),
              t);
}

static void test_dst_berlin(void **state)
{
    set_tz("Europe/Berlin");
    mb_shift_calendar cal;
    const char *names[] = {"a", "b", "night"};
    const int starts[] = {2 * 60 + 30, 14 * 60, 22 * 60};
    make_cal(&cal, 3, names, starts);

    /* Spring forward, 2026-03-29: 02:00 CET -> 03:00 CEST (01:00 UTC).
       02:30 does not exist: "a" starts at the jump, 03:00 CEST. */
    time_t jump = utc(2026, 3, 29, 1, 0, 0);
    time_t n28 = utc(2026, 3, 28, 21, 0, 0); /* 22:00 CET */
    time_t b29 = utc(2026, 3, 29, 12, 0, 0); /* 14:00 CEST */
    expect_at(&cal, jump - 1, "night", "2026-03-28", n28, jump);
    expect_at(&cal, jump, "a", "2026-03-29", jump, b29);
    time_t sa;
    assert_int_equal(mb_shift_start_on(&cal, 0, 2026, 3, 29, &sa), 0);
    assert_true(sa == jump);
    /* The night shift spanning the jump is an hour shorter: 22:00 CET to
       03:00 CEST is 4 h, against 4.5 h (22:00 to 02:30) on other days. */
    assert_int_equal((int)(jump - n28), 4 * 3600);

    /* Fall back, 2026-10-25: 03:00 CEST -> 02:00 CET (01:00 UTC). 02:30
       happens twice: "a" starts at the first, 02:30 CEST = 00:30 UTC. */
    time_t a25 = utc(2026, 10, 25, 0, 30, 0);
    time_t n24 = utc(2026, 10, 24, 20, 0, 0); /* 22:00 CEST */
    time_t b25 = utc(2026, 10, 25, 13, 0, 0); /* 14:00 CET */
    expect_at(&cal, a25 - 1, "night", "2026-10-24", n24, a25);
    expect_at(&cal, a25, "a", "2026-10-25", a25, b25);
    /* The second 02:30 (CET) is inside shift "a", not a new start. */
    expect_at(&cal, a25 + 3600, "a", "2026-10-25", a25, b25);
    /* "a" on that day is an hour longer: 12.5 h instead of 11.5 h. */
    assert_int_equal((int)(b25 - a25), 12 * 3600 + 1800);

    /* Two starts inside the gap land on the same instant: the later wins. */
    const char *g[] = {"g1", "g2", "day"};
    const int gs[] = {2 * 60 + 10, 2 * 60 + 40, 12 * 60};
    make_cal(&cal, 3, g, gs);
    expect_at(&cal, jump, "g2", "2026-03-29", jump, utc(2026, 3, 29, 10, 0, 0));
}

/* Invariants over a year of random instants in a DST zone and in one with a
   half-hour offset: start <= t < next; the shift at its own start and just
   before next is the same one; at next a new one starts exactly there; the
   wall clock at start reads the configured time (or later, in a gap). */
static void test_invariants(void **state)
{
    const char *zones[] = {"Europe/Berlin", "America/St_Johns", "UTC"};
    const char *names[] = {"early", "late", "night"};
    const int starts[] = {6 * 60, 14 * 60 + 30, 22 * 60};
    mb_shift_calendar cal;
    make_cal(&cal, 3, names, starts);
    unsigned seed = 12345;
    for (int z = 0; z < 3; z++) {
        set_tz(zones[z]);
        time_t t0 = utc(2026, 1, 1, 0, 0, 0);
        for (int i = 0; i < 3000; i++) {
            seed = seed * 1103515245u + 12345u;
            time_t t = t0 + (time_t)((seed >> 4) % (366u * 86400u));
            mb_shift_now a, b, c;
            assert_int_equal(mb_shift_at(&cal, t, &a), 0);
            assert_true(a.start <= t && t < a.next);
            assert_true(a.next - a.start >= 6 * 3600 &&
                        a.next - a.start <= 10 * 3600);
            assert_int_equal(mb_shift_at(&cal, a.start, &b), 0);
            assert_true(b.start == a.start && b.index == a.index);
            assert_string_equal(b.date, a.date);
            assert_int_equal(mb_shift_at(&cal, a.next - 1, &b), 0);
            assert_true(b.start == a.start);
            assert_int_equal(mb_shift_at(&cal, a.next, &c), 0);
            assert_true(c.start == a.next);
            assert_int_equal(c.index, (a.index + 1) % 3);
            struct tm lt;
            localtime_r(&a.start, &lt);
            int wall = lt.tm_hour * 60 + lt.tm_min;
            int want = cal.shifts[a.index].start_min;
            if (wall != want && !(wall > want && wall - want <= 60))
                fail_msg("%s: shift %s starts at %02d:%02d local, configured "
                         "%02d:%02d",
                         zones[z], a.name, wall / 60, wall % 60, want / 60,
                         want % 60);
        }
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parse),
        cmocka_unit_test(test_init_errors),
        cmocka_unit_test(test_midnight_utc),
        cmocka_unit_test(test_local_date),
        cmocka_unit_test(test_dst_berlin),
        cmocka_unit_test(test_invariants),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
