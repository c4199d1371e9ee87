/*
 * io/station_config.c - the station configuration document (layout in
 * station_config.h).
 *
 * Reading is in two steps: the document is read member by member into a
 * struct that holds the defaults (each member's type and range checked
 * where it is read, so the sentence names it), then
 * mb_station_config_check looks at how the values fit together. The check
 * is separate so a configuration built in code (tests, the demo) gets the
 * same scrutiny.
 */
#include "station_config.h"

#include "error.h"
#include "file_util.h"
#include "json_util.h"

#include <arpa/inet.h>
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define STATION_MAX_BYTES ((size_t)1 << 20)

static const char *const camera_words[] = {"v4l2", "replay", "synth"};
static const char *const trigger_words[] = {"plc", "free", "every"};
static const char *const plc_words[] = {"none", "server", "client"};
static const char *const kind_words[] = {"coil", "register"};

#define N_WORDS(a) ((int)(sizeof(a) / sizeof((a)[0])))

const char *mb_camera_kind_name(mb_camera_kind k)
{
    return (int)k >= 0 && (int)k < N_WORDS(camera_words) ? camera_words[k]
                                                         : "?";
}

const char *mb_trigger_mode_name(mb_trigger_mode m)
{
    return (int)m >= 0 && (int)m < N_WORDS(trigger_words) ? trigger_words[m]
                                                          : "?";
}

const char *mb_station_plc_mode_name(mb_station_plc_mode m)
{
    return (int)m >= 0 && (int)m < N_WORDS(plc_words) ? plc_words[m] : "?";
}

void mb_station_config_default(mb_station_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    snprintf(cfg->station, sizeof cfg->station, "station");
    mb_station_camera *c = &cfg->camera;
    c->source = MB_CAMERA_V4L2;
    c->width = 1280;
    c->height = 1024;
    c->exposure_us = 0;
    c->gain = -1;
    c->buffers = 4;
    c->replay_fps = 0;
    c->replay_loop = 0;
    snprintf(c->synth_family, sizeof c->synth_family, "ring");
    c->synth_seed = 1;
    c->synth_defect_rate = 0;
    c->synth_speed_px = 60;
    c->synth_fps = 0;
    c->synth_size_drift = 0;
    cfg->trigger = MB_TRIGGER_PLC;
    cfg->active_slot = 0;
    mb_station_plc *p = &cfg->plc;
    p->mode = MB_STATION_PLC_SERVER;
    snprintf(p->bind, sizeof p->bind, "127.0.0.1");
    p->port = 502;
    p->max_connections = 4;
    p->heartbeat_ms = 100;
    p->peer_port = 502;
    p->unit_id = 255;
    p->trigger_kind = MB_PLC_ON_COIL;
    p->ack_addr = -1;
    p->slot_addr = -1;
    p->poll_ms = 10;
    p->timeout_ms = 100;
    snprintf(cfg->log_folder, sizeof cfg->log_folder, "/var/log/modeband");
    cfg->flush_interval_s = 1;
    cfg->retention_days = 90;
    snprintf(cfg->reject_folder, sizeof cfg->reject_folder,
             "/var/lib/modeband/rejects");
    cfg->reject_cap_mb = 1024;
    cfg->drift_lambda = 0.2;
    cfg->drift_L = 3;
    cfg->drift_clear_after = 50;
    cfg->n_drift_modes = 3;
    for (int i = 0; i < 3; i++)
        cfg->drift_modes[i] = i + 1;
    cfg->inspection_timeout_ms = 200;
    cfg->frame_timeout_ms = 1000;
}

/* ---- member readers: a missing member keeps the default ---- */

typedef struct {
    const char *name; /* document name for the sentences */
    char *err;
} reader;

static int opt_object(const reader *r, const cJSON *obj, const char *parent,
                      const char *key, const cJSON **out)
{
    *out = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!*out)
        return MB_OK;
    return mb_json_member(obj, r->name, parent, key, MB_JSON_OBJECT, out,
                          r->err);
}

static int opt_int(const reader *r, const cJSON *obj, const char *parent,
                   const char *key, int lo, int hi, int *v)
{
    if (!cJSON_GetObjectItemCaseSensitive(obj, key))
        return MB_OK;
    return mb_json_member_int(obj, r->name, parent, key, lo, hi, v, r->err);
}

/* A finite number lo <= v <= hi (lo excluded when lo_open). */
static int opt_number(const reader *r, const cJSON *obj, const char *parent,
                      const char *key, double lo, double hi, int lo_open,
                      double *v)
{
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!item)
        return MB_OK;
    char field[MB_JSON_FIELD_LEN];
    mb_json_field(field, parent, key);
    double x;
    int rc = mb_json_number(item, r->name, field, &x, r->err);
    if (rc < 0)
        return rc;
    if (!(lo_open ? x > lo : x >= lo) || !(x <= hi))
        return mb_json_expected(r->err, MB_EFORMAT, r->name, field, item,
                                "a number %s %g and at most %g",
                                lo_open ? "above" : "of at least", lo, hi);
    *v = x;
    return MB_OK;
}

static int opt_bool(const reader *r, const cJSON *obj, const char *parent,
                    const char *key, int *v)
{
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!item)
        return MB_OK;
    int rc = mb_json_member(obj, r->name, parent, key, MB_JSON_BOOL, &item,
                            r->err);
    if (rc < 0)
        return rc;
    *v = cJSON_IsTrue(item) ? 1 : 0;
    return MB_OK;
}

/* A string of 1..size-1 bytes into buf; required or optional. */
static int get_string(const reader *r, const cJSON *obj, const char *parent,
                      const char *key, int required, char *buf, size_t size)
{
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!item && !required)
        return MB_OK;
    int rc = mb_json_member(obj, r->name, parent, key, MB_JSON_STRING, &item,
                            r->err);
    if (rc < 0)
        return rc;
    size_t n = strlen(item->valuestring);
    if (n < 1 || n >= size) {
        char field[MB_JSON_FIELD_LEN];
        mb_json_field(field, parent, key);
        return mb_json_expected(r->err, MB_EFORMAT, r->name, field, item,
                                "a text of 1 to %zu characters", size - 1);
    }
    memcpy(buf, item->valuestring, n + 1);
    return MB_OK;
}

/* One of words[0..n-1], its index into *v. */
static int opt_word(const reader *r, const cJSON *obj, const char *parent,
                    const char *key, int required, const char *const *words,
                    int n, int *v)
{
    const cJSON *item = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!item && !required)
        return MB_OK;
    int rc = mb_json_member(obj, r->name, parent, key, MB_JSON_STRING, &item,
                            r->err);
    if (rc < 0)
        return rc;
    for (int i = 0; i < n; i++) {
        if (strcmp(item->valuestring, words[i]) == 0) {
            *v = i;
            return MB_OK;
        }
    }
    char list[128] = "";
    size_t used = 0;
    for (int i = 0; i < n && used < sizeof list; i++)
        used += (size_t)snprintf(list + used, sizeof list - used, "%s\"%s\"",
                                 i == 0 ? "" : i == n - 1 ? " or " : ", ",
                                 words[i]);
    char field[MB_JSON_FIELD_LEN];
    mb_json_field(field, parent, key);
    return mb_json_expected(r->err, MB_EFORMAT, r->name, field, item, "%s",
                            list);
}

/* ---- sections ---- */

static int read_camera(const reader *r, const cJSON *root,
                       mb_station_camera *c)
{
    const cJSON *cam, *sub;
    int rc, v;
    if ((rc = mb_json_member(root, r->name, "", "camera", MB_JSON_OBJECT, &cam,
                             r->err)) < 0)
        return rc;
    v = (int)c->source;
    if ((rc = opt_word(r, cam, "camera", "source", 1, camera_words,
                       N_WORDS(camera_words), &v)) < 0)
        return rc;
    c->source = (mb_camera_kind)v;
    if ((rc = get_string(r, cam, "camera", "device", c->source == MB_CAMERA_V4L2,
                         c->device, sizeof c->device)) < 0 ||
        (rc = opt_int(r, cam, "camera", "width", 16, 16384, &c->width)) < 0 ||
        (rc = opt_int(r, cam, "camera", "height", 16, 16384, &c->height)) < 0 ||
        (rc = opt_int(r, cam, "camera", "exposure_us", 0, 10000000,
                      &c->exposure_us)) < 0 ||
        (rc = opt_int(r, cam, "camera", "gain", -1, 1000000, &c->gain)) < 0 ||
        (rc = opt_int(r, cam, "camera", "buffers", 4, MB_V4L2_MAX_BUFFERS,
                      &c->buffers)) < 0)
        return rc;

    if ((rc = opt_object(r, cam, "camera", "replay", &sub)) < 0)
        return rc;
    if (!sub && c->source == MB_CAMERA_REPLAY)
        return mb_err_set(r->err, MB_EFORMAT,
                          "%s: camera.replay: missing; expected an object "
                          "with \"folder\" for source \"replay\"",
                          r->name);
    if (sub &&
        ((rc = get_string(r, sub, "camera.replay", "folder",
                          c->source == MB_CAMERA_REPLAY, c->replay_folder,
                          sizeof c->replay_folder)) < 0 ||
         (rc = opt_number(r, sub, "camera.replay", "fps", 0, 10000, 0,
                          &c->replay_fps)) < 0 ||
         (rc = opt_bool(r, sub, "camera.replay", "loop", &c->replay_loop)) < 0))
        return rc;

    if ((rc = opt_object(r, cam, "camera", "synth", &sub)) < 0)
        return rc;
    if (sub) {
        if ((rc = get_string(r, sub, "camera.synth", "family", 0,
                             c->synth_family, sizeof c->synth_family)) < 0)
            return rc;
        if (mb_synth_family_from_name(c->synth_family) < 0)
            return mb_err_set(r->err, MB_EFORMAT,
                              "%s: camera.synth.family: expected \"ring\", "
                              "\"flange\", \"hose\" or \"lipseal\", found "
                              "\"%s\"",
                              r->name, c->synth_family);
        double seed = (double)c->synth_seed;
        if ((rc = opt_number(r, sub, "camera.synth", "seed", 0,
                             9007199254740992.0, 0, &seed)) < 0)
            return rc;
        if (seed != floor(seed))
            return mb_err_set(r->err, MB_EFORMAT,
                              "%s: camera.synth.seed: expected an integer "
                              "from 0 to 2^53, found %g",
                              r->name, seed);
        c->synth_seed = (uint64_t)seed;
        if ((rc = opt_number(r, sub, "camera.synth", "defect_rate", 0, 1, 0,
                             &c->synth_defect_rate)) < 0 ||
            (rc = opt_number(r, sub, "camera.synth", "speed_px", 0, 10000, 1,
                             &c->synth_speed_px)) < 0 ||
            (rc = opt_number(r, sub, "camera.synth", "fps", 0, 10000, 0,
                             &c->synth_fps)) < 0 ||
            (rc = opt_number(r, sub, "camera.synth", "size_drift", -0.1, 0.1,
                             0, &c->synth_size_drift)) < 0)
            return rc;
    }
    return MB_OK;
}

/* An array member of obj (section "" for the top level) holding min..max
   items: the array and its count, or a sentence naming it. */
static int bounded_array(const reader *r, const cJSON *obj, const char *section,
                         const char *key, int min, int max, const char *what,
                         const cJSON **arr, int *n)
{
    int rc = mb_json_member(obj, r->name, section, key, MB_JSON_ARRAY, arr, r->err);
    if (rc < 0)
        return rc;
    *n = cJSON_GetArraySize(*arr);
    if (*n >= min && *n <= max)
        return MB_OK;
    char field[MB_JSON_FIELD_LEN];
    snprintf(field, sizeof field, "%s%s%s", section, *section ? "." : "", key);
    if (min == 0)
        return mb_err_set(r->err, MB_EFORMAT, "%s: %s: expected at most %d %s, found %d",
                          r->name, field, max, what, *n);
    return mb_err_set(r->err, MB_EFORMAT, "%s: %s: expected %d to %d %s, found %d",
                      r->name, field, min, max, what, *n);
}

static int read_slots(const reader *r, const cJSON *root,
                      mb_station_config *cfg)
{
    const cJSON *arr, *it;
    int rc, n;
    if ((rc = bounded_array(r, root, "", "slots", 1, MB_STATION_MAX_SLOTS,
                            "part slots", &arr, &n)) < 0)
        return rc;
    int i = 0;
    cJSON_ArrayForEach(it, arr)
    {
        char field[MB_JSON_FIELD_LEN];
        snprintf(field, sizeof field, "slots[%d]", i);
        if (!cJSON_IsObject(it))
            return mb_json_expected(r->err, MB_EFORMAT, r->name, field, it,
                                    "an object with \"slot\" and \"model\"");
        mb_station_slot *s = &cfg->slots[i];
        memset(s, 0, sizeof *s);
        if ((rc = mb_json_member_int(it, r->name, field, "slot", 1,
                                     MB_STATION_MAX_SLOT, &s->slot, r->err)) < 0 ||
            (rc = get_string(r, it, field, "model", 1, s->model,
                             sizeof s->model)) < 0 ||
            (rc = get_string(r, it, field, "calibration", 0, s->calibration,
                             sizeof s->calibration)) < 0 ||
            (rc = opt_number(r, it, field, "mm_per_px", 0, 1000, 1,
                             &s->mm_per_px)) < 0)
            return rc;
        i++;
    }
    cfg->n_slots = n;
    cfg->active_slot = cfg->slots[0].slot;
    return opt_int(r, root, "", "active_slot", 1, MB_STATION_MAX_SLOT,
                   &cfg->active_slot);
}

static int read_plc(const reader *r, const cJSON *root, mb_station_plc *p)
{
    const cJSON *plc, *sub, *arr, *it;
    int rc, v;
    if ((rc = opt_object(r, root, "", "plc", &plc)) < 0 || !plc)
        return rc;
    v = (int)p->mode;
    if ((rc = opt_word(r, plc, "plc", "mode", 0, plc_words, N_WORDS(plc_words),
                       &v)) < 0)
        return rc;
    p->mode = (mb_station_plc_mode)v;
    if ((rc = get_string(r, plc, "plc", "bind", 0, p->bind, sizeof p->bind)) <
            0 ||
        (rc = opt_int(r, plc, "plc", "port", 0, 65535, &p->port)) < 0 ||
        (rc = opt_int(r, plc, "plc", "max_connections", 1, MB_PLC_MAX_CONN,
                      &p->max_connections)) < 0 ||
        (rc = opt_int(r, plc, "plc", "heartbeat_ms", 10, 60000,
                      &p->heartbeat_ms)) < 0)
        return rc;
    uint8_t a6[16];
    if (inet_pton(AF_INET, p->bind, a6) != 1 &&
        inet_pton(AF_INET6, p->bind, a6) != 1)
        return mb_err_set(r->err, MB_EFORMAT,
                          "%s: plc.bind: expected a numeric IPv4 or IPv6 "
                          "address (127.0.0.1, 0.0.0.0, ::), found \"%s\"",
                          r->name, p->bind);
    if (cJSON_GetObjectItemCaseSensitive(plc, "allow")) {
        int n;
        if ((rc = bounded_array(r, plc, "plc", "allow", 0, MB_PLC_MAX_ALLOW,
                                "entries", &arr, &n)) < 0)
            return rc;
        int i = 0;
        cJSON_ArrayForEach(it, arr)
        {
            char field[MB_JSON_FIELD_LEN];
            snprintf(field, sizeof field, "plc.allow[%d]", i);
            int fam, prefix;
            uint8_t addr[16];
            if (!cJSON_IsString(it) || !it->valuestring ||
                strlen(it->valuestring) >= MB_PLC_ADDR_LEN ||
                mb_plc_net_parse(it->valuestring, &fam, addr, &prefix) < 0)
                return mb_json_expected(r->err, MB_EFORMAT, r->name, field, it,
                                        "an IPv4 or IPv6 address with an "
                                        "optional /prefix");
            snprintf(p->allow[i], sizeof p->allow[i], "%s", it->valuestring);
            i++;
        }
        p->n_allow = n;
    }
    if ((rc = opt_object(r, plc, "plc", "client", &sub)) < 0)
        return rc;
    if (!sub && p->mode == MB_STATION_PLC_CLIENT)
        return mb_err_set(r->err, MB_EFORMAT,
                          "%s: plc.client: missing; expected an object with "
                          "\"peer\" for mode \"client\"",
                          r->name);
    if (!sub)
        return MB_OK;
    const char *c = "plc.client";
    v = (int)p->trigger_kind;
    if ((rc = get_string(r, sub, c, "peer", p->mode == MB_STATION_PLC_CLIENT,
                         p->peer, sizeof p->peer)) < 0 ||
        (rc = opt_int(r, sub, c, "port", 1, 65535, &p->peer_port)) < 0 ||
        (rc = opt_int(r, sub, c, "unit", 0, 255, &p->unit_id)) < 0 ||
        (rc = opt_int(r, sub, c, "block_address", 0, 65535 - 15,
                      &p->block_addr)) < 0 ||
        (rc = opt_word(r, sub, c, "trigger", 0, kind_words,
                       N_WORDS(kind_words), &v)) < 0 ||
        (rc = opt_int(r, sub, c, "trigger_address", 0, 65535,
                      &p->trigger_addr)) < 0 ||
        (rc = opt_int(r, sub, c, "ack_address", -1, 65535, &p->ack_addr)) < 0 ||
        (rc = opt_int(r, sub, c, "slot_address", -1, 65535, &p->slot_addr)) <
            0 ||
        (rc = opt_int(r, sub, c, "poll_ms", 1, 10000, &p->poll_ms)) < 0 ||
        (rc = opt_int(r, sub, c, "timeout_ms", 1, 10000, &p->timeout_ms)) < 0)
        return rc;
    p->trigger_kind = (mb_plc_kind)v;
    if (p->unit_id > 247 && p->unit_id != 255)
        return mb_err_set(r->err, MB_EFORMAT,
                          "%s: plc.client.unit: expected 0 to 247 or 255, "
                          "found %d",
                          r->name, p->unit_id);
    return MB_OK;
}

static int read_logs(const reader *r, const cJSON *root,
                     mb_station_config *cfg)
{
    const cJSON *logs, *sub;
    int rc;
    if ((rc = opt_object(r, root, "", "logs", &logs)) < 0 || !logs)
        return rc;
    if ((rc = get_string(r, logs, "logs", "folder", 0, cfg->log_folder,
                         sizeof cfg->log_folder)) < 0 ||
        (rc = opt_int(r, logs, "logs", "flush_interval_s", 0, 3600,
                      &cfg->flush_interval_s)) < 0 ||
        (rc = opt_int(r, logs, "logs", "retention_days", 0, 36500,
                      &cfg->retention_days)) < 0 ||
        (rc = opt_object(r, logs, "logs", "reject_images", &sub)) < 0)
        return rc;
    if (sub &&
        ((rc = get_string(r, sub, "logs.reject_images", "folder", 0,
                          cfg->reject_folder, sizeof cfg->reject_folder)) < 0 ||
         (rc = opt_int(r, sub, "logs.reject_images", "cap_mb", 0, 10000000,
                       &cfg->reject_cap_mb)) < 0))
        return rc;
    return MB_OK;
}

static int read_shifts(const reader *r, const cJSON *root,
                       mb_station_config *cfg)
{
    const cJSON *arr, *it;
    int rc, n;
    if ((rc = bounded_array(r, root, "", "shifts", 1, MB_SHIFT_MAX, "shifts",
                            &arr, &n)) < 0)
        return rc;
    mb_shift_def defs[MB_SHIFT_MAX];
    int i = 0;
    cJSON_ArrayForEach(it, arr)
    {
        char field[MB_JSON_FIELD_LEN], sub[MB_JSON_FIELD_LEN + 8];
        snprintf(field, sizeof field, "shifts[%d]", i);
        if (!cJSON_IsObject(it))
            return mb_json_expected(r->err, MB_EFORMAT, r->name, field, it,
                                    "an object with \"name\" and \"start\"");
        const cJSON *name, *start;
        if ((rc = mb_json_member(it, r->name, field, "name", MB_JSON_STRING,
                                 &name, r->err)) < 0 ||
            (rc = mb_json_member(it, r->name, field, "start", MB_JSON_STRING,
                                 &start, r->err)) < 0)
            return rc;
        if (!mb_shift_name_ok(name->valuestring)) {
            snprintf(sub, sizeof sub, "%s.name", field);
            return mb_json_expected(r->err, MB_EFORMAT, r->name, sub, name,
                                    "1 to %d letters, digits, '_' or '-'",
                                    MB_SHIFT_NAME_LEN - 1);
        }
        if (mb_shift_parse_hhmm(start->valuestring, &defs[i].start_min) < 0) {
            snprintf(sub, sizeof sub, "%s.start", field);
            return mb_json_expected(r->err, MB_EFORMAT, r->name, sub, start,
                                    "a local time \"HH:MM\" from 00:00 to "
                                    "23:59");
        }
        snprintf(defs[i].name, sizeof defs[i].name, "%s", name->valuestring);
        i++;
    }
    char inner[MB_ERR_LEN];
    rc = mb_shift_calendar_init(&cfg->shifts, defs, n, "shifts", inner);
    if (rc < 0)
        return mb_err_set(r->err, rc, "%s: %s", r->name, inner);
    return MB_OK;
}

static int read_drift(const reader *r, const cJSON *root,
                      mb_station_config *cfg)
{
    const cJSON *d, *arr, *it;
    int rc;
    if ((rc = opt_object(r, root, "", "drift", &d)) < 0 || !d)
        return rc;
    if ((rc = opt_number(r, d, "drift", "lambda", 0, 1, 1,
                         &cfg->drift_lambda)) < 0 ||
        (rc = opt_number(r, d, "drift", "L", 0, 10, 1, &cfg->drift_L)) < 0 ||
        (rc = opt_int(r, d, "drift", "clear_after", 1, 1000000,
                      &cfg->drift_clear_after)) < 0)
        return rc;
    if (!cJSON_GetObjectItemCaseSensitive(d, "modes"))
        return MB_OK;
    int n;
    if ((rc = bounded_array(r, d, "drift", "modes", 0, MB_STATION_MAX_MODES,
                            "mode numbers", &arr, &n)) < 0)
        return rc;
    int i = 0;
    cJSON_ArrayForEach(it, arr)
    {
        char field[MB_JSON_FIELD_LEN];
        snprintf(field, sizeof field, "drift.modes[%d]", i);
        if ((rc = mb_json_int(it, r->name, field, 1, MB_STATION_MAX_MODES,
                              &cfg->drift_modes[i], r->err)) < 0)
            return rc;
        for (int j = 0; j < i; j++)
            if (cfg->drift_modes[j] == cfg->drift_modes[i])
                return mb_err_set(r->err, MB_EFORMAT,
                                  "%s: %s: mode %d is listed twice", r->name,
                                  field, cfg->drift_modes[i]);
        i++;
    }
    cfg->n_drift_modes = n;
    return MB_OK;
}

static int read_doc(const reader *r, const cJSON *root, mb_station_config *cfg)
{
    int rc, v;
    const cJSON *t;
    if ((rc = mb_json_check_header(root, r->name, MB_STATION_FORMAT,
                                   MB_STATION_VERSION, r->err)) < 0 ||
        (rc = get_string(r, root, "", "station", 0, cfg->station,
                         sizeof cfg->station)) < 0 ||
        (rc = read_camera(r, root, &cfg->camera)) < 0)
        return rc;
    v = (int)cfg->trigger;
    if ((rc = opt_word(r, root, "", "trigger", 0, trigger_words,
                       N_WORDS(trigger_words), &v)) < 0)
        return rc;
    cfg->trigger = (mb_trigger_mode)v;
    if ((rc = read_slots(r, root, cfg)) < 0 ||
        (rc = read_plc(r, root, &cfg->plc)) < 0 ||
        (rc = read_logs(r, root, cfg)) < 0 ||
        (rc = read_shifts(r, root, cfg)) < 0 ||
        (rc = read_drift(r, root, cfg)) < 0 ||
        (rc = opt_object(r, root, "", "timeouts", &t)) < 0)
        return rc;
    if (t &&
        ((rc = opt_int(r, t, "timeouts", "inspection_ms", 1, 60000,
                       &cfg->inspection_timeout_ms)) < 0 ||
         (rc = opt_int(r, t, "timeouts", "frame_ms", 1, 600000,
                       &cfg->frame_timeout_ms)) < 0))
        return rc;
    return mb_station_config_check(cfg, r->name, r->err);
}

int mb_station_config_parse(const char *text, size_t len, const char *name,
                            mb_station_config *cfg, char *err)
{
    if (!name)
        name = "station config";
    if (!text || !cfg)
        return mb_err_set(err, MB_EINVAL, "%s: no text or no output", name);
    mb_station_config_default(cfg);
    cJSON *root = NULL;
    int rc = mb_json_parse(text, len, name, &root, err);
    if (rc < 0)
        return rc;
    reader r = {name, err};
    rc = read_doc(&r, root, cfg);
    cJSON_Delete(root);
    return rc;
}

int mb_station_config_load(const char *path, mb_station_config *cfg,
                           char *err)
{
    if (!path || !cfg)
        return mb_err_set(err, MB_EINVAL, "station config: no path");
    char *text = NULL;
    size_t len = 0;
    int rc = mb_file_read_all(path, STATION_MAX_BYTES, &text, &len, err);
    if (rc < 0)
        return rc;
    rc = mb_station_config_parse(text, len, path, cfg, err);
    free(text);
    return rc;
}

/* ---- checks ---- */

int mb_station_config_check(const mb_station_config *cfg, const char *name,
                            char *err)
{
    if (!name)
        name = "station config";
    if (!cfg)
        return mb_err_set(err, MB_EINVAL, "%s: no configuration", name);
    const mb_station_camera *c = &cfg->camera;
    if (cfg->station[0] == '\0')
        return mb_err_set(err, MB_EINVAL, "%s: station: expected a name",
                          name);
    if (c->source == MB_CAMERA_V4L2 && c->device[0] == '\0')
        return mb_err_set(err, MB_EINVAL,
                          "%s: camera.device: missing; expected the camera's "
                          "device path for source \"v4l2\"",
                          name);
    if (c->source == MB_CAMERA_REPLAY && c->replay_folder[0] == '\0')
        return mb_err_set(err, MB_EINVAL,
                          "%s: camera.replay.folder: missing; expected a "
                          "folder of images for source \"replay\"",
                          name);
    if (c->source == MB_CAMERA_SYNTH &&
        mb_synth_family_from_name(c->synth_family) < 0)
        return mb_err_set(err, MB_EINVAL,
                          "%s: camera.synth.family: \"%s\" is not a family of "
                          "the synthetic line",
                          name, c->synth_family);
    if (c->width < 16 || c->height < 16 || c->width > 16384 ||
        c->height > 16384)
        return mb_err_set(err, MB_EINVAL,
                          "%s: camera.width/height: expected 16 to 16384 px",
                          name);
    if (cfg->n_slots < 1 || cfg->n_slots > MB_STATION_MAX_SLOTS)
        return mb_err_set(err, MB_EINVAL,
                          "%s: slots: expected 1 to %d part slots", name,
                          MB_STATION_MAX_SLOTS);
    for (int i = 0; i < cfg->n_slots; i++) {
        const mb_station_slot *s = &cfg->slots[i];
        if (s->slot < 1 || s->slot > MB_STATION_MAX_SLOT)
            return mb_err_set(err, MB_EINVAL,
                              "%s: slots[%d].slot: expected 1 to %d", name, i,
                              MB_STATION_MAX_SLOT);
        if (s->model[0] == '\0')
            return mb_err_set(err, MB_EINVAL,
                              "%s: slots[%d].model: expected a model file",
                              name, i);
        if (!(s->mm_per_px >= 0) || !isfinite(s->mm_per_px))
            return mb_err_set(err, MB_EINVAL,
                              "%s: slots[%d].mm_per_px: expected a scale "
                              "above 0",
                              name, i);
        for (int j = 0; j < i; j++)
            if (cfg->slots[j].slot == s->slot)
                return mb_err_set(err, MB_EINVAL,
                                  "%s: slots[%d].slot: slot %d is already "
                                  "slots[%d]",
                                  name, i, s->slot, j);
    }
    if (!mb_station_config_slot(cfg, cfg->active_slot))
        return mb_err_set(err, MB_EINVAL,
                          "%s: active_slot: slot %d is not among the slots",
                          name, cfg->active_slot);
    if (cfg->trigger == MB_TRIGGER_PLC && cfg->plc.mode == MB_STATION_PLC_NONE)
        return mb_err_set(err, MB_EINVAL,
                          "%s: trigger: \"plc\" needs a PLC link, but "
                          "plc.mode is \"none\"",
                          name);
    if (cfg->plc.mode != MB_STATION_PLC_NONE) {
        mb_plc_config pc;
        char inner[MB_ERR_LEN];
        mb_station_config_plc(cfg, &pc);
        int rc = mb_plc_config_check(&pc, inner);
        if (rc < 0)
            return mb_err_set(err, MB_EINVAL, "%s: %s", name, inner);
    }
    if (cfg->log_folder[0] == '\0')
        return mb_err_set(err, MB_EINVAL, "%s: logs.folder: expected a folder",
                          name);
    if (cfg->flush_interval_s < 0 || cfg->retention_days < 0 ||
        cfg->reject_cap_mb < 0)
        return mb_err_set(err, MB_EINVAL,
                          "%s: logs: intervals, days and caps must not be "
                          "negative",
                          name);
    if (cfg->reject_cap_mb > 0 && cfg->reject_folder[0] == '\0')
        return mb_err_set(err, MB_EINVAL,
                          "%s: logs.reject_images.folder: expected a folder",
                          name);
    if (cfg->shifts.n < 1 || cfg->shifts.n > MB_SHIFT_MAX)
        return mb_err_set(err, MB_EINVAL, "%s: shifts: expected 1 to %d shifts",
                          name, MB_SHIFT_MAX);
    if (!(cfg->drift_lambda > 0 && cfg->drift_lambda <= 1))
        return mb_err_set(err, MB_EINVAL,
                          "%s: drift.lambda: expected 0 < lambda <= 1", name);
    if (!(cfg->drift_L > 0 && cfg->drift_L <= 10))
        return mb_err_set(err, MB_EINVAL, "%s: drift.L: expected 0 < L <= 10",
                          name);
    if (cfg->drift_clear_after < 1)
        return mb_err_set(err, MB_EINVAL,
                          "%s: drift.clear_after: expected at least 1 part",
                          name);
    if (cfg->n_drift_modes < 0 || cfg->n_drift_modes > MB_STATION_MAX_MODES)
        return mb_err_set(err, MB_EINVAL,
                          "%s: drift.modes: expected at most %d modes", name,
                          MB_STATION_MAX_MODES);
    if (cfg->inspection_timeout_ms < 1 || cfg->frame_timeout_ms < 1)
        return mb_err_set(err, MB_EINVAL,
                          "%s: timeouts: expected at least 1 ms", name);
    return MB_OK;
}

const mb_station_slot *mb_station_config_slot(const mb_station_config *cfg,
                                              int slot)
{
    if (!cfg)
        return NULL;
    for (int i = 0; i < cfg->n_slots && i < MB_STATION_MAX_SLOTS; i++)
        if (cfg->slots[i].slot == slot)
            return &cfg->slots[i];
    return NULL;
}

void mb_station_config_plc(const mb_station_config *cfg, mb_plc_config *out)
{
    mb_plc_config_default(out);
    const mb_station_plc *p = &cfg->plc;
    out->mode = p->mode == MB_STATION_PLC_CLIENT ? MB_PLC_CLIENT : MB_PLC_SERVER;
    snprintf(out->bind_addr, sizeof out->bind_addr, "%s", p->bind);
    out->port = p->port;
    out->max_connections = p->max_connections;
    out->n_allow = p->n_allow;
    for (int i = 0; i < p->n_allow && i < MB_PLC_MAX_ALLOW; i++)
        snprintf(out->allow[i], sizeof out->allow[i], "%s", p->allow[i]);
    snprintf(out->peer_addr, sizeof out->peer_addr, "%s", p->peer);
    out->peer_port = p->peer_port;
    out->unit_id = p->unit_id;
    out->block_addr = p->block_addr;
    out->trigger_kind = p->trigger_kind;
    out->trigger_addr = p->trigger_addr;
    out->ack_addr = p->ack_addr;
    out->slot_addr = p->slot_addr;
    out->poll_ms = p->poll_ms;
    out->timeout_ms = p->timeout_ms;
    out->heartbeat_ms = p->heartbeat_ms;
    out->active_slot = cfg->active_slot;
}

void mb_station_config_v4l2(const mb_station_config *cfg, mb_v4l2_config *out)
{
    memset(out, 0, sizeof *out);
    out->path = cfg->camera.device;
    out->width = cfg->camera.width;
    out->height = cfg->camera.height;
    out->exposure_us = cfg->camera.exposure_us;
    out->gain = cfg->camera.gain;
    out->buffers = cfg->camera.buffers;
}

int mb_station_config_synth(const mb_station_config *cfg,
                            mb_synth_source_config *out)
{
    int fam = mb_synth_family_from_name(cfg->camera.synth_family);
    if (fam < 0)
        return MB_EINVAL;
    mb_synth_source_config_default(out, (mb_synth_family)fam);
    out->synth.width = cfg->camera.width;
    out->synth.height = cfg->camera.height;
    out->synth.seed = cfg->camera.synth_seed;
    out->synth.defect_rate = cfg->camera.synth_defect_rate;
    out->speed_px = cfg->camera.synth_speed_px;
    out->render_ahead = 1; /* a camera exposes the next frame on its own */
    out->fps = cfg->camera.synth_fps;
    return MB_OK;
}

/* ---- differences ---- */

typedef struct {
    char *out;
    size_t size, used;
    int n;
} diff_list;

static void differ(diff_list *d, const char *field)
{
    d->n++;
    if (!d->out || d->size == 0)
        return;
    if (d->used + strlen(field) + 6 >= d->size) {
        if (d->used + 4 < d->size && !strstr(d->out, "..."))
            d->used += (size_t)snprintf(d->out + d->used, d->size - d->used,
                                        "%s...", d->used ? ", " : "");
        return;
    }
    d->used += (size_t)snprintf(d->out + d->used, d->size - d->used, "%s%s",
                                d->used ? ", " : "", field);
}

#define DIFF_NUM(f, name)                                                      \
    do {                                                                       \
        if (a->f != b->f)                                                      \
            differ(&d, name);                                                  \
    } while (0)
#define DIFF_STR(f, name)                                                      \
    do {                                                                       \
        if (strcmp(a->f, b->f) != 0)                                           \
            differ(&d, name);                                                  \
    } while (0)

int mb_station_config_diff(const mb_station_config *a,
                           const mb_station_config *b, char *out, size_t size)
{
    diff_list d = {out, size, 0, 0};
    if (out && size)
        out[0] = '\0';
    if (!a || !b)
        return a != b;
    DIFF_STR(station, "station");
    DIFF_NUM(camera.source, "camera.source");
    DIFF_STR(camera.device, "camera.device");
    DIFF_NUM(camera.width, "camera.width");
    DIFF_NUM(camera.height, "camera.height");
    DIFF_NUM(camera.exposure_us, "camera.exposure_us");
    DIFF_NUM(camera.gain, "camera.gain");
    DIFF_NUM(camera.buffers, "camera.buffers");
    DIFF_STR(camera.replay_folder, "camera.replay.folder");
    DIFF_NUM(camera.replay_fps, "camera.replay.fps");
    DIFF_NUM(camera.replay_loop, "camera.replay.loop");
    DIFF_STR(camera.synth_family, "camera.synth.family");
    DIFF_NUM(camera.synth_seed, "camera.synth.seed");
    DIFF_NUM(camera.synth_defect_rate, "camera.synth.defect_rate");
    DIFF_NUM(camera.synth_speed_px, "camera.synth.speed_px");
    DIFF_NUM(camera.synth_fps, "camera.synth.fps");
    DIFF_NUM(camera.synth_size_drift, "camera.synth.size_drift");
    DIFF_NUM(trigger, "trigger");
    int n = a->n_slots > b->n_slots ? a->n_slots : b->n_slots;
    if (a->n_slots != b->n_slots)
        differ(&d, "slots");
    for (int i = 0; i < n && i < MB_STATION_MAX_SLOTS; i++) {
        if (i >= a->n_slots || i >= b->n_slots)
            break;
        char f[64];
        const mb_station_slot *x = &a->slots[i], *y = &b->slots[i];
        if (x->slot != y->slot) {
            snprintf(f, sizeof f, "slots[%d].slot", i);
            differ(&d, f);
        }
        if (strcmp(x->model, y->model) != 0) {
            snprintf(f, sizeof f, "slots[%d].model", i);
            differ(&d, f);
        }
        if (strcmp(x->calibration, y->calibration) != 0) {
            snprintf(f, sizeof f, "slots[%d].calibration", i);
            differ(&d, f);
        }
        if (x->mm_per_px != y->mm_per_px) {
            snprintf(f, sizeof f, "slots[%d].mm_per_px", i);
            differ(&d, f);
        }
    }
    DIFF_NUM(active_slot, "active_slot");
    DIFF_NUM(plc.mode, "plc.mode");
    DIFF_STR(plc.bind, "plc.bind");
    DIFF_NUM(plc.port, "plc.port");
    DIFF_NUM(plc.max_connections, "plc.max_connections");
    int allow_same = a->plc.n_allow == b->plc.n_allow;
    for (int i = 0; allow_same && i < a->plc.n_allow && i < MB_PLC_MAX_ALLOW;
         i++)
        allow_same = strcmp(a->plc.allow[i], b->plc.allow[i]) == 0;
    if (!allow_same)
        differ(&d, "plc.allow");
    DIFF_NUM(plc.heartbeat_ms, "plc.heartbeat_ms");
    DIFF_STR(plc.peer, "plc.client.peer");
    DIFF_NUM(plc.peer_port, "plc.client.port");
    DIFF_NUM(plc.unit_id, "plc.client.unit");
    DIFF_NUM(plc.block_addr, "plc.client.block_address");
    DIFF_NUM(plc.trigger_kind, "plc.client.trigger");
    DIFF_NUM(plc.trigger_addr, "plc.client.trigger_address");
    DIFF_NUM(plc.ack_addr, "plc.client.ack_address");
    DIFF_NUM(plc.slot_addr, "plc.client.slot_address");
    DIFF_NUM(plc.poll_ms, "plc.client.poll_ms");
    DIFF_NUM(plc.timeout_ms, "plc.client.timeout_ms");
    DIFF_STR(log_folder, "logs.folder");
    DIFF_NUM(flush_interval_s, "logs.flush_interval_s");
    DIFF_NUM(retention_days, "logs.retention_days");
    DIFF_STR(reject_folder, "logs.reject_images.folder");
    DIFF_NUM(reject_cap_mb, "logs.reject_images.cap_mb");
    int shifts_same = a->shifts.n == b->shifts.n;
    for (int i = 0; shifts_same && i < a->shifts.n && i < MB_SHIFT_MAX; i++)
        shifts_same =
            a->shifts.shifts[i].start_min == b->shifts.shifts[i].start_min &&
            strcmp(a->shifts.shifts[i].name, b->shifts.shifts[i].name) == 0;
    if (!shifts_same)
        differ(&d, "shifts");
    DIFF_NUM(drift_lambda, "drift.lambda");
    DIFF_NUM(drift_L, "drift.L");
    DIFF_NUM(drift_clear_after, "drift.clear_after");
    int modes_same = a->n_drift_modes == b->n_drift_modes;
    for (int i = 0; modes_same && i < a->n_drift_modes &&
                    i < MB_STATION_MAX_MODES;
         i++)
        modes_same = a->drift_modes[i] == b->drift_modes[i];
    if (!modes_same)
        differ(&d, "drift.modes");
    DIFF_NUM(inspection_timeout_ms, "timeouts.inspection_ms");
    DIFF_NUM(frame_timeout_ms, "timeouts.frame_ms");
    return d.n;
}
