/*
 * inspect/report.h - the shift report: what went wrong on a shift (or any
 * time window), from the shift logs (io/shiftlog_format.h).
 *
 * Records are fed one at a time (mb_report_add_file streams a log file
 * through io/shiftlog_read.h) and folded into fixed-size summaries, so
 * memory does not grow with the number of parts:
 *   counts      parts, passes, rejects, faults (verdict), yield;
 *   Pareto      primary reasons of rejects and faults, by count;
 *   defects     located reasons (outline, angle_deg) in 12 bins of 30
 *               degrees per outline (36 of 10 for the picture);
 *   capability  per gauge mean, sd (n - 1), Cp = (USL - LSL) / 6 s and
 *               Cpk = min(USL - mean, mean - LSL) / 3 s (NIST/SEMATECH
 *               e-Handbook 6.1.6), USL = nominal + tol_hi, LSL = nominal +
 *               tol_lo, from the latest record's tolerance; mean and sd by
 *               Welford's update (Technometrics 4(3), 1962);
 *   per hour    parts and rejects per local clock hour;
 *   run charts  T^2, size and every gauge over the part sequence, in at
 *               most MB_REPORT_BINS bins (each bin holds 1, 2, 4, ... parts:
 *               min, max, mean and its rejects);
 *   events      faults with durations, drift records, model changes (a
 *               "model" record or a part whose model_checksum differs from
 *               the part before), shifts met, bad lines per file;
 *   thumbnails  the first MB_REPORT_THUMBS rejects that name an image.
 *
 * Output: mb_report_print writes the terminal summary to a stream the
 * program passes in; mb_report_write_html writes one self-contained page
 * (inline SVG, thumbnails as data: URIs, no scripts); --csv rows are
 * written as parts arrive (mb_report_set_csv).
 *
 * Local times: the report works on the local clock reading of each record
 * ("time" without its offset), which is what a person on the shift saw.
 */
#ifndef MB_REPORT_H
#define MB_REPORT_H

#include <stdio.h>

#include "shiftlog_read.h"

#define MB_REPORT_BINS 1024
#define MB_REPORT_THUMBS 24
#define MB_REPORT_MAX_GAUGES 32
#define MB_REPORT_ANGLE_BINS 12

/** Which records enter the report. */
typedef struct {
    const char *shift; /**< shift name, NULL for all */
    const char *date;  /**< YYYY-MM-DD the shift started, NULL for all */
    double from, to;   /**< local clock seconds (mb_slog_parse_time's
                            t_local), NAN for open ends; from <= t < to */
} mb_report_filter;

typedef struct mb_report mb_report;

/** Gauge capability as computed (NAN where undefined: n < 2, sd 0). */
typedef struct {
    char name[MB_SLOG_NAME_LEN];
    long n, out_of_tol;
    double mean, sd, lsl, usl, nominal, cp, cpk;
    int tol_changed; /**< the tolerance changed within the window */
} mb_report_gauge;

/** Totals. */
typedef struct {
    long parts, passes, rejects, faults;
    double yield; /**< passes / parts, NAN without parts */
    long fault_events, drift_signals, model_changes;
    long files, torn, invalid, newer, empty_shifts;
} mb_report_totals;

/** Return value: 0; MB_ENOMEM. */
int mb_report_open(mb_report **out);
/** NULL-safe. */
void mb_report_close(mb_report *r);

/** Stream one CSV row per part to csv (the caller keeps it open). The
    gauge columns are those of the first part; gauges met later that are
    not among them are counted and said in the summary. */
void mb_report_set_csv(mb_report *r, FILE *csv);

/**
 * Read one log file into the report (only records passing f, which may
 * be NULL). A file whose name does not match f's shift/date is skipped
 * (returns 1). Bad lines are counted, never an error.
 * Return value: 0; 1 (skipped by name); MB_ENOTFOUND; MB_EIO; MB_ENOMEM.
 */
int mb_report_add_file(mb_report *r, const char *path,
                       const mb_report_filter *f, char *err);

/** Most threads mb_report_add_files uses. */
#define MB_REPORT_MAX_THREADS 8

/**
 * Read the files in order, `threads` at a time (each into a partial
 * report, merged in file order: counts, Pareto, bins, hours and events as
 * a sequential read gives them; mean and sd combined by Chan et al.'s
 * pairwise update, equal to the sequential figures to rounding). With one
 * thread, or when CSV rows are being written (they must come in order),
 * the files are read one after the other on the calling thread.
 * Return value: 0; the first file's error (MB_ENOTFOUND, MB_EIO,
 * MB_ENOMEM).
 */
int mb_report_add_files(mb_report *r, char *const *paths, int n,
                        const mb_report_filter *f, int threads, char *err);

/** Add one record (what add_file does per line; for tests). */
void mb_report_add_record(mb_report *r, const mb_slog_record *rec);

void mb_report_totals_get(const mb_report *r, mb_report_totals *out);
/** Gauge i (0 .. count-1, in order of first appearance); the count. */
int mb_report_gauge_count(const mb_report *r);
void mb_report_gauge_get(const mb_report *r, int i, mb_report_gauge *out);

/** The terminal summary. */
void mb_report_print(const mb_report *r, FILE *out);

/**
 * Write the HTML page to path (atomically). Reject images are looked up
 * relative to image_root (the log folder's parent).
 * Return value: 0; MB_EIO; MB_ENOMEM. A missing or unreadable image is
 * not an error: its tile says so.
 */
int mb_report_write_html(const mb_report *r, const char *path,
                         const char *image_root, const char *title, char *err);

#endif
