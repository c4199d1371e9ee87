/*
 * io/shiftlog_format.h - the per-shift log: what the station writes for
 * every part and every event, one JSON object per line (JSON Lines), and
 * what `modeband report` reads. The schema is the contract between the two;
 * change it only with a new version.
 *
 * Files. LOGDIR/<date>_<shift>.jsonl, <date> the local date (YYYY-MM-DD) on
 * which the shift STARTED (a night shift crossing midnight stays in one file),
 * <shift> its name from the station config ([A-Za-z0-9_-]+). Append-only.
 * A line is written whole or not at all as far as the writer can; after a
 * crash a torn last line (no '\n', or not valid JSON) is skipped by readers
 * and the writer starts a new line.
 *
 * Every line has: "format": "modeband-shiftlog", "version": 1, "kind", and
 * "time" (local time with offset, ISO 8601 with milliseconds, e.g.
 * "2026-12-01T06:00:00.125+01:00"). Kinds:
 *
 *   "shift-start" {"shift", "date", "station", "model", "model_checksum",
 *                  "slot"}
 *   "part"   {"seq" (result sequence, 1.. per station run, 32-bit wrap ok),
 *             "frame_seq", "slot", "part" (name), "model_checksum",
 *             "verdict": "pass" | "reject" | "fault",
 *             "reason": primary reason name or null, "code": its number,
 *             "reasons": [{"code", "name", "text", "value", "limit",
 *                          and for nick/flash/gap/deform: "outline",
 *                          "position" (0..1), "angle_deg", "depth_mm",
 *                          "extent_mm"}],
 *             "pose": {"x", "y", "angle", "scale"} or null,
 *             "modes": [sd...] (first up to 8), "t2", "residual",
 *             "size_mm" (or null without a scale),
 *             "gauges": [{"name", "value_mm", "nominal_mm", "tol_lo_mm",
 *                         "tol_hi_mm", "ok"}],
 *             "cycle_ms", "image" (path of the saved reject image, relative
 *             to the log folder's parent, or null)}
 *   "drift"  {"chart": "gauge:<name>" | "mode:<n>" | "size" | "t2",
 *             "state": "signal" | "cleared", "direction": "up" | "down",
 *             "ewma", "target", "lcl", "ucl", "since_seq", "since_time",
 *             "parts_since"}
 *   "fault"  {"source": "camera" | "plc" | "log" | "model",
 *             "state": "lost" | "restored", "code", "text",
 *             "duration_s" (on "restored")}
 *   "model"  {"event": "loaded" | "changed", "slot", "path",
 *             "model_checksum"}
 *   "shift-end" {"shift", "date", "parts", "passes", "rejects", "faults",
 *                "yield" (passes / parts, 0..1), "reasons": {name: count},
 *                "drift_signals"}
 *
 * Numbers are plain JSON numbers (millimetres in mm, angles in degrees).
 * Readers ignore members they do not know and refuse lines whose "version"
 * is newer than theirs (counted and reported, never fatal).
 */
#ifndef MB_SHIFTLOG_FORMAT_H
#define MB_SHIFTLOG_FORMAT_H

#define MB_SHIFTLOG_FORMAT "modeband-shiftlog"
#define MB_SHIFTLOG_VERSION 1

#endif
