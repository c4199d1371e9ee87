/*
 * io/shift.c - the shift calendar (rules in shift.h).
 *
 * Local wall time as a count: for an instant t, wall(t) = t + UTC offset
 * at t (struct tm's tm_gmtoff from localtime_r), i.e. seconds since
 * 1970-01-01 00:00 on the local clock. A wall time W (timegm of the local
 * date and time of day) is reached at t = W - o for the offset o in effect
 * then. Around W the zone uses at most a handful of offsets; we collect
 * them by sampling localtime_r every 3 hours over +-30 hours (no zone
 * changes its offset twice within 3 hours), keep every W - o that really
 * has offset o and take the earliest (the first occurrence of a repeated
 * hour). When none does, W lies in a spring-forward gap: the start is the
 * first instant with wall(t) >= W, found by bisection between W - o_max and
 * W - o_min, where wall(t) - W changes sign once.
 */
#include "shift.h"

#include "error.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int mb_shift_parse_hhmm(const char *s, int *minutes)
{
    if (!s || !minutes)
        return MB_EFORMAT;
    for (int i = 0; i < 5; i++) {
        if (i == 2 ? s[i] != ':' : (s[i] < '0' || s[i] > '9'))
            return MB_EFORMAT;
    }
    if (s[5] != '\0')
        return MB_EFORMAT;
    int h = (s[0] - '0') * 10 + (s[1] - '0');
    int m = (s[3] - '0') * 10 + (s[4] - '0');
    if (h > 23 || m > 59)
        return MB_EFORMAT;
    *minutes = h * 60 + m;
    return MB_OK;
}

int mb_shift_name_ok(const char *name)
{
    if (!name)
        return 0;
    size_t n = strlen(name);
    if (n < 1 || n >= MB_SHIFT_NAME_LEN)
        return 0;
    for (size_t i = 0; i < n; i++) {
        char c = name[i];
        if (!((c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') ||
              (c >= '0' && c <= '9') || c == '_' || c == '-'))
            return 0;
    }
    return 1;
}

static int by_start(const void *a, const void *b)
{
    const mb_shift_def *x = a, *y = b;
    return (x->start_min > y->start_min) - (x->start_min < y->start_min);
}

int mb_shift_calendar_init(mb_shift_calendar *cal, const mb_shift_def *defs,
                           int n, const char *field, char *err)
{
    if (!field)
        field = "shifts";
    if (!cal || (!defs && n > 0))
        return mb_err_set(err, MB_EINVAL, "%s: no calendar", field);
    if (n < 1 || n > MB_SHIFT_MAX)
        return mb_err_set(err, MB_EINVAL,
                          "%s: expected 1 to %d shifts, found %d", field,
                          MB_SHIFT_MAX, n);
    for (int i = 0; i < n; i++) {
        if (!mb_shift_name_ok(defs[i].name))
            return mb_err_set(err, MB_EINVAL,
                              "%s[%d].name: expected 1 to %d letters, digits, "
                              "'_' or '-'",
                              field, i, MB_SHIFT_NAME_LEN - 1);
        if (defs[i].start_min < 0 || defs[i].start_min > 1439)
            return mb_err_set(err, MB_EINVAL,
                              "%s[%d].start: expected a time from 00:00 to "
                              "23:59",
                              field, i);
        for (int j = 0; j < i; j++) {
            if (strcmp(defs[i].name, defs[j].name) == 0)
                return mb_err_set(err, MB_EINVAL,
                                  "%s[%d].name: \"%s\" is already the name "
                                  "of shift %d",
                                  field, i, defs[i].name, j);
            if (defs[i].start_min == defs[j].start_min)
                return mb_err_set(err, MB_EINVAL,
                                  "%s[%d].start: %02d:%02d is already the "
                                  "start of shift %d",
                                  field, i, defs[i].start_min / 60,
                                  defs[i].start_min % 60, j);
        }
    }
    cal->n = n;
    memcpy(cal->shifts, defs, (size_t)n * sizeof *defs);
    qsort(cal->shifts, (size_t)n, sizeof *defs, by_start);
    return MB_OK;
}

/* UTC offset at t, seconds east; 0 with *ok cleared when t is out of
   localtime_r's range. */
static long offset_at(time_t t, int *ok)
{
    struct tm tm;
    if (!localtime_r(&t, &tm)) {
        *ok = 0;
        return 0;
    }
    return tm.tm_gmtoff;
}

/* First instant whose wall time is >= W (see the file comment). */
static int wall_to_instant(time_t w, time_t *out)
{
    long offs[24];
    int n_offs = 0, ok = 1;
    for (int h = -30; h <= 30; h += 3) {
        long o = offset_at(w + (time_t)h * 3600, &ok);
        if (!ok)
            return MB_ERANGE;
        int seen = 0;
        for (int i = 0; i < n_offs; i++)
            seen |= offs[i] == o;
        if (!seen && n_offs < 24)
            offs[n_offs++] = o;
    }
    int found = 0;
    time_t best = 0;
    long omin = offs[0], omax = offs[0];
    for (int i = 0; i < n_offs; i++) {
        time_t t = w - (time_t)offs[i];
        if (offset_at(t, &ok) == offs[i] && ok && (!found || t < best)) {
            best = t;
            found = 1;
        }
        if (offs[i] < omin)
            omin = offs[i];
        if (offs[i] > omax)
            omax = offs[i];
    }
    if (!ok)
        return MB_ERANGE;
    if (!found) {
        /* Gap: wall(lo) < W <= wall(hi); bisect for the first t with
           wall(t) >= W. */
        time_t lo = w - (time_t)omax, hi = w - (time_t)omin;
        while (hi - lo > 1) {
            time_t mid = lo + (hi - lo) / 2;
            if (mid + (time_t)offset_at(mid, &ok) >= w)
                hi = mid;
            else
                lo = mid;
        }
        if (!ok)
            return MB_ERANGE;
        best = hi;
    }
    *out = best;
    return MB_OK;
}

/* Midnight (wall count) of the local date y-m-d normalised by timegm. */
static time_t wall_midnight(int year, int month, int day)
{
    struct tm tm = {0};
    tm.tm_year = year - 1900;
    tm.tm_mon = month - 1;
    tm.tm_mday = day;
    return timegm(&tm);
}

int mb_shift_start_on(const mb_shift_calendar *cal, int index, int year,
                      int month, int day, time_t *out)
{
    if (!cal || !out || index < 0 || index >= cal->n)
        return MB_EINVAL;
    time_t w = wall_midnight(year, month, day);
    if (w == (time_t)-1)
        return MB_ERANGE;
    return wall_to_instant(w + (time_t)cal->shifts[index].start_min * 60, out);
}

int mb_shift_at(const mb_shift_calendar *cal, time_t t, mb_shift_now *out)
{
    if (!cal || !out || cal->n < 1 || cal->n > MB_SHIFT_MAX)
        return MB_EINVAL;
    struct tm lt;
    if (!localtime_r(&t, &lt))
        return MB_ERANGE;
    int found = 0, have_next = 0;
    time_t cur = 0, next = 0;
    int cur_index = 0;
    struct tm cur_date = {0};
    /* The current shift started on the day before or today; the next one
       starts today or on one of the two days after. */
    for (int k = -1; k <= 2; k++) {
        time_t mid = wall_midnight(lt.tm_year + 1900, lt.tm_mon + 1,
                                   lt.tm_mday + k);
        struct tm d;
        if (mid == (time_t)-1 || !gmtime_r(&mid, &d))
            return MB_ERANGE;
        for (int i = 0; i < cal->n; i++) {
            time_t s;
            int rc = wall_to_instant(
                mid + (time_t)cal->shifts[i].start_min * 60, &s);
            if (rc < 0)
                return rc;
            /* ">=": of two shifts pushed to one instant the later wins. */
            if (s <= t && (!found || s >= cur)) {
                found = 1;
                cur = s;
                cur_index = i;
                cur_date = d;
            }
            if (s > t && (!have_next || s < next)) {
                have_next = 1;
                next = s;
            }
        }
    }
    if (!found || !have_next)
        return MB_ERANGE;
    out->index = cur_index;
    snprintf(out->name, sizeof out->name, "%s", cal->shifts[cur_index].name);
    /* Ranges spelled out so the compiler sees the text fits. */
    unsigned y = (unsigned)(cur_date.tm_year + 1900) % 10000u;
    unsigned mo = (unsigned)(cur_date.tm_mon + 1) % 100u;
    unsigned da = (unsigned)cur_date.tm_mday % 100u;
    snprintf(out->date, sizeof out->date, "%04u-%02u-%02u", y, mo, da);
    out->start = cur;
    out->next = next;
    return MB_OK;
}
