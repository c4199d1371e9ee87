/*
 * io/shiftlog_read.h - a streaming reader of the per-shift logs (JSON Lines,
 * schema in shiftlog_format.h).
 *
 * A file is read in blocks through a fixed buffer; every complete line is
 * parsed into one mb_shiftlog_record (a plain value struct, reused for every
 * line) and handed to the caller's callback. Nothing grows with the file, so
 * a week of logs is read in constant memory.
 *
 * Lines that are not records are counted, never fatal:
 *   torn     the last line of the file has no '\n' (the writer crashed or is
 *            writing it now); skipped whatever it holds, as the format says;
 *   invalid  not one JSON object, or "format" is not "modeband-shiftlog", or
 *            "version"/"kind" missing or mistyped, or longer than the buffer;
 *   newer    "version" greater than MB_SHIFTLOG_VERSION: refused;
 *   blank    empty or white-space lines (not counted as invalid).
 * Unknown kinds are passed on with kind MB_SLOG_OTHER; unknown members are
 * skipped (nested objects and arrays included).
 *
 * Two parsers give the same records: a purpose-built scanner (the default:
 * it reads only the known keys, in any order, decodes string escapes and
 * \u sequences, and converts numbers exactly as strtod would) and a cJSON
 * one kept as the reference the scanner is tested against. The scanner is
 * about an order of magnitude faster (figures in tests/bench/bench_report).
 *
 * Strings longer than their field are cut at a UTF-8 character boundary.
 * Numbers that are null or absent are NAN (integers: -1 or 0 as said).
 */
#ifndef MB_SHIFTLOG_READ_H
#define MB_SHIFTLOG_READ_H

#include <stddef.h>
#include <stdint.h>

#include "shiftlog_format.h"

#define MB_SLOG_MAX_REASONS 8
#define MB_SLOG_MAX_GAUGES 16
#define MB_SLOG_MAX_MODES 8
#define MB_SLOG_NAME_LEN 64
#define MB_SLOG_TEXT_LEN 192
#define MB_SLOG_PATH_LEN 256
#define MB_SLOG_TIME_LEN 40

/** Longest line read, bytes; a longer one is skipped as invalid. */
#define MB_SLOG_MAX_LINE (256 * 1024)

typedef enum {
    MB_SLOG_OTHER = 0, /**< a kind this reader does not know */
    MB_SLOG_SHIFT_START,
    MB_SLOG_PART,
    MB_SLOG_DRIFT,
    MB_SLOG_FAULT,
    MB_SLOG_MODEL,
    MB_SLOG_SHIFT_END
} mb_slog_kind;

typedef enum {
    MB_SLOG_VERDICT_NONE = 0, /**< missing or unknown */
    MB_SLOG_PASS,
    MB_SLOG_REJECT,
    MB_SLOG_FAULT_VERDICT
} mb_slog_verdict;

/** One entry of a part's "reasons". outline is -1 when not located. */
typedef struct {
    int code;
    char name[MB_SLOG_NAME_LEN];
    char text[MB_SLOG_TEXT_LEN];
    double value, limit;
    int outline;
    double position, angle_deg, depth_mm, extent_mm; /**< NAN when absent */
} mb_slog_reason;

/** One gauge of a part. tol_lo_mm/tol_hi_mm are offsets from the nominal
    (accepted: nominal + tol_lo .. nominal + tol_hi), as in the model. */
typedef struct {
    char name[MB_SLOG_NAME_LEN];
    double value_mm, nominal_mm, tol_lo_mm, tol_hi_mm;
    int ok; /**< 1, 0, or -1 when absent */
} mb_slog_gauge;

/**
 * One line. Common members first; the rest are filled by the kinds that
 * have them (see shiftlog_format.h) and are empty ("", NAN, 0) otherwise.
 */
typedef struct {
    mb_slog_kind kind;
    int version;
    char kind_name[MB_SLOG_NAME_LEN];
    char time[MB_SLOG_TIME_LEN];
    /** "time" as seconds since 1970 UTC, and the local clock reading in
        seconds (t_utc + offset); both NAN when "time" is unreadable. */
    double t_utc, t_local;

    /* shift-start, shift-end */
    char shift[MB_SLOG_NAME_LEN], date[16], station[MB_SLOG_NAME_LEN];
    char model[MB_SLOG_PATH_LEN];
    long parts, passes, rejects, faults, drift_signals; /**< -1 absent */
    double yield;

    /* part (model_checksum and slot also in shift-start and model) */
    uint32_t seq;
    int64_t frame_seq;
    int slot;
    char part[MB_SLOG_NAME_LEN];
    char model_checksum[MB_SLOG_NAME_LEN];
    mb_slog_verdict verdict;
    char reason[MB_SLOG_NAME_LEN]; /**< primary reason, "" when null */
    int code;
    int n_reasons; /**< entries kept (at most MB_SLOG_MAX_REASONS) */
    mb_slog_reason reasons[MB_SLOG_MAX_REASONS];
    int has_pose;
    double pose_x, pose_y, pose_angle, pose_scale;
    int n_modes;
    double modes[MB_SLOG_MAX_MODES];
    double t2, residual, size_mm, cycle_ms;
    int n_gauges;
    mb_slog_gauge gauges[MB_SLOG_MAX_GAUGES];
    char image[MB_SLOG_PATH_LEN]; /**< "" when null */

    /* drift */
    char chart[MB_SLOG_NAME_LEN];
    char state[16];     /**< drift: signal|cleared; fault: lost|restored */
    char direction[8];
    double ewma, target, lcl, ucl;
    uint32_t since_seq;
    char since_time[MB_SLOG_TIME_LEN];
    long parts_since;

    /* fault (code above), model */
    char source[16];
    char text[MB_SLOG_TEXT_LEN];
    double duration_s;
    char event[16];
    char path[MB_SLOG_PATH_LEN];
} mb_slog_record;

/** What a read met. */
typedef struct {
    long lines;   /**< lines seen, torn one included */
    long records; /**< handed to the callback */
    long blank, torn, invalid, newer;
    int newest_version;    /**< highest refused version, 0 when none */
    long first_invalid;    /**< line number (1-based) of the first invalid
                                line, 0 when none */
} mb_slog_stats;

typedef enum {
    MB_SLOG_PARSER_SCAN = 0, /**< the purpose-built scanner */
    MB_SLOG_PARSER_CJSON     /**< cJSON, the reference */
} mb_slog_parser;

/** Return 0 to go on, non-zero to stop reading (returned by the reader). */
typedef int (*mb_slog_fn)(const mb_slog_record *rec, void *user);

/**
 * Parse one line (len bytes, no '\n' needed, need not be NUL-terminated)
 * into rec.
 * Return value: 0; MB_EFORMAT (not a shift-log record: see above; err says
 * why); MB_EVERSION (a newer version; rec->version holds it).
 */
int mb_slog_parse_line(const char *line, size_t len, mb_slog_parser parser,
                       mb_slog_record *rec, char *err);

/**
 * Read the file at path, handing each record to fn. stats (may be NULL) is
 * zeroed first and then filled in.
 * Return value: 0; fn's non-zero value when it stopped the read;
 * MB_ENOTFOUND; MB_EIO; MB_ENOMEM. Bad lines are never an error.
 */
int mb_slog_read_file(const char *path, mb_slog_parser parser, mb_slog_fn fn,
                      void *user, mb_slog_stats *stats, char *err);

/**
 * Parse an ISO 8601 time "YYYY-MM-DDTHH:MM[:SS[.fff]][Z|+hh:mm|-hh:mm]"
 * (a space may stand for the T; a date alone is midnight). *t_utc gets
 * seconds since 1970 UTC (the local reading when no offset is given) and
 * *t_local the local clock reading in the same count.
 * Return value: 0; MB_EFORMAT.
 */
int mb_slog_parse_time(const char *s, double *t_utc, double *t_local);

#endif
