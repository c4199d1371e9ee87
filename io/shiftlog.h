/*
 * io/shiftlog.h - the per-shift log writer: one JSON Lines file per shift
 * in the layout of io/shiftlog_format.h, written append-only from the
 * station's poll loop.
 *
 * Time: the caller passes the wall-clock time (CLOCK_REALTIME, ms since
 * 1970, mb_shiftlog_now_ms) with every call; the log has no timers. When
 * that time reaches the next shift's start (io/shift.h), the call first
 * ends the shift (a "shift-end" record with the counts, fdatasync, close),
 * deletes files older than the retention, and opens the new shift's file
 * with a "shift-start" record. Call mb_shiftlog_tick from the loop (every
 * second or so) so a shift ends on time when no parts come.
 *
 * Writing: each record is formatted with snprintf into a buffer made at
 * open (no allocation per part) and appended with ONE write(2) on an
 * O_APPEND descriptor, so a crash leaves whole lines and at most one torn
 * last line. fdatasync runs when flush_interval_s has passed since the last
 * one (0: after every record), at shift end, and in mb_shiftlog_flush and
 * mb_shiftlog_close.
 *
 * Restart: opening a shift file that already exists (the station restarted
 * within the shift) continues it: a torn last line (file not ending in
 * '\n') gets a '\n' so the next record starts a line of its own, the
 * shift's counts are rebuilt from the file's part records (a read of the
 * whole file: about a second per GB from the page cache) and no second
 * "shift-start" is written when the file has one. A shift during which the
 * station was stopped at its end has no "shift-end" record; readers sum
 * its part records.
 *
 * Problems: a write or open that fails (disk full, folder gone, I/O error)
 * never blocks and never stops inspection: the record is counted as lost,
 * the logging-problem flag goes up (mb_shiftlog_problem; the PLC status
 * bit 7), and every later call tries again (a file that could not be
 * opened at most once a second). When writing works again a "fault"
 * record {"source": "log", "state": "restored"} says how many records were
 * lost and for how long, and the flag goes down.
 *
 * Counts: "reasons" in the summary and mb_shiftlog_counts count parts by
 * their PRIMARY reason (the first in the record), so they add up to at most
 * rejects + faults.
 *
 * Strings in records must be UTF-8; each is escaped for JSON and cut to
 * MB_SHIFTLOG_TEXT_MAX bytes. Non-finite numbers are written as null.
 *
 * One handle belongs to one thread.
 */
#ifndef MB_SHIFTLOG_H
#define MB_SHIFTLOG_H

#include <stddef.h>
#include <stdint.h>

#include "shift.h"
#include "shiftlog_format.h"

#define MB_SHIFTLOG_MAX_REASONS 8  /**< reasons written per part */
#define MB_SHIFTLOG_MAX_MODES 8    /**< mode scores written per part */
#define MB_SHIFTLOG_MAX_GAUGES 16  /**< gauges written per part */
#define MB_SHIFTLOG_CODES 64       /**< reason codes counted: 0..63 */
#define MB_SHIFTLOG_TEXT_MAX 240   /**< longest string written, bytes */

/** Verdicts, numbered as the PLC's register 3. */
enum { MB_SHIFTLOG_PASS = 1, MB_SHIFTLOG_REJECT = 2, MB_SHIFTLOG_FAULT = 3 };

/** One reason of a part record. */
typedef struct {
    int code;          /**< reason code, 0..MB_SHIFTLOG_CODES-1 */
    const char *name;  /**< short name ("nick"); NULL written as "" */
    const char *text;  /**< sentence for a person; NULL written as "" */
    double value, limit; /**< what was measured and its limit */
    int located;       /**< 1: the located members below are written
                            (nick, flash, gap, deform) */
    int outline;       /**< outline index */
    double position;   /**< along the outline, 0..1 */
    double angle_deg;  /**< direction from the part centre, degrees */
    double depth_mm, extent_mm; /**< size of the defect (NaN: null) */
} mb_shiftlog_reason;

typedef struct {
    const char *name;
    double value_mm, nominal_mm, tol_lo_mm, tol_hi_mm;
    int ok;
} mb_shiftlog_gauge;

/**
 * One inspected part, the schema's "part" record. Strings may be NULL
 * (written as null, or "" where the schema has no null). Reuse one struct
 * per station: nothing in it is kept after mb_shiftlog_part returns.
 */
typedef struct {
    uint32_t seq;        /**< result sequence number */
    uint64_t frame_seq;  /**< camera frame number */
    int slot;            /**< part slot */
    const char *part;    /**< part name */
    const char *model_checksum;
    int verdict;         /**< MB_SHIFTLOG_PASS / _REJECT / _FAULT */
    int n_reasons;       /**< 0..MB_SHIFTLOG_MAX_REASONS; reasons[0] is the
                              primary one */
    mb_shiftlog_reason reasons[MB_SHIFTLOG_MAX_REASONS];
    int has_pose;        /**< 0: "pose": null */
    double x, y;         /**< px */
    double angle_deg, scale;
    int n_modes;         /**< 0..MB_SHIFTLOG_MAX_MODES */
    double modes[MB_SHIFTLOG_MAX_MODES]; /**< b_i / sqrt(lambda_i) */
    double t2, residual; /**< NaN: null */
    double size_mm;      /**< NaN: null (no scale) */
    int n_gauges;        /**< 0..MB_SHIFTLOG_MAX_GAUGES */
    mb_shiftlog_gauge gauges[MB_SHIFTLOG_MAX_GAUGES];
    double cycle_ms;     /**< trigger (or frame) to verdict */
    const char *image;   /**< saved reject image, or NULL */
} mb_shiftlog_part_rec;

/** The schema's "drift" record. */
typedef struct {
    const char *chart;     /**< "gauge:<name>", "mode:<n>", "size", "t2" */
    int signal;            /**< 1 "signal", 0 "cleared" */
    int up;                /**< 1 "up", 0 "down" */
    double ewma, target, lcl, ucl;
    uint32_t since_seq;
    int64_t since_ms;      /**< wall-clock ms of since_seq's part */
    uint64_t parts_since;
} mb_shiftlog_drift_rec;

/** Counts of the current shift. */
typedef struct {
    uint64_t parts, passes, rejects, faults;
    uint64_t drift_signals;
    uint64_t by_code[MB_SHIFTLOG_CODES]; /**< parts by primary reason */
} mb_shiftlog_counts;

/** Health of the writer since open. */
typedef struct {
    int problem;           /**< the logging-problem flag */
    int last_error;        /**< errno of the last failure, 0 none */
    uint64_t records;      /**< records written whole */
    uint64_t lost;         /**< records not written (all problems) */
    uint64_t syncs;        /**< fdatasync calls made */
    uint64_t torn_repaired; /**< files opened with a torn last line */
    uint64_t files_deleted; /**< by the retention */
} mb_shiftlog_stats;

typedef struct {
    const char *folder;   /**< log folder; created if missing (one level) */
    const char *station;  /**< station name for shift-start */
    const mb_shift_calendar *calendar; /**< copied */
    int flush_interval_s; /**< fdatasync period, s; 0 = every record */
    int retention_days;   /**< delete shift files whose date is more than
                               this many days before the current shift's
                               date; 0 = keep all */
    int slot;             /**< active slot for shift-start */
    const char *model;    /**< active model path for shift-start, or NULL */
    const char *model_checksum; /**< or NULL */
} mb_shiftlog_config;

typedef struct mb_shiftlog mb_shiftlog;

/** CLOCK_REALTIME in ms since 1970. */
int64_t mb_shiftlog_now_ms(void);

/**
 * Open the log at wall-clock time now_ms: make the folder, apply the
 * retention, open or continue the current shift's file.
 * Return value: 0; MB_EINVAL (bad config: the sentence names the field);
 * MB_ENOMEM. A folder or file that cannot be written is NOT an error: the
 * log opens with the problem flag up and err holds the sentence (so the
 * station inspects on), and retries as described above.
 */
int mb_shiftlog_open(const mb_shiftlog_config *cfg, int64_t now_ms,
                     mb_shiftlog **out, char *err);

/** Flush (fdatasync) and close, without ending the shift. NULL-safe. */
void mb_shiftlog_close(mb_shiftlog *log);

/**
 * Log one part at now_ms; switches shifts first when one started. No
 * allocation, one write(2), fdatasync when due.
 * Return value: 0 (written); MB_EIO (not written: counted as lost, problem
 * flag up, err says why); MB_EINVAL (NULL or a bad verdict; nothing
 * written).
 */
int mb_shiftlog_part(mb_shiftlog *log, int64_t now_ms,
                     const mb_shiftlog_part_rec *rec, char *err);

/** A "drift" record; a signal counts in the shift's drift_signals.
    Returns as mb_shiftlog_part. */
int mb_shiftlog_drift(mb_shiftlog *log, int64_t now_ms,
                      const mb_shiftlog_drift_rec *rec, char *err);

/**
 * A "fault" record: source "camera" | "plc" | "log" | "model", lost (1) or
 * restored (0), code (an MB_E code or the station's fault code), text (may
 * be NULL), duration_s (written on restored). Returns as mb_shiftlog_part.
 */
int mb_shiftlog_fault(mb_shiftlog *log, int64_t now_ms, const char *source,
                      int lost, int code, const char *text, double duration_s,
                      char *err);

/**
 * A "model" record (changed = 0 "loaded", 1 "changed") and the model named
 * in later shift-start records. Returns as mb_shiftlog_part.
 */
int mb_shiftlog_model(mb_shiftlog *log, int64_t now_ms, int changed, int slot,
                      const char *path, const char *checksum, char *err);

/**
 * Timed work without a record: shift switch when due, fdatasync when due,
 * retry of a failed open. Return value: 1 when a shift ended (a summary
 * for the journal is then in mb_shiftlog_last_summary), 0 otherwise,
 * MB_EINVAL for NULL.
 */
int mb_shiftlog_tick(mb_shiftlog *log, int64_t now_ms);

/** fdatasync now (SIGTERM). Return value: 0; MB_EIO (problem flag up). */
int mb_shiftlog_flush(mb_shiftlog *log);

/** The logging-problem flag: 1 while records are being lost. */
int mb_shiftlog_problem(const mb_shiftlog *log);

/** Counts of the current shift (zeroes for NULL). */
void mb_shiftlog_get_counts(const mb_shiftlog *log, mb_shiftlog_counts *out);

/** The writer's health (zeroes for NULL). */
void mb_shiftlog_get_stats(const mb_shiftlog *log, mb_shiftlog_stats *out);

/** Name last logged for a reason code, "" if none. */
const char *mb_shiftlog_reason_name(const mb_shiftlog *log, int code);

/** The current shift (name, date, start, next); NULL for NULL. */
const mb_shift_now *mb_shiftlog_shift(const mb_shiftlog *log);

/** Path of the current shift file ("" before one was opened). */
const char *mb_shiftlog_path(const mb_shiftlog *log);

/** One line for the journal about the shift that ended last ("shift
    early 2026-12-01 ended: 812 parts, 798 pass, 13 reject, 1 fault, yield
    98.28%, top reasons nick 9, flash 4"); "" if none ended yet. */
const char *mb_shiftlog_last_summary(const mb_shiftlog *log);

/** Force-reset the counts of the current shift (the PLC's coil 2). */
void mb_shiftlog_reset_counts(mb_shiftlog *log);

/** The descriptor of the open shift file, -1 when none: tests only. */
int mb_shiftlog_fd(const mb_shiftlog *log);

#endif
