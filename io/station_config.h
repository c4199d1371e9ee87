/*
 * io/station_config.h - the station configuration document, read into a
 * plain struct for `modeband run`.
 *
 * A JSON object with "format": "modeband-station", "version": 1. Every
 * member but "camera", "slots" and "shifts" may be left out; the default
 * is given beside each field below. Members this version does not know
 * are ignored (a later version may add them). systemd/station.example.json
 * is a complete example.
 *
 *   "station": "line-3-press-2"                 name in logs and reports
 *   "camera": {
 *     "source": "v4l2" | "replay" | "synth"     required
 *     "device": "/dev/v4l/by-id/..."            required for v4l2
 *     "width": 1280, "height": 1024             px, 16..16384
 *     "exposure_us": 0                          0 = leave the camera's
 *     "gain": -1                                -1 = leave the camera's
 *     "buffers": 4                              4..32 mmap buffers
 *     "replay": {"folder": required for replay, "fps": 0 (as fast as
 *                asked), "loop": false}
 *     "synth": {"family": "ring" | "flange" | "hose" | "lipseal",
 *               "seed": 1, "defect_rate": 0 (0..1),
 *               "speed_px": 60 (belt travel per frame, px, > 0),
 *               "fps": 0, "size_drift": 0 (relative size change per 1000
 *               parts, -0.1..0.1, for drift demonstrations)}
 *   }
 *   "trigger": "plc" | "free" | "every"         default "plc"; "plc" needs
 *                                               a PLC link
 *   "slots": [{"slot": 1..99, "model": path (required),
 *              "calibration": path (optional),
 *              "mm_per_px": scale (optional, > 0; used without a
 *                           calibration)}, ...]  1..16 slots, unique numbers
 *   "active_slot": number of one of the slots   default the first slot's
 *   "plc": {
 *     "mode": "server" | "client" | "none"      default "server"
 *     "bind": "127.0.0.1", "port": 502 (0..65535; 0 = any free port)
 *     "max_connections": 4 (1..32), "allow": ["10.0.0.0/8", ...] (<= 16)
 *     "heartbeat_ms": 100 (10..60000)
 *     "client": {"peer": host (required in client mode), "port": 502,
 *                "unit": 255 (0..247 or 255), "block_address": 0,
 *                "trigger": "coil" | "register" (default "coil"),
 *                "trigger_address": 0, "ack_address": -1 (none),
 *                "slot_address": -1 (none), "poll_ms": 10,
 *                "timeout_ms": 100}
 *   }
 *   "logs": {"folder": "/var/log/modeband", "flush_interval_s": 1 (0..3600,
 *            0 = after every record), "retention_days": 90 (0..36500, 0 =
 *            keep forever),
 *            "reject_images": {"folder": "/var/lib/modeband/rejects",
 *                              "cap_mb": 1024 (0 = save none)}}
 *   "shifts": [{"name": "early", "start": "06:00"}, ...]  1..12, local
 *            time, see io/shift.h (a shift lasts until the next starts)
 *   "drift": {"lambda": 0.2 (0 < lambda <= 1), "L": 3 (0 < L <= 10),
 *             "clear_after": 50 parts (1..1000000),
 *             "modes": [1, 2, 3] (mode numbers 1..8 charted, at most 8)}
 *   "timeouts": {"inspection_ms": 200 (1..60000),
 *                "frame_ms": 1000 (1..600000)}
 *
 * Errors name the file and the field ("station.json: plc.port: expected
 * an integer from 0 to 65535, found 70000"). Codes: MB_EFORMAT (syntax,
 * a missing or mistyped member, a value out of range or not one of the
 * allowed words), MB_EVERSION (another format or version), MB_ENUMERIC
 * (null or infinite where a number belongs), MB_EINVAL (values that do not
 * fit together: duplicate slots or shifts, trigger "plc" without a PLC),
 * MB_ENOTFOUND / MB_EIO (the file), MB_ENOMEM.
 *
 * Paths are kept as written; relative ones are the caller's to resolve.
 */
#ifndef MB_STATION_CONFIG_H
#define MB_STATION_CONFIG_H

#include <stddef.h>
#include <stdint.h>

#include "plc.h"
#include "shift.h"
#include "synth_source.h"
#include "v4l2.h"

#define MB_STATION_FORMAT "modeband-station"
#define MB_STATION_VERSION 1

#define MB_STATION_NAME_LEN 64   /**< station name buffer */
#define MB_STATION_PATH_LEN 512  /**< path buffers */
#define MB_STATION_MAX_SLOTS 16  /**< part slots */
#define MB_STATION_MAX_SLOT 99   /**< highest slot number */
#define MB_STATION_MAX_MODES 8   /**< drift-charted modes */

typedef enum {
    MB_CAMERA_V4L2 = 0,
    MB_CAMERA_REPLAY,
    MB_CAMERA_SYNTH
} mb_camera_kind;

typedef enum {
    MB_TRIGGER_PLC = 0, /**< inspect the first frame after the PLC's trigger */
    MB_TRIGGER_FREE,    /**< free-running: find each part as it enters */
    MB_TRIGGER_EVERY    /**< every frame is a part (hardware trigger) */
} mb_trigger_mode;

typedef enum {
    MB_STATION_PLC_NONE = 0,
    MB_STATION_PLC_SERVER,
    MB_STATION_PLC_CLIENT
} mb_station_plc_mode;

typedef struct {
    mb_camera_kind source;
    char device[MB_STATION_PATH_LEN]; /**< v4l2 device node */
    int width, height;                /**< px */
    int exposure_us;                  /**< 0 = leave the camera's */
    int gain;                         /**< -1 = leave the camera's */
    int buffers;                      /**< 4..32 */
    char replay_folder[MB_STATION_PATH_LEN];
    double replay_fps;                /**< 0 = as fast as asked */
    int replay_loop;                  /**< 0 or 1 */
    char synth_family[16];            /**< "ring", "flange", ... */
    uint64_t synth_seed;
    double synth_defect_rate;         /**< 0..1 */
    double synth_speed_px;            /**< px per frame */
    double synth_fps;                 /**< 0 = as fast as asked */
    double synth_size_drift;          /**< per 1000 parts */
} mb_station_camera;

typedef struct {
    int slot;                              /**< 1..99, what the PLC writes */
    char model[MB_STATION_PATH_LEN];       /**< part-model file */
    char calibration[MB_STATION_PATH_LEN]; /**< "" = none */
    double mm_per_px;                      /**< 0 = not given */
} mb_station_slot;

typedef struct {
    mb_station_plc_mode mode;
    char bind[MB_PLC_ADDR_LEN];
    int port;
    int max_connections;
    int n_allow;
    char allow[MB_PLC_MAX_ALLOW][MB_PLC_ADDR_LEN];
    int heartbeat_ms;
    char peer[MB_PLC_ADDR_LEN];
    int peer_port, unit_id;
    int block_addr;
    mb_plc_kind trigger_kind;
    int trigger_addr, ack_addr, slot_addr; /**< -1 = none (ack, slot) */
    int poll_ms, timeout_ms;
} mb_station_plc;

typedef struct {
    char station[MB_STATION_NAME_LEN];
    mb_station_camera camera;
    mb_trigger_mode trigger;
    int n_slots;
    mb_station_slot slots[MB_STATION_MAX_SLOTS];
    int active_slot; /**< a slot number present in slots */
    mb_station_plc plc;
    char log_folder[MB_STATION_PATH_LEN];
    int flush_interval_s;
    int retention_days;
    char reject_folder[MB_STATION_PATH_LEN];
    int reject_cap_mb;
    mb_shift_calendar shifts; /**< sorted by start time */
    double drift_lambda, drift_L;
    int drift_clear_after;
    int n_drift_modes;
    int drift_modes[MB_STATION_MAX_MODES]; /**< mode numbers, 1-based */
    int inspection_timeout_ms;
    int frame_timeout_ms;
} mb_station_config;

/** Every default of the header comment; no camera source chosen (v4l2
    without a device), no slots, no shifts: not valid until filled. */
void mb_station_config_default(mb_station_config *cfg);

/**
 * Read a station document from len bytes (need not be NUL-terminated);
 * name is used in the sentences. Fills *cfg (defaults first) and checks
 * it with mb_station_config_check.
 * Return value: 0; codes of the header comment.
 */
int mb_station_config_parse(const char *text, size_t len, const char *name,
                            mb_station_config *cfg, char *err);

/** mb_station_config_parse of a file (at most 1 MiB); the sentences name
    the path. */
int mb_station_config_load(const char *path, mb_station_config *cfg,
                           char *err);

/**
 * Check values and how they fit together (ranges, unique slots and shifts,
 * the active slot exists, the PLC settings as io/plc.h checks them, trigger
 * "plc" with a PLC link, a device for v4l2 and a folder for replay).
 * name prefixes the sentence. Return value: 0; MB_EINVAL / MB_EFORMAT.
 */
int mb_station_config_check(const mb_station_config *cfg, const char *name,
                            char *err);

/**
 * The fields that differ between a and b (for a SIGHUP reload), as a
 * comma-separated list of field names ("camera.exposure_us, slots[1].model,
 * shifts") into out (size bytes, truncated with "..." when too short).
 * Return value: the number of differing fields (0: same).
 */
int mb_station_config_diff(const mb_station_config *a,
                           const mb_station_config *b, char *out,
                           size_t size);

/** The slot with number `slot`, or NULL. */
const mb_station_slot *mb_station_config_slot(const mb_station_config *cfg,
                                              int slot);

/** The PLC link's configuration (io/plc.h) from the station's, defaults
    for what the station document does not set; log callback NULL. The
    mode is server for MB_STATION_PLC_NONE (do not open a link then). */
void mb_station_config_plc(const mb_station_config *cfg, mb_plc_config *out);

/** The V4L2 camera's configuration (capture/v4l2.h); out->path points into
    cfg. */
void mb_station_config_v4l2(const mb_station_config *cfg,
                            mb_v4l2_config *out);

/** The synthetic line's configuration (capture/synth_source.h): family,
    frame size, seed, defect rate, speed and rate from cfg, the rest the
    generator's defaults. Return value: 0; MB_EINVAL (unknown family). */
int mb_station_config_synth(const mb_station_config *cfg,
                            mb_synth_source_config *out);

/** "v4l2", "replay", "synth" / "plc", "free", "every" / "none", "server",
    "client"; "?" for other values. */
const char *mb_camera_kind_name(mb_camera_kind k);
const char *mb_trigger_mode_name(mb_trigger_mode m);
const char *mb_station_plc_mode_name(mb_station_plc_mode m);

#endif
