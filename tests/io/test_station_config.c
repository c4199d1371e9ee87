/*
 * tests/io/test_station_config.c - the station configuration document
 * (io/station_config.h): a complete document reads back field by field, a
 * minimal one gets the documented defaults, the shipped example loads, and
 * every kind of bad value is refused with the exact MB_E code and a
 * sentence that starts with the file name and names the field.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "station_config.h"

#include <cjson/cJSON.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define NAME "station.json"

static const char good_doc[] =
    "{\"format\": \"modeband-station\", \"version\": 1,\n"
    " \"station\": \"test-cell-4\",\n"
    " \"camera\": {\"source\": \"v4l2\", \"device\": \"/dev/video7\",\n"
    "   \"width\": 640, \"height\": 480, \"exposure_us\": 1200, \"gain\": 3,\n"
    "   \"buffers\": 6,\n"
    "   \"replay\": {\"folder\": \"/srv/frames\", \"fps\": 12.5, \"loop\": true},\n"
    "   \"synth\": {\"family\": \"flange\", \"seed\": 99, \"defect_rate\": 0.25,\n"
    "             \"speed_px\": 40, \"fps\": 30, \"size_drift\": 0.01}},\n"
    " \"trigger\": \"every\",\n"
    " \"slots\": [{\"slot\": 3, \"model\": \"a.json\", \"calibration\": \"c.json\"},\n"
    "           {\"slot\": 7, \"model\": \"b.json\", \"mm_per_px\": 0.05}],\n"
    " \"active_slot\": 7,\n"
    " \"plc\": {\"mode\": \"client\", \"bind\": \"::\", \"port\": 1502,\n"
    "   \"max_connections\": 2, \"allow\": [\"10.1.0.0/16\", \"fd00::/8\"],\n"
    "   \"heartbeat_ms\": 250,\n"
    "   \"client\": {\"peer\": \"plc-7.example\", \"port\": 5020, \"unit\": 3,\n"
    "     \"block_address\": 400, \"trigger\": \"register\",\n"
    "     \"trigger_address\": 12, \"ack_address\": 13, \"slot_address\": 14,\n"
    "     \"poll_ms\": 20, \"timeout_ms\": 150}},\n"
    " \"logs\": {\"folder\": \"/data/logs\", \"flush_interval_s\": 5,\n"
    "   \"retention_days\": 30,\n"
    "   \"reject_images\": {\"folder\": \"/data/rej\", \"cap_mb\": 77}},\n"
    " \"shifts\": [{\"name\": \"night\", \"start\": \"22:30\"},\n"
    "             {\"name\": \"day\", \"start\": \"07:15\"}],\n"
    " \"drift\": {\"lambda\": 0.3, \"L\": 2.5, \"clear_after\": 20,\n"
    "           \"modes\": [2, 5]},\n"
    " \"timeouts\": {\"inspection_ms\": 80, \"frame_ms\": 3000},\n"
    " \"comment\": \"members a later version adds are ignored\"}\n";

static const char minimal_doc[] =
    "{\"format\": \"modeband-station\", \"version\": 1,\n"
    " \"camera\": {\"source\": \"synth\"}, \"trigger\": \"free\",\n"
    " \"plc\": {\"mode\": \"none\"},\n"
    " \"slots\": [{\"slot\": 1, \"model\": \"m.json\"}],\n"
    " \"shifts\": [{\"name\": \"all-day\", \"start\": \"00:00\"}]}";

static void test_good(void **state)
{
    mb_station_config c;
    char err[MB_ERR_LEN] = "";
    int rc = mb_station_config_parse(good_doc, strlen(good_doc), NAME, &c, err);
    if (rc != 0)
        fail_msg("good document refused: %s", err);
    assert_string_equal(c.station, "test-cell-4");
    assert_int_equal(c.camera.source, MB_CAMERA_V4L2);
    assert_string_equal(c.camera.device, "/dev/video7");
    assert_int_equal(c.camera.width, 640);
    assert_int_equal(c.camera.height, 480);
    assert_int_equal(c.camera.exposure_us, 1200);
    assert_int_equal(c.camera.gain, 3);
    assert_int_equal(c.camera.buffers, 6);
    assert_string_equal(c.camera.replay_folder, "/srv/frames");
    assert_true(c.camera.replay_fps == 12.5);
    assert_int_equal(c.camera.replay_loop, 1);
    assert_string_equal(c.camera.synth_family, "flange");
    assert_true(c.camera.synth_seed == 99);
    assert_true(c.camera.synth_defect_rate == 0.25);
    assert_true(c.camera.synth_speed_px == 40);
    assert_true(c.camera.synth_fps == 30);
    assert_true(c.camera.synth_size_drift == 0.01);
    assert_int_equal(c.trigger, MB_TRIGGER_EVERY);
    assert_int_equal(c.n_slots, 2);
    assert_int_equal(c.slots[0].slot, 3);
    assert_string_equal(c.slots[0].model, "a.json");
    assert_string_equal(c.slots[0].calibration, "c.json");
    assert_true(c.slots[0].mm_per_px == 0);
    assert_int_equal(c.slots[1].slot, 7);
    assert_string_equal(c.slots[1].calibration, "");
    assert_true(c.slots[1].mm_per_px == 0.05);
    assert_int_equal(c.active_slot, 7);
    assert_ptr_equal(mb_station_config_slot(&c, 7), &c.slots[1]);
    assert_null(mb_station_config_slot(&c, 4));
    assert_int_equal(c.plc.mode, MB_STATION_PLC_CLIENT);
    assert_string_equal(c.plc.bind, "::");
    assert_int_equal(c.plc.port, 1502);
    assert_int_equal(c.plc.max_connections, 2);
    assert_int_equal(c.plc.n_allow, 2);
    assert_string_equal(c.plc.allow[1], "fd00::/8");
    assert_int_equal(c.plc.heartbeat_ms, 250);
    assert_string_equal(c.plc.peer, "plc-7.example");
    assert_int_equal(c.plc.peer_port, 5020);
    assert_int_equal(c.plc.unit_id, 3);
    assert_int_equal(c.plc.block_addr, 400);
    assert_int_equal(c.plc.trigger_kind, MB_PLC_ON_REGISTER);
    assert_int_equal(c.plc.trigger_addr, 12);
    assert_int_equal(c.plc.ack_addr, 13);
    assert_int_equal(c.plc.slot_addr, 14);
    assert_int_equal(c.plc.poll_ms, 20);
    assert_int_equal(c.plc.timeout_ms, 150);
    assert_string_equal(c.log_folder, "/data/logs");
    assert_int_equal(c.flush_interval_s, 5);
    assert_int_equal(c.retention_days, 30);
    assert_string_equal(c.reject_folder, "/data/rej");
    assert_int_equal(c.reject_cap_mb, 77);
    /* Sorted by start: day (07:15) before night (22:30). */
    assert_int_equal(c.shifts.n, 2);
    assert_string_equal(c.shifts.shifts[0].name, "day");
    assert_int_equal(c.shifts.shifts[0].start_min, 7 * 60 + 15);
    assert_string_equal(c.shifts.shifts[1].name, "night");
    assert_int_equal(c.shifts.shifts[1].start_min, 22 * 60 + 30);
    assert_true(c.drift_lambda == 0.3);
    assert_true(c.drift_L == 2.5);
    assert_int_equal(c.drift_clear_after, 20);
    assert_int_equal(c.n_drift_modes, 2);
    assert_int_equal(c.drift_modes[0], 2);
    assert_int_equal(c.drift_modes[1], 5);
    assert_int_equal(c.inspection_timeout_ms, 80);
    assert_int_equal(c.frame_timeout_ms, 3000);

    /* The converters hand the values on. */
    mb_plc_config pc;
    mb_station_config_plc(&c, &pc);
    assert_int_equal(pc.mode, MB_PLC_CLIENT);
    assert_string_equal(pc.peer_addr, "plc-7.example");
    assert_int_equal(pc.block_addr, 400);
    assert_int_equal(pc.active_slot, 7);
    assert_int_equal(mb_plc_config_check(&pc, err), 0);
    mb_v4l2_config vc;
    mb_station_config_v4l2(&c, &vc);
    assert_string_equal(vc.path, "/dev/video7");
    assert_int_equal(vc.buffers, 6);
    mb_synth_source_config sc;
    assert_int_equal(mb_station_config_synth(&c, &sc), 0);
    assert_int_equal(sc.synth.family, MB_SYNTH_FLANGE);
    assert_true(sc.synth.seed == 99);
    assert_true(sc.speed_px == 40);
    assert_int_equal(sc.synth.width, 640);
}

static void test_defaults(void **state)
{
    mb_station_config c;
    char err[MB_ERR_LEN] = "";
    int rc =
        mb_station_config_parse(minimal_doc, strlen(minimal_doc), NAME, &c, err);
    if (rc != 0)
        fail_msg("minimal document refused: %s", err);
    assert_string_equal(c.station, "station");
    assert_int_equal(c.camera.source, MB_CAMERA_SYNTH);
    assert_int_equal(c.camera.width, 1280);
    assert_int_equal(c.camera.height, 1024);
    assert_int_equal(c.camera.gain, -1);
    assert_int_equal(c.camera.buffers, 4);
    assert_string_equal(c.camera.synth_family, "ring");
    assert_true(c.camera.synth_speed_px == 60);
    assert_int_equal(c.active_slot, 1);
    assert_int_equal(c.plc.mode, MB_STATION_PLC_NONE);
    assert_int_equal(c.plc.port, 502);
    assert_string_equal(c.plc.bind, "127.0.0.1");
    assert_int_equal(c.plc.max_connections, 4);
    assert_int_equal(c.plc.heartbeat_ms, 100);
    assert_string_equal(c.log_folder, "/var/log/modeband");
    assert_int_equal(c.flush_interval_s, 1);
    assert_int_equal(c.retention_days, 90);
    assert_string_equal(c.reject_folder, "/var/lib/modeband/rejects");
    assert_int_equal(c.reject_cap_mb, 1024);
    assert_true(c.drift_lambda == 0.2);
    assert_true(c.drift_L == 3);
    assert_int_equal(c.drift_clear_after, 50);
    assert_int_equal(c.n_drift_modes, 3);
    assert_int_equal(c.inspection_timeout_ms, 200);
    assert_int_equal(c.frame_timeout_ms, 1000);
}

static void test_example_file(void **state)
{
    mb_station_config c;
    char err[MB_ERR_LEN] = "";
    int rc = mb_station_config_load(MB_TEST_EXAMPLE, &c, err);
    if (rc != 0)
        fail_msg("the shipped example is refused: %s", err);
    assert_int_equal(c.plc.mode, MB_STATION_PLC_SERVER);
    assert_int_equal(c.plc.port, 1502);
    assert_int_equal(c.n_slots, 2);
    assert_int_equal(c.shifts.n, 3);
    /* The night shift crosses midnight: the last start of the day. */
    assert_string_equal(c.shifts.shifts[2].name, "night");
    assert_int_equal(c.shifts.shifts[2].start_min, 22 * 60);
    /* A missing file names itself. */
    rc = mb_station_config_load("no-such-station.json", &c, err);
    assert_int_equal(rc, MB_ENOTFOUND);
    assert_non_null(strstr(err, "no-such-station.json"));
}

/* ---- bad documents: the good one with one member changed ---- */

/* Walk "a.b[2].c" in root; create nothing. *parent gets the container of
   the last step, *key its name (or NULL and *index for an array). */
static cJSON *walk(cJSON *root, const char *path, cJSON **parent, char *key,
                   int *index)
{
    cJSON *cur = root, *par = NULL;
    const char *p = path;
    *index = -1;
    key[0] = '\0';
    while (*p) {
        par = cur;
        if (*p == '[') {
            *index = atoi(p + 1);
            key[0] = '\0';
            cur = cJSON_GetArrayItem(cur, *index);
            p = strchr(p, ']') + 1;
        } else {
            size_t n = strcspn(p, ".[");
            memcpy(key, p, n);
            key[n] = '\0';
            *index = -1;
            cur = cJSON_GetObjectItemCaseSensitive(cur, key);
            p += n;
        }
        if (*p == '.')
            p++;
    }
    *parent = par;
    return cur;
}

/* The good document (or minimal one) with path set to the JSON text value,
   or deleted when value is NULL; printed into a malloc'd string. */
static char *mutate(const char *base, const char *path, const char *value)
{
    cJSON *root = cJSON_Parse(base);
    assert_non_null(root);
    cJSON *parent;
    char key[64];
    int index;
    walk(root, path, &parent, key, &index);
    assert_non_null(parent);
    if (!value) {
        if (index >= 0)
            cJSON_DeleteItemFromArray(parent, index);
        else
            cJSON_DeleteItemFromObjectCaseSensitive(parent, key);
    } else {
        cJSON *v = cJSON_Parse(value);
        assert_non_null(v);
        if (index >= 0)
            assert_true(cJSON_ReplaceItemInArray(parent, index, v));
        else if (cJSON_GetObjectItemCaseSensitive(parent, key))
            assert_true(cJSON_ReplaceItemInObjectCaseSensitive(parent, key, v));
        else
            assert_true(cJSON_AddItemToObject(parent, key, v));
    }
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    assert_non_null(text);
    return text;
}

static void expect_bad(const char *base, const char *path, const char *value,
                       int code, const char *field)
{
    char *text = mutate(base, path, value);
    mb_station_config c;
    char err[MB_ERR_LEN] = "";
    int rc = mb_station_config_parse(text, strlen(text), NAME, &c, err);
    if (rc != code)
        fail_msg("%s = %s: expected %d (%s), got %d: %s", path,
                 value ? value : "(deleted)", code, mb_strerror(code), rc, err);
    if (strncmp(err, NAME ": ", strlen(NAME) + 2) != 0)
        fail_msg("%s: sentence does not start with the file name: %s", path,
                 err);
    if (!strstr(err, field))
        fail_msg("%s: sentence does not name \"%s\": %s", path, field, err);
    cJSON_free(text);
}

static void test_bad_header(void **state)
{
    expect_bad(good_doc, "version", "2", MB_EVERSION, "version");
    expect_bad(good_doc, "version", NULL, MB_EFORMAT, "version");
    expect_bad(good_doc, "format", "\"modeband-model\"", MB_EVERSION, "format");
    expect_bad(good_doc, "format", NULL, MB_EFORMAT, "format");
    expect_bad(good_doc, "station", "\"\"", MB_EFORMAT, "station");
    expect_bad(good_doc, "station", "17", MB_EFORMAT, "station");
}

static void test_bad_camera(void **state)
{
    expect_bad(good_doc, "camera", NULL, MB_EFORMAT, "camera");
    expect_bad(good_doc, "camera", "[]", MB_EFORMAT, "camera");
    expect_bad(good_doc, "camera.source", "\"usb\"", MB_EFORMAT,
               "camera.source");
    expect_bad(good_doc, "camera.source", NULL, MB_EFORMAT, "camera.source");
    expect_bad(good_doc, "camera.device", NULL, MB_EFORMAT, "camera.device");
    expect_bad(good_doc, "camera.width", "8", MB_EFORMAT, "camera.width");
    expect_bad(good_doc, "camera.height", "480.5", MB_EFORMAT, "camera.height");
    expect_bad(good_doc, "camera.exposure_us", "-1", MB_EFORMAT,
               "camera.exposure_us");
    expect_bad(good_doc, "camera.gain", "-2", MB_EFORMAT, "camera.gain");
    expect_bad(good_doc, "camera.buffers", "2", MB_EFORMAT, "camera.buffers");
    expect_bad(good_doc, "camera.buffers", "null", MB_ENUMERIC,
               "camera.buffers");
    expect_bad(good_doc, "camera.replay.fps", "-1", MB_EFORMAT,
               "camera.replay.fps");
    expect_bad(good_doc, "camera.replay.loop", "1", MB_EFORMAT,
               "camera.replay.loop");
    expect_bad(good_doc, "camera.synth.family", "\"donut\"", MB_EFORMAT,
               "camera.synth.family");
    expect_bad(good_doc, "camera.synth.seed", "1.5", MB_EFORMAT,
               "camera.synth.seed");
    expect_bad(good_doc, "camera.synth.defect_rate", "1.5", MB_EFORMAT,
               "camera.synth.defect_rate");
    expect_bad(good_doc, "camera.synth.speed_px", "0", MB_EFORMAT,
               "camera.synth.speed_px");
    expect_bad(good_doc, "camera.synth.size_drift", "1e999", MB_ENUMERIC,
               "camera.synth.size_drift");
    /* A replay source needs its folder. */
    char *t = mutate(good_doc, "camera.source", "\"replay\"");
    expect_bad(t, "camera.replay", NULL, MB_EFORMAT, "camera.replay");
    expect_bad(t, "camera.replay.folder", NULL, MB_EFORMAT,
               "camera.replay.folder");
    cJSON_free(t);
}

static void test_bad_slots(void **state)
{
    expect_bad(good_doc, "trigger", "\"sometimes\"", MB_EFORMAT, "trigger");
    expect_bad(good_doc, "slots", NULL, MB_EFORMAT, "slots");
    expect_bad(good_doc, "slots", "[]", MB_EFORMAT, "slots");
    expect_bad(good_doc, "slots[0]", "\"a.json\"", MB_EFORMAT, "slots[0]");
    expect_bad(good_doc, "slots[0].model", NULL, MB_EFORMAT, "slots[0].model");
    expect_bad(good_doc, "slots[0].slot", "0", MB_EFORMAT, "slots[0].slot");
    expect_bad(good_doc, "slots[1].slot", "100", MB_EFORMAT, "slots[1].slot");
    expect_bad(good_doc, "slots[1].slot", "3", MB_EINVAL, "slots[1].slot");
    expect_bad(good_doc, "slots[1].mm_per_px", "-0.1", MB_EFORMAT,
               "slots[1].mm_per_px");
    expect_bad(good_doc, "slots[0].calibration", "\"\"", MB_EFORMAT,
               "slots[0].calibration");
    expect_bad(good_doc, "active_slot", "5", MB_EINVAL, "active_slot");
    expect_bad(good_doc, "active_slot", "\"7\"", MB_EFORMAT, "active_slot");
}

static void test_bad_plc(void **state)
{
    expect_bad(good_doc, "plc", "7", MB_EFORMAT, "plc");
    expect_bad(good_doc, "plc.mode", "\"master\"", MB_EFORMAT, "plc.mode");
    expect_bad(good_doc, "plc.port", "70000", MB_EFORMAT, "plc.port");
    expect_bad(good_doc, "plc.port", "null", MB_ENUMERIC, "plc.port");
    expect_bad(good_doc, "plc.bind", "\"localhost\"", MB_EFORMAT, "plc.bind");
    expect_bad(good_doc, "plc.max_connections", "0", MB_EFORMAT,
               "plc.max_connections");
    expect_bad(good_doc, "plc.allow[1]", "\"10.0.0.0/33\"", MB_EFORMAT,
               "plc.allow[1]");
    expect_bad(good_doc, "plc.allow", "{}", MB_EFORMAT, "plc.allow");
    expect_bad(good_doc, "plc.heartbeat_ms", "5", MB_EFORMAT,
               "plc.heartbeat_ms");
    expect_bad(good_doc, "plc.client", NULL, MB_EFORMAT, "plc.client");
    expect_bad(good_doc, "plc.client.peer", NULL, MB_EFORMAT,
               "plc.client.peer");
    expect_bad(good_doc, "plc.client.unit", "250", MB_EFORMAT,
               "plc.client.unit");
    expect_bad(good_doc, "plc.client.trigger", "\"input\"", MB_EFORMAT,
               "plc.client.trigger");
    expect_bad(good_doc, "plc.client.ack_address", "-2", MB_EFORMAT,
               "plc.client.ack_address");
    expect_bad(good_doc, "plc.client.block_address", "65530", MB_EFORMAT,
               "plc.client.block_address");
    /* Trigger "plc" without a link. */
    char *t = mutate(minimal_doc, "trigger", "\"plc\"");
    expect_bad(t, "station", "\"x\"", MB_EINVAL, "trigger");
    cJSON_free(t);
}

static void test_bad_logs_shifts(void **state)
{
    expect_bad(good_doc, "logs.folder", "\"\"", MB_EFORMAT, "logs.folder");
    expect_bad(good_doc, "logs.flush_interval_s", "-1", MB_EFORMAT,
               "logs.flush_interval_s");
    expect_bad(good_doc, "logs.retention_days", "\"90\"", MB_EFORMAT,
               "logs.retention_days");
    expect_bad(good_doc, "logs.reject_images.cap_mb", "-5", MB_EFORMAT,
               "logs.reject_images.cap_mb");
    expect_bad(good_doc, "shifts", NULL, MB_EFORMAT, "shifts");
    expect_bad(good_doc, "shifts", "[]", MB_EFORMAT, "shifts");
    expect_bad(good_doc, "shifts[1].start", "\"25:00\"", MB_EFORMAT,
               "shifts[1].start");
    expect_bad(good_doc, "shifts[1].start", "\"7:15\"", MB_EFORMAT,
               "shifts[1].start");
    expect_bad(good_doc, "shifts[1].start", "\"07:60\"", MB_EFORMAT,
               "shifts[1].start");
    expect_bad(good_doc, "shifts[0].name", "\"night shift\"", MB_EFORMAT,
               "shifts[0].name");
    expect_bad(good_doc, "shifts[0].name", NULL, MB_EFORMAT, "shifts[0].name");
    expect_bad(good_doc, "shifts[1].start", "\"22:30\"", MB_EINVAL,
               "shifts[1].start");
    expect_bad(good_doc, "shifts[1].name", "\"night\"", MB_EINVAL,
               "shifts[1].name");
}

static void test_bad_drift_timeouts(void **state)
{
    expect_bad(good_doc, "drift.lambda", "0", MB_EFORMAT, "drift.lambda");
    expect_bad(good_doc, "drift.lambda", "1.01", MB_EFORMAT, "drift.lambda");
    expect_bad(good_doc, "drift.L", "20", MB_EFORMAT, "drift.L");
    expect_bad(good_doc, "drift.clear_after", "0", MB_EFORMAT,
               "drift.clear_after");
    expect_bad(good_doc, "drift.modes", "[1, 1]", MB_EFORMAT, "drift.modes[1]");
    expect_bad(good_doc, "drift.modes", "[9]", MB_EFORMAT, "drift.modes[0]");
    expect_bad(good_doc, "drift.modes", "[1,2,3,4,5,6,7,8,1]", MB_EFORMAT,
               "drift.modes");
    expect_bad(good_doc, "timeouts.inspection_ms", "0", MB_EFORMAT,
               "timeouts.inspection_ms");
    expect_bad(good_doc, "timeouts.frame_ms", "true", MB_EFORMAT,
               "timeouts.frame_ms");
}

static void test_syntax(void **state)
{
    mb_station_config c;
    char err[MB_ERR_LEN] = "";
    /* Cut short, as a half-written file is. */
    int rc = mb_station_config_parse(good_doc, 200, NAME, &c, err);
    assert_int_equal(rc, MB_EFORMAT);
    assert_non_null(strstr(err, NAME));
    rc = mb_station_config_parse("[1, 2]", 6, NAME, &c, err);
    assert_int_equal(rc, MB_EFORMAT);
    rc = mb_station_config_parse("", 0, NAME, &c, err);
    assert_int_equal(rc, MB_EFORMAT);
}

static void test_diff(void **state)
{
    mb_station_config a, b;
    char err[MB_ERR_LEN], out[256];
    assert_int_equal(
        mb_station_config_parse(good_doc, strlen(good_doc), NAME, &a, err), 0);
    b = a;
    assert_int_equal(mb_station_config_diff(&a, &b, out, sizeof out), 0);
    assert_string_equal(out, "");
    b.camera.exposure_us = 900;
    snprintf(b.slots[1].model, sizeof b.slots[1].model, "b2.json");
    b.shifts.shifts[0].start_min = 8 * 60;
    assert_int_equal(mb_station_config_diff(&a, &b, out, sizeof out), 3);
    assert_non_null(strstr(out, "camera.exposure_us"));
    assert_non_null(strstr(out, "slots[1].model"));
    assert_non_null(strstr(out, "shifts"));
    /* Too small a buffer: cut with "...", count still right. */
    char tiny[24];
    assert_int_equal(mb_station_config_diff(&a, &b, tiny, sizeof tiny), 3);
    assert_true(strlen(tiny) < sizeof tiny);
    assert_non_null(strstr(tiny, "..."));
    /* A configuration built in code gets the same checks. */
    b = a;
    b.active_slot = 9;
    assert_int_equal(mb_station_config_check(&b, "built", err), MB_EINVAL);
    assert_non_null(strstr(err, "active_slot"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_good),
        cmocka_unit_test(test_defaults),
        cmocka_unit_test(test_example_file),
        cmocka_unit_test(test_bad_header),
        cmocka_unit_test(test_bad_camera),
        cmocka_unit_test(test_bad_slots),
        cmocka_unit_test(test_bad_plc),
        cmocka_unit_test(test_bad_logs_shifts),
        cmocka_unit_test(test_bad_drift_timeouts),
        cmocka_unit_test(test_syntax),
        cmocka_unit_test(test_diff),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
