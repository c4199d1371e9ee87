/*
 * io/shift.h - the shift calendar: which shift a wall-clock instant belongs
 * to, the local date on which that shift started, and when the next one
 * starts.
 *
 * A calendar is a list of named shifts, each with a start time of day in
 * local time ("06:00", "14:00", "22:00"). A shift lasts until the next one
 * in time-of-day order starts, so the last shift of the day runs past
 * midnight into the first one of the next day (a night shift starting at
 * 22:00 ends at 06:00 the next morning and keeps the date it started on).
 * One shift alone lasts 24 hours.
 *
 * Local time is the process's time zone (TZ, localtime_r). The start of
 * shift s on local date D is the first instant whose local wall-clock
 * reading is at or after D s.start, which settles both DST jumps:
 *   - spring forward (a local hour does not exist): a shift starting at a
 *     time that does not exist that day starts at the first existing minute
 *     after it, the instant of the jump (Europe/Berlin, last Sunday of
 *     March: a 02:30 start is 03:00 CEST); the shift spanning the jump is
 *     up to an hour shorter;
 *   - fall back (a local hour occurs twice): a shift starting in the
 *     repeated hour starts at its first occurrence (summer time); the shift
 *     that spans the jump is an hour longer.
 * Two shifts that thereby start at the same instant: the later one in the
 * day wins, the earlier one has no time that day.
 *
 * The calendar is plain data (no allocation, no global state besides the
 * C library's time zone); mb_shift_at calls localtime_r and timegm a few
 * dozen times, so callers cache `next` and ask again only when it passes
 * (the shift log does).
 */
#ifndef MB_SHIFT_H
#define MB_SHIFT_H

#include <time.h>

#define MB_SHIFT_MAX 12     /**< shifts per calendar */
#define MB_SHIFT_NAME_LEN 32 /**< name buffer: [A-Za-z0-9_-], 1..31 chars */

/** One shift as configured. */
typedef struct {
    char name[MB_SHIFT_NAME_LEN]; /**< used in log file names */
    int start_min;                /**< start, minutes after local midnight,
                                       0..1439 */
} mb_shift_def;

/** A checked calendar, shifts sorted by start time. */
typedef struct {
    int n;
    mb_shift_def shifts[MB_SHIFT_MAX];
} mb_shift_calendar;

/** Where an instant falls. */
typedef struct {
    int index;                    /**< into the calendar's sorted shifts */
    char name[MB_SHIFT_NAME_LEN]; /**< the shift's name */
    char date[16];                /**< local date the shift started on,
                                       "YYYY-MM-DD" */
    time_t start;                 /**< instant the shift started */
    time_t next;                  /**< instant the next shift starts
                                       (> the instant asked about) */
} mb_shift_now;

/**
 * Parse "HH:MM" (24-hour, two digits each, 00:00..23:59) into minutes
 * after midnight. Return value: 0; MB_EFORMAT.
 */
int mb_shift_parse_hhmm(const char *text, int *minutes);

/** Is name a valid shift name (1..31 of [A-Za-z0-9_-])? 1 or 0. */
int mb_shift_name_ok(const char *name);

/**
 * Check and sort n shift definitions into cal. field names the list in the
 * sentence ("station.json: shifts").
 * Return value: 0; MB_EINVAL (n outside 1..MB_SHIFT_MAX, a bad name, a
 * start outside 0..1439, two shifts with the same name or start).
 */
int mb_shift_calendar_init(mb_shift_calendar *cal, const mb_shift_def *defs,
                           int n, const char *field, char *err);

/**
 * The shift at instant t (local time zone as now set; call tzset after
 * changing TZ). Return value: 0; MB_EINVAL (NULL or empty calendar);
 * MB_ERANGE (t outside what localtime_r can represent).
 */
int mb_shift_at(const mb_shift_calendar *cal, time_t t, mb_shift_now *out);

/**
 * The instant shift `index` of cal starts on local date y-m-d (rule
 * above). Return value: 0; MB_EINVAL; MB_ERANGE.
 */
int mb_shift_start_on(const mb_shift_calendar *cal, int index, int year,
                      int month, int day, time_t *out);

#endif
