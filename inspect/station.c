/*
 * inspect/station.c - the station loop (see station.h).
 *
 * One thread, one poll loop: the PLC sockets are polled
 * with a short timeout; the camera is read with its own short timeout in
 * between, so the PLC is served at least every few milliseconds while a
 * part is inspected in about two. Nothing is allocated per part on the
 * inspection path (the inspector, the log writer and the PLC map are made
 * once); only reject images allocate their picture buffer.
 */
#define _GNU_SOURCE
#include "station.h"

#include "calib_file.h"
#include "drift.h"
#include "error.h"
#include "file_util.h"
#include "model_file.h"
#include "plc.h"
#include "rejects.h"
#include "replay_source.h"
#include "shiftlog.h"
#include "source.h"
#include "station_config.h"
#include "synth_source.h"
#include "v4l2.h"
#include "verdict.h"

#include <dirent.h>
#include <errno.h>
#include <math.h>
#include <poll.h>
#include <signal.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <systemd/sd-daemon.h>
#include <time.h>
#include <unistd.h>
#include <zlib.h>

/*
 * The only globals: what the signal handler saw. A handler does nothing
 * else. (A signalfd would be neater, but OpenBLAS starts its threads
 * before main, and a process signal is delivered to any thread that does
 * not block it: those threads would take SIGTERM with its default action.
 * Handlers run in whichever thread; the loop wakes at least every 20 ms.)
 */
static volatile sig_atomic_t stop_requested;
static volatile sig_atomic_t reload_requested;

static void on_signal(int sig)
{
    if (sig == SIGHUP)
        reload_requested = 1;
    else
        stop_requested = 1;
}

/* Fault codes of PLC register 11 (README: "Fault codes"). */
enum {
    FAULT_CAMERA_LOST = 1,
    FAULT_CAMERA_TIMEOUT = 2,
    FAULT_NO_MODEL = 3,
    FAULT_NO_FIT = 4,
    FAULT_OVERTIME = 5,
    FAULT_INTERNAL = 6,
    FAULT_FRAME = 7,
    FAULT_UNSEEN = 8
};

#define MAX_CHARTS (2 + MB_STATION_MAX_MODES + MB_MAX_GAUGES)

typedef struct {
    char name[48];       /* "size", "mode:1", "gauge:OD" */
    int kind;            /* 0 size, 1 mode, 2 gauge */
    int index;           /* mode (0-based) or gauge index */
    mb_drift_chart chart;
} drift_slot;

typedef struct {
    int slot;
    char path[MB_STATION_PATH_LEN];
    char checksum[24];
    mb_part_model pm;
    int loaded;
    mb_inspector *ins;
    char error[MB_ERR_LEN];
    double mm_per_px; /* the scale sizes are judged in (0: px) */
    int n_charts;
    drift_slot charts[MAX_CHARTS];
} slot_rt;

struct mb_station {
    char config_path[MB_STATION_PATH_LEN];
    mb_station_config cfg;
    slot_rt *slots;
    int n_slots, active;
    mb_source *src;
    int cam_ok;
    int cam_attempt;
    int64_t cam_retry_ms, cam_lost_ms;
    mb_plc *plc;
    mb_shiftlog *log;
    mb_rejects *rejects;
    struct sigaction old_term, old_int, old_hup;
    int handlers_set;
    uint64_t max_parts;
    mb_station_stats stats;
    uint32_t seq;
    int free_state;       /* free run: FREE_* of the part in view */
    int upstream;         /* free run: edges parts enter by (MB_EDGE_*) */
    int crowded;          /* free run: the last frame showed two parts */
    double last_x, last_y; /* free run: where the inspected part was seen */
    int trig_pending;
    int64_t trig_ns;
    int ready_sent;
    int64_t last_status_ms, last_watchdog_ms;
    int drift_on;
    double mm_per_px;
    char summary[256];
};

static void say(int prio, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
static void say(int prio, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fprintf(stderr, "<%d>", prio);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
}

static void plc_log(void *user, int priority, const char *msg)
{
    (void)user;
    say(priority, "plc: %s", msg);
}

static int64_t mono_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

static int64_t mono_ns(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

/* CRC-32 of the model file's bytes, the identity logged with every part. */
static void file_checksum(const char *path, char out[24])
{
    char *text = NULL;
    size_t len = 0;
    snprintf(out, 24, "none");
    if (mb_file_read_all(path, (size_t)1 << 30, &text, &len, NULL) == 0) {
        unsigned long c = crc32(0L, (const Bytef *)text, (uInt)len);
        snprintf(out, 24, "crc32:%08lx", c);
    }
    free(text);
}

static void slot_free(slot_rt *s)
{
    mb_inspector_close(s->ins);
    s->ins = NULL;
    if (s->loaded)
        mb_part_model_free(&s->pm);
    s->loaded = 0;
}

static void slots_free(slot_rt *s, int n)
{
    for (int i = 0; s && i < n; i++)
        slot_free(&s[i]);
    free(s);
}

static void init_charts(slot_rt *s, const mb_station_config *cfg)
{
    mb_drift_config dc;
    mb_drift_config_default(&dc);
    dc.lambda = cfg->drift_lambda;
    dc.L = cfg->drift_L;
    dc.clear_after = cfg->drift_clear_after;
    s->n_charts = 0;
    const mb_part_model *pm = &s->pm;
    /* the size chart in mm when the part has a scale (as the log's
       size_mm), else in px */
    double u = s->mm_per_px > 0 ? s->mm_per_px : 1.0;
    if (pm->has_limits && pm->limits.size_sd > 0) {
        drift_slot *d = &s->charts[s->n_charts];
        if (mb_drift_init(&d->chart, &dc, pm->limits.size_mean * u,
                          pm->limits.size_sd * u) == 0) {
            snprintf(d->name, sizeof d->name, "size");
            d->kind = 0;
            s->n_charts++;
        }
    }
    int k = mb_shape_model_n_modes(pm->shape);
    for (int i = 0; i < cfg->n_drift_modes; i++) {
        int q = cfg->drift_modes[i] - 1;
        if (q < 0 || q >= k)
            continue;
        drift_slot *d = &s->charts[s->n_charts];
        if (mb_drift_init(&d->chart, &dc, 0.0, 1.0) == 0) {
            snprintf(d->name, sizeof d->name, "mode:%d", q + 1);
            d->kind = 1;
            d->index = q;
            s->n_charts++;
        }
    }
    for (int g = 0; g < pm->n_gauges && s->n_charts < MAX_CHARTS; g++) {
        if (!(pm->gauges[g].taught_sd > 0))
            continue;
        drift_slot *d = &s->charts[s->n_charts];
        if (mb_drift_init(&d->chart, &dc, pm->gauges[g].taught_mean,
                          pm->gauges[g].taught_sd) == 0) {
            snprintf(d->name, sizeof d->name, "gauge:%.40s", pm->gauges[g].name);
            d->kind = 2;
            d->index = g;
            s->n_charts++;
        }
    }
}

/* Load every slot's model and make its inspector. A slot whose model cannot
   be used keeps the reason: its parts are faults. Returns the number of
   slots that failed. */
static int load_slots(const mb_station_config *cfg, slot_rt **out)
{
    slot_rt *s = calloc((size_t)(cfg->n_slots > 0 ? cfg->n_slots : 1), sizeof *s);
    int failed = 0;
    if (!s) {
        *out = NULL;
        return cfg->n_slots;
    }
    for (int i = 0; i < cfg->n_slots; i++) {
        const mb_station_slot *cs = &cfg->slots[i];
        slot_rt *r = &s[i];
        r->slot = cs->slot;
        snprintf(r->path, sizeof r->path, "%s", cs->model);
        char err[MB_ERR_LEN];
        if (mb_part_model_load(cs->model, &r->pm, err) < 0) {
            snprintf(r->error, sizeof r->error, "%s", err);
            failed++;
            continue;
        }
        r->loaded = 1;
        file_checksum(cs->model, r->checksum);
        mb_inspect_params ip;
        mb_inspect_params_default(&ip);
        ip.mm_per_px = cs->mm_per_px;
        mb_calib cal; /* copied by the inspector */
        if (cs->calibration[0]) {
            if (mb_calib_file_load_for(cs->calibration, r->pm.imaging.width,
                                       r->pm.imaging.height, &cal, err) < 0) {
                snprintf(r->error, sizeof r->error, "%s", err);
                failed++;
                continue;
            }
            ip.calib = &cal;
            ip.mm_per_px = 0; /* the calibration's */
        }
        if (mb_inspector_create(&r->pm, &ip, &r->ins, err) < 0) {
            snprintf(r->error, sizeof r->error, "%.200s: %.300s", cs->model, err);
            failed++;
            continue;
        }
        r->mm_per_px = cs->mm_per_px > 0 ? cs->mm_per_px : r->pm.imaging.mm_per_px;
        init_charts(r, cfg);
    }
    *out = s;
    return failed;
}

static int slot_index(const mb_station *st, int slot)
{
    for (int i = 0; i < st->n_slots; i++)
        if (st->slots[i].slot == slot)
            return i;
    return -1;
}

static int open_camera(mb_station *st, char *err)
{
    const mb_station_config *cfg = &st->cfg;
    mb_source_close(st->src);
    st->src = NULL;
    if (cfg->camera.source == MB_CAMERA_V4L2) {
        mb_v4l2_config vc;
        mb_station_config_v4l2(cfg, &vc);
        return mb_v4l2_open(&vc, &st->src, err);
    }
    if (cfg->camera.source == MB_CAMERA_SYNTH) {
        mb_synth_source_config sc;
        int rc = mb_station_config_synth(cfg, &sc);
        if (rc < 0)
            return mb_err_set(err, rc, "camera.synth: unknown part family");
        rc = mb_synth_source_open(&sc, &st->src, err);
        if (rc == 0)
            say(6, "synthetic line: a part every %.0f px, the belt "
                "moving %.0f px per frame: %.2f frames per part",
                mb_synth_source_pitch(st->src), sc.speed_px,
                mb_synth_source_pitch(st->src) / sc.speed_px);
        return rc;
    }
    mb_replay_config rc;
    mb_replay_config_default(&rc);
    rc.dir = cfg->camera.replay_folder;
    rc.fps = cfg->camera.replay_fps;
    rc.loop = cfg->camera.replay_loop;
    return mb_replay_open(&rc, &st->src, err);
}

static void notify_status(mb_station *st, int64_t now)
{
    if (now - st->last_watchdog_ms >= 1000) {
        sd_notify(0, "WATCHDOG=1");
        st->last_watchdog_ms = now;
    }
    if (now - st->last_status_ms >= 1000) {
        mb_shiftlog_counts c;
        mb_shiftlog_get_counts(st->log, &c);
        double y = c.parts ? 100.0 * (double)c.passes / (double)c.parts : 0.0;
        sd_notifyf(0, "STATUS=shift %s: %llu parts, %llu rejects, %llu faults, "
                      "yield %.2f %%; camera %s; PLC %d connection(s)",
                   mb_shiftlog_shift(st->log) ? mb_shiftlog_shift(st->log)->name : "?",
                   (unsigned long long)c.parts, (unsigned long long)c.rejects,
                   (unsigned long long)c.faults, y, st->cam_ok ? "ok" : "LOST",
                   st->plc ? mb_plc_connected(st->plc) : 0);
        st->last_status_ms = now;
    }
    if (!st->ready_sent && st->cam_ok) {
        sd_notify(0, "READY=1");
        say(6, "station %s ready: camera up%s", st->cfg.station,
            st->plc ? ", PLC link open" : ", no PLC link configured");
        st->ready_sent = 1;
    }
    if (st->plc)
        mb_plc_set_status(st->plc, MB_PLC_ST_READY, st->cam_ok && st->slots[st->active].ins);
}

/* Counters to the PLC after every part and at a shift change. */
static void push_counters(mb_station *st)
{
    if (!st->plc)
        return;
    mb_shiftlog_counts c;
    mb_shiftlog_get_counts(st->log, &c);
    mb_plc_set_counters(st->plc, (uint32_t)c.parts, (uint32_t)(c.rejects + c.faults));
    mb_plc_set_status(st->plc, MB_PLC_ST_LOGGING, mb_shiftlog_problem(st->log));
}

/* Reject image with the overlay, under the disk cap (io/rejects.h). */
static int save_reject(mb_station *st, const mb_image *img, const mb_verdict *v,
                       char *path, size_t len)
{
    char err[MB_ERR_LEN];
    if (!st->rejects ||
        mb_rejects_path(st->rejects, mb_shiftlog_now_ms(), st->seq, path, len, err) < 0)
        return -1;
    if (mb_verdict_save_overlay(v, img, path, 12.0, err) < 0) {
        say(4, "reject image not saved: %s", err);
        return -1;
    }
    if (mb_rejects_added(st->rejects, path, err) < 0)
        say(4, "reject images: %s", err);
    return 0;
}

static void update_drift(mb_station *st, slot_rt *s, const mb_verdict *v,
                         int64_t wall_ms)
{
    if (!v->converged || !v->b_sd)
        return;
    int any = 0;
    for (int i = 0; i < s->n_charts; i++) {
        drift_slot *d = &s->charts[i];
        double x;
        if (d->kind == 0)
            x = v->size_mm > 0 ? v->size_mm : v->size_px;
        else if (d->kind == 1)
            x = v->b_sd[d->index];
        else if (d->index < v->n_gauges && isfinite(v->gauges[d->index].value))
            x = v->gauges[d->index].value;
        else
            continue;
        mb_drift_event ev = mb_drift_add(&d->chart, x, st->seq);
        if (ev != MB_DRIFT_NONE) {
            mb_shiftlog_drift_rec dr;
            memset(&dr, 0, sizeof dr);
            dr.chart = d->name;
            dr.signal = ev == MB_DRIFT_SIGNAL;
            dr.up = d->chart.direction > 0;
            dr.ewma = d->chart.z;
            dr.target = d->chart.target;
            dr.lcl = d->chart.lcl;
            dr.ucl = d->chart.ucl;
            dr.since_seq = d->chart.since_seq;
            dr.since_ms = wall_ms;
            dr.parts_since = (uint64_t)(d->chart.t - d->chart.since + 1);
            mb_shiftlog_drift(st->log, wall_ms, &dr, NULL);
            if (ev == MB_DRIFT_SIGNAL) {
                st->stats.drift_signals++;
                say(4, "drift warning: %s drifting %s for %llu parts (EWMA %.4g, "
                       "limits %.4g .. %.4g)", d->name, dr.up ? "up" : "down",
                    (unsigned long long)dr.parts_since, dr.ewma, dr.lcl, dr.ucl);
            } else {
                say(6, "drift cleared: %s back inside its limits", d->name);
            }
        }
        any |= d->chart.signalling;
    }
    if (any != st->drift_on && st->plc)
        mb_plc_set_status(st->plc, MB_PLC_ST_DRIFT, any);
    st->drift_on = any;
}

static int fault_code_of(const mb_verdict *v)
{
    switch (v->n_reasons ? v->reasons[0].code : MB_REASON_INTERNAL) {
    case MB_REASON_NO_FIT: return FAULT_NO_FIT;
    case MB_REASON_FRAME: return FAULT_FRAME;
    case MB_REASON_MODEL: return FAULT_NO_MODEL;
    default: return FAULT_INTERNAL;
    }
}

/* Publish and log one verdict. */
static void report_part(mb_station *st, slot_rt *s, const mb_verdict *v,
                        const mb_image *img, uint64_t frame_seq, double cycle_ms,
                        int fault_code)
{
    int64_t wall = mb_shiftlog_now_ms();
    st->seq++;

    if (st->plc) {
        mb_plc_result r;
        memset(&r, 0, sizeof r);
        r.verdict = v->verdict == MB_VERDICT_PASS ? MB_PLC_PASS
                    : v->verdict == MB_VERDICT_REJECT ? MB_PLC_REJECT : MB_PLC_FAULT;
        r.reason = v->n_reasons ? (int)v->reasons[0].code : 0;
        r.fault_code = r.verdict != MB_PLC_FAULT ? 0 : fault_code ? fault_code : fault_code_of(v);
        r.cycle_ms = cycle_ms;
        r.n_gauges = v->n_gauges;
        for (int g = 0; g < MB_PLC_N_GAUGES; g++)
            r.gauge_dev_mm[g] = g < v->n_gauges ? v->gauges[g].deviation : NAN;
        mb_plc_publish(st->plc, &r);
        mb_plc_service(st->plc, mono_ms()); /* answer a waiting poll now */
    }
    /* the reject picture after the PLC has its answer: it takes longer */
    char imgpath[640];
    int have_img = 0;
    if (v->verdict != MB_VERDICT_PASS && img)
        have_img = save_reject(st, img, v, imgpath, sizeof imgpath) == 0;

    mb_shiftlog_part_rec rec;
    memset(&rec, 0, sizeof rec);
    rec.seq = st->seq;
    rec.frame_seq = frame_seq;
    rec.slot = s ? s->slot : 0;
    rec.part = s && s->loaded ? s->pm.name : "";
    rec.model_checksum = s ? s->checksum : "";
    rec.verdict = v->verdict == MB_VERDICT_PASS ? MB_SHIFTLOG_PASS
                  : v->verdict == MB_VERDICT_REJECT ? MB_SHIFTLOG_REJECT : MB_SHIFTLOG_FAULT;
    rec.n_reasons = v->n_reasons < MB_SHIFTLOG_MAX_REASONS ? v->n_reasons : MB_SHIFTLOG_MAX_REASONS;
    for (int i = 0; i < rec.n_reasons; i++) {
        const mb_reason *r = &v->reasons[i];
        mb_shiftlog_reason *o = &rec.reasons[i];
        o->code = (int)r->code;
        o->name = mb_reason_name(r->code);
        o->text = r->text;
        o->value = r->value;
        o->limit = r->limit;
        o->located = mb_reason_located(r->code);
        o->outline = r->outline;
        o->position = r->position;
        o->angle_deg = r->angle_deg;
        o->depth_mm = r->depth_mm;
        o->extent_mm = r->extent_mm;
    }
    rec.has_pose = v->measured != NULL;
    rec.x = v->pose.tx;
    rec.y = v->pose.ty;
    rec.angle_deg = v->angle_deg;
    rec.scale = v->scale;
    rec.n_modes = v->b_sd ? (v->n_modes < MB_SHIFTLOG_MAX_MODES ? v->n_modes : MB_SHIFTLOG_MAX_MODES) : 0;
    for (int q = 0; q < rec.n_modes; q++)
        rec.modes[q] = v->b_sd[q];
    rec.t2 = v->b_sd ? v->t2 : NAN;
    rec.residual = v->b_sd ? v->spe : NAN;
    rec.size_mm = v->size_mm > 0 ? v->size_mm : NAN;
    rec.n_gauges = v->n_gauges;
    for (int g = 0; g < v->n_gauges && s; g++) {
        rec.gauges[g].name = v->gauges[g].name;
        rec.gauges[g].value_mm = v->gauges[g].value;
        rec.gauges[g].nominal_mm = v->gauges[g].nominal;
        rec.gauges[g].tol_lo_mm = s->pm.gauges[g].tol_lo;
        rec.gauges[g].tol_hi_mm = s->pm.gauges[g].tol_hi;
        rec.gauges[g].ok = v->gauges[g].ok;
    }
    rec.cycle_ms = cycle_ms;
    rec.image = have_img ? imgpath : NULL;
    char err[MB_ERR_LEN];
    if (mb_shiftlog_part(st->log, wall, &rec, err) < 0)
        say(4, "log: %s", err);
    /* drift is watched on good parts: a process creeping towards a limit
       shows there before the first reject; a single defective part must
       not raise a warning */
    if (s && v->verdict == MB_VERDICT_PASS)
        update_drift(st, s, v, wall);
    push_counters(st);

    st->stats.parts++;
    if (v->verdict == MB_VERDICT_PASS)
        st->stats.passes++;
    else if (v->verdict == MB_VERDICT_REJECT)
        st->stats.rejects++;
    else
        st->stats.faults++;
    if (cycle_ms > st->stats.cycle_ms_max)
        st->stats.cycle_ms_max = cycle_ms;
}

/* A fault without an image: camera lost or timed out, no model, a part
   not inspected. frame_seq: the frame it was found on, or 0. */
static void report_fault(mb_station *st, mb_reason_code code, const char *text,
                         int fault_code, double cycle_ms, uint64_t frame_seq)
{
    mb_verdict v;
    memset(&v, 0, sizeof v);
    v.verdict = MB_VERDICT_FAULT;
    v.n_reasons = 1;
    v.reasons[0].code = code;
    snprintf(v.reasons[0].text, sizeof v.reasons[0].text, "%s", text);
    report_part(st, &st->slots[st->active], &v, NULL, frame_seq, cycle_ms,
                fault_code);
}

/* A pass that came too late to be trusted becomes a fault, never a pass;
   returns its fault code, or 0 when the verdict stands. */
static int overtime(mb_verdict *v, double cycle_ms, int limit_ms)
{
    if (cycle_ms <= limit_ms || v->verdict != MB_VERDICT_PASS)
        return 0;
    v->verdict = MB_VERDICT_FAULT;
    v->n_reasons = 1;
    v->reasons[0].code = MB_REASON_INTERNAL;
    snprintf(v->reasons[0].text, sizeof v->reasons[0].text,
             "inspection took %.1f ms, over its %d ms limit", cycle_ms, limit_ms);
    return FAULT_OVERTIME;
}

/* Inspect one frame and report it. t0_ns: trigger or frame time. */
static void inspect_frame(mb_station *st, const mb_frame *f, int64_t t0_ns,
                          mb_verdict *v)
{
    slot_rt *s = &st->slots[st->active];
    if (!s->ins) {
        char text[200];
        snprintf(text, sizeof text, "no usable model for part slot %d: %.150s",
                 s->slot, s->error);
        report_fault(st, MB_REASON_MODEL, text, FAULT_NO_MODEL, 0, f->seq);
        return;
    }
    mb_inspector_run(s->ins, &f->view, v);
    double cycle = (double)(mono_ns() - t0_ns) / 1e6;
    int fc = overtime(v, cycle, st->cfg.inspection_timeout_ms);
    report_part(st, s, v, &f->view, f->seq, cycle, fc);
}

/* Free run: every frame is looked at (pyramid and presence, the cheap
   half), and each part is inspected once, on the first frame that shows it
   whole. Which part is which comes from the frame edges it touches: a part
   enters across the upstream edge (learnt from the parts seen entering)
   and leaves across another. A part that crosses the field with no frame
   showing it whole, or enters while the last one is still in view, is a
   fault: it was never inspected and must not go on as if it passed. */
enum { FREE_NONE, FREE_ENTERING, FREE_DONE, FREE_LEAVING };

static void unseen(mb_station *st, const mb_frame *f, mb_reason_code code,
                   const char *text)
{
    report_fault(st, code, text, FAULT_UNSEEN, 0, f->seq);
}
static void free_run_frame(mb_station *st, const mb_frame *f, mb_verdict *v)
{
    slot_rt *s = &st->slots[st->active];
    if (!s->ins) {
        inspect_frame(st, f, f->t_ns, v);
        return;
    }
    int whole = mb_inspector_look(s->ins, &f->view, v);
    mb_reason_code c = v->n_reasons ? v->reasons[0].code : MB_REASON_NONE;
    int edges = mb_inspector_located(s->ins)->edges;
    int up = st->upstream;
    /* touching an edge other than the upstream one: on its way out */
    int out = up && (edges & ~up);
    int two = c == MB_REASON_TWO_PARTS, was_two = st->crowded;
    st->crowded = two;
    if (c == MB_REASON_NO_PART) {
        if (st->free_state == FREE_ENTERING)
            unseen(st, f, MB_REASON_OFF_EDGE,
                   "a part crossed the field and no frame showed it whole: it "
                   "was not inspected (the camera is too slow for the belt, or "
                   "the part lay across the edge)");
        st->free_state = FREE_NONE;
        return;
    }
    if (c == MB_REASON_OFF_EDGE) {
        switch (st->free_state) {
        case FREE_NONE:
            st->upstream = edges;
            st->free_state = FREE_ENTERING;
            break;
        case FREE_ENTERING:
            if (out) {
                unseen(st, f, MB_REASON_OFF_EDGE,
                       "a part crossed the field and no frame showed it whole: "
                       "it was not inspected (the camera is too slow for the "
                       "belt, or the part lay across the edge)");
                st->free_state = FREE_LEAVING;
            }
            break;
        case FREE_DONE:
            /* the inspected part leaving, or (gone between two frames) the
               next one entering across the upstream edge */
            st->free_state = up && !out ? FREE_ENTERING : FREE_LEAVING;
            break;
        default: /* FREE_LEAVING: still leaving, or the next one entering */
            if (up && !out)
                st->free_state = FREE_ENTERING;
            break;
        }
        return;
    }
    const mb_locate_result *lr = mb_inspector_located(s->ins);
    if (st->free_state == FREE_DONE && !two && up && lr->area > 0) {
        /* whole again: the same part, or (the last one gone between two
           frames) the next one, upstream of where the last one was */
        double dx = (up & MB_EDGE_LEFT ? 1 : 0) - (up & MB_EDGE_RIGHT ? 1 : 0);
        double dy = (up & MB_EDGE_TOP ? 1 : 0) - (up & MB_EDGE_BOTTOM ? 1 : 0);
        double along = (lr->x - st->last_x) * dx + (lr->y - st->last_y) * dy;
        double size = fabs(dx) * lr->box[2] + fabs(dy) * lr->box[3];
        if (along < -0.25 * size)
            st->free_state = FREE_ENTERING;
    }
    if (st->free_state == FREE_DONE) {
        st->last_x = lr->x;
        st->last_y = lr->y;
        /* the inspected part still whole; a second one entering already */
        if (two && !was_two)
            unseen(st, f, MB_REASON_TWO_PARTS,
                   "a part entered before the one inspected had left: it is "
                   "not inspected (free run needs the parts spaced so that "
                   "one has left before the next enters)");
        return;
    }
    if (two && st->free_state == FREE_LEAVING) {
        st->free_state = FREE_ENTERING; /* the next one is on its way in */
        return;
    }
    /* a part wholly in view (or two parts) and not inspected yet */
    st->free_state = FREE_DONE;
    st->last_x = lr->x;
    st->last_y = lr->y;
    if (whole == 1)
        mb_inspector_finish(s->ins, v);
    double cycle = v->ms; /* both halves; the frame waited for nothing */
    int fc = overtime(v, cycle, st->cfg.inspection_timeout_ms);
    report_part(st, s, v, &f->view, f->seq, cycle, fc);
}

static void camera_lost(mb_station *st, int rc, const char *why, int64_t now)
{
    if (!st->cam_ok)
        return;
    st->cam_ok = 0;
    st->cam_lost_ms = now;
    st->cam_attempt = 0;
    st->cam_retry_ms = now + mb_source_backoff_ms(0);
    st->stats.camera_losses++;
    say(3, "camera lost (%s): %s; reopening with back-off", mb_strerror(rc), why);
    mb_shiftlog_fault(st->log, mb_shiftlog_now_ms(), "camera", 1, rc, why, 0, NULL);
    if (st->plc)
        mb_plc_set_fault(st->plc, FAULT_CAMERA_LOST);
}

static void camera_retry(mb_station *st, int64_t now)
{
    if (st->cam_ok || now < st->cam_retry_ms)
        return;
    char err[MB_ERR_LEN] = "";
    int rc = st->src ? mb_source_reopen(st->src, err) : open_camera(st, err);
    if (rc == 0) {
        double dur = (double)(now - st->cam_lost_ms) / 1000.0;
        st->cam_ok = 1;
        say(6, "camera back after %.1f s", dur);
        mb_shiftlog_fault(st->log, mb_shiftlog_now_ms(), "camera", 0, 0,
                          "camera back", dur, NULL);
        if (st->plc)
            mb_plc_set_fault(st->plc, 0);
        return;
    }
    st->cam_attempt++;
    st->cam_retry_ms = now + mb_source_backoff_ms(st->cam_attempt);
}

static void switch_slot(mb_station *st, int slot)
{
    int i = slot_index(st, slot);
    if (i < 0) {
        say(4, "the PLC asked for part slot %d, which the configuration does "
               "not have; staying on slot %d", slot, st->slots[st->active].slot);
        return;
    }
    if (i == st->active)
        return;
    st->active = i;
    say(6, "part slot %d active (%s)", slot, st->slots[i].path);
    mb_shiftlog_model(st->log, mb_shiftlog_now_ms(), 1, slot, st->slots[i].path,
                      st->slots[i].checksum, NULL);
    if (st->plc)
        mb_plc_set_active_slot(st->plc, slot);
    if (!st->slots[i].ins)
        say(3, "part slot %d has no usable model: %s", slot, st->slots[i].error);
}

static void reload(mb_station *st)
{
    st->stats.reloads++;
    mb_station_config cfg;
    char err[MB_ERR_LEN];
    if (mb_station_config_load(st->config_path, &cfg, err) < 0) {
        st->stats.reload_failures++;
        say(3, "reload refused, the running configuration stays: %s", err);
        return;
    }
    slot_rt *slots = NULL;
    int failed = load_slots(&cfg, &slots);
    if (!slots || failed) {
        st->stats.reload_failures++;
        say(3, "reload refused, the running configuration stays: %d part "
               "model(s) could not be used%s%s", failed,
            slots && failed ? ": " : "", slots && failed ? slots[0].error : "");
        slots_free(slots, cfg.n_slots);
        return;
    }
    char diff[512] = "";
    mb_station_config_diff(&st->cfg, &cfg, diff, sizeof diff);
    int camera_changed = memcmp(&st->cfg.camera, &cfg.camera, sizeof cfg.camera) != 0;
    if (memcmp(&st->cfg.plc, &cfg.plc, sizeof cfg.plc) != 0)
        say(4, "reload: PLC settings changed; they apply at the next restart "
               "(PLC connections are kept)");
    int want = st->slots[st->active].slot;
    slots_free(st->slots, st->n_slots);
    st->slots = slots;
    st->n_slots = cfg.n_slots;
    mb_station_plc keep_plc = st->cfg.plc;
    st->cfg = cfg;
    st->cfg.plc = keep_plc;
    st->active = slot_index(st, want);
    if (st->active < 0)
        st->active = slot_index(st, cfg.active_slot) >= 0 ? slot_index(st, cfg.active_slot) : 0;
    for (int i = 0; i < st->n_slots; i++)
        mb_shiftlog_model(st->log, mb_shiftlog_now_ms(), 0, st->slots[i].slot,
                          st->slots[i].path, st->slots[i].checksum, NULL);
    if (camera_changed) {
        char cerr[MB_ERR_LEN];
        if (open_camera(st, cerr) < 0)
            camera_lost(st, MB_ENODEV, cerr, mono_ms());
    }
    say(6, "configuration and models reloaded%s%s", diff[0] ? ": " : "", diff);
}

int mb_station_open(const char *config_path, uint64_t max_parts,
                    mb_station **out, char *err)
{
    mb_station *st = calloc(1, sizeof *st);
    int rc;
    if (!st)
        return mb_err_set(err, MB_ENOMEM, "out of memory");
    st->max_parts = max_parts;
    snprintf(st->config_path, sizeof st->config_path, "%s", config_path);
    if ((rc = mb_station_config_load(config_path, &st->cfg, err)) < 0)
        goto fail;
    int failed = load_slots(&st->cfg, &st->slots);
    if (!st->slots) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory");
        goto fail;
    }
    st->n_slots = st->cfg.n_slots;
    st->active = slot_index(st, st->cfg.active_slot);
    if (st->active < 0)
        st->active = 0;
    for (int i = 0; failed && i < st->n_slots; i++)
        if (st->slots[i].error[0])
            say(3, "part slot %d: %s (its parts will be faults)", st->slots[i].slot,
                st->slots[i].error);

    mb_shiftlog_config lc;
    memset(&lc, 0, sizeof lc);
    lc.folder = st->cfg.log_folder;
    lc.station = st->cfg.station;
    lc.calendar = &st->cfg.shifts;
    lc.flush_interval_s = st->cfg.flush_interval_s;
    lc.retention_days = st->cfg.retention_days;
    lc.slot = st->slots[st->active].slot;
    lc.model = st->slots[st->active].path;
    lc.model_checksum = st->slots[st->active].checksum;
    if ((rc = mb_shiftlog_open(&lc, mb_shiftlog_now_ms(), &st->log, err)) < 0)
        goto fail;
    if (mb_shiftlog_problem(st->log))
        say(3, "shift log: %s (inspection goes on; the logging-problem bit is set)", err);
    if (st->cfg.reject_folder[0]) {
        char rerr[MB_ERR_LEN];
        if (mb_rejects_open(st->cfg.reject_folder, st->cfg.reject_cap_mb, &st->rejects, rerr) < 0)
            say(4, "reject images will not be saved: %s", rerr);
    }

    if (st->cfg.plc.mode != MB_STATION_PLC_NONE) {
        mb_plc_config pc;
        mb_station_config_plc(&st->cfg, &pc);
        pc.log = plc_log;
        pc.active_slot = st->slots[st->active].slot;
        if ((rc = mb_plc_open(&pc, mono_ms(), &st->plc, err)) < 0)
            goto fail;
        say(6, "PLC link: %s mode, port %d", st->cfg.plc.mode == MB_STATION_PLC_SERVER ?
                                                 "server" : "client",
            mb_plc_port(st->plc));
    }

    char cerr[MB_ERR_LEN] = "";
    if (open_camera(st, cerr) == 0) {
        st->cam_ok = 1;
    } else {
        st->cam_ok = 1; /* so that camera_lost records it */
        camera_lost(st, MB_ENODEV, cerr, mono_ms());
    }

    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    sa.sa_flags = 0; /* no SA_RESTART: poll returns EINTR at once */
    stop_requested = 0;
    reload_requested = 0;
    sigaction(SIGTERM, &sa, &st->old_term);
    sigaction(SIGINT, &sa, &st->old_int);
    sigaction(SIGHUP, &sa, &st->old_hup);
    st->handlers_set = 1;
    signal(SIGPIPE, SIG_IGN); /* a PLC that hangs up is an error return */
    *out = st;
    return MB_OK;
fail:
    mb_station_close(st);
    *out = NULL;
    return rc;
}

int mb_station_run(mb_station *st)
{
    int stop = 0;
    mb_verdict v;
    while (!stop) {
        int64_t now = mono_ms();
        struct pollfd fds[MB_PLC_MAX_CONN + 2];
        int nfds = 0;
        if (st->plc)
            nfds += mb_plc_pollfds(st->plc, fds + nfds, (int)(sizeof fds / sizeof fds[0]) - nfds);
        int wait = st->plc ? mb_plc_timeout_ms(st->plc, now) : 50;
        int camera_needed = st->cam_ok && (st->cfg.trigger != MB_TRIGGER_PLC || st->trig_pending);
        if (camera_needed || wait > 20)
            wait = camera_needed ? 0 : 20;
        if (poll(fds, (nfds_t)nfds, wait) < 0 && errno != EINTR) {
            say(3, "poll: %s", strerror(errno));
            return MB_EIO;
        }
        if (reload_requested) {
            reload_requested = 0;
            reload(st);
        }
        if (stop_requested) {
            say(6, "stop requested: finishing");
            stop = 1;
        }
        now = mono_ms();
        if (st->plc) {
            mb_plc_service(st->plc, now);
            int slot;
            if (mb_plc_take_slot_request(st->plc, &slot))
                switch_slot(st, slot);
            if (mb_plc_take_counter_reset(st->plc)) {
                mb_shiftlog_reset_counts(st->log);
                say(6, "shift counters reset by the PLC");
            }
        }
        if (mb_shiftlog_tick(st->log, mb_shiftlog_now_ms()) > 0) {
            const char *sum = mb_shiftlog_last_summary(st->log);
            if (sum && sum[0])
                say(6, "%s", sum);
            push_counters(st);
        }
        camera_retry(st, now);
        notify_status(st, now);
        if (stop)
            break;

        /* the trigger */
        if (st->cfg.trigger == MB_TRIGGER_PLC && st->plc && mb_plc_take_trigger(st->plc)) {
            st->trig_pending = 1;
            st->trig_ns = mono_ns();
        }
        if (st->cfg.trigger == MB_TRIGGER_PLC && st->trig_pending && !st->cam_ok) {
            report_fault(st, MB_REASON_FRAME, "camera lost: no frame to inspect",
                         FAULT_CAMERA_LOST, 0, 0);
            st->trig_pending = 0;
            continue;
        }
        if (!st->cam_ok || (st->cfg.trigger == MB_TRIGGER_PLC && !st->trig_pending))
            continue;

        mb_frame f;
        char err[MB_ERR_LEN] = "";
        int rc = mb_source_next(st->src, 5, &f, err);
        if (rc == MB_ETIMEOUT || rc == MB_ENOTFOUND) {
            if (rc == MB_ENOTFOUND && st->cfg.trigger != MB_TRIGGER_PLC) {
                say(6, "the replay has no more frames");
                stop = 1;
            }
            if (st->trig_pending &&
                (mono_ns() - st->trig_ns) / 1000000 > st->cfg.frame_timeout_ms) {
                report_fault(st, MB_REASON_FRAME, "no frame from the camera in time",
                             FAULT_CAMERA_TIMEOUT,
                             (double)(mono_ns() - st->trig_ns) / 1e6, 0);
                st->trig_pending = 0;
            }
            continue;
        }
        if (rc < 0) {
            camera_lost(st, rc, err, mono_ms());
            continue;
        }
        st->stats.frames++;
        switch (st->cfg.trigger) {
        case MB_TRIGGER_PLC:
            if (f.t_ns < st->trig_ns)
                continue; /* exposed before the trigger: not this part */
            inspect_frame(st, &f, st->trig_ns, &v);
            st->trig_pending = 0;
            break;
        case MB_TRIGGER_EVERY:
            inspect_frame(st, &f, f.t_ns, &v);
            break;
        case MB_TRIGGER_FREE:
            free_run_frame(st, &f, &v);
            break;
        }
        if (st->max_parts && st->stats.parts >= st->max_parts)
            stop = 1;
    }
    sd_notify(0, "STOPPING=1");
    mb_shiftlog_flush(st->log);
    if (st->plc)
        mb_plc_set_status(st->plc, MB_PLC_ST_READY, 0);
    return MB_OK;
}

void mb_station_get_stats(const mb_station *st, mb_station_stats *out)
{
    if (st && out)
        *out = st->stats;
}

const char *mb_station_log_path(const mb_station *st)
{
    const char *p = st && st->log ? mb_shiftlog_path(st->log) : NULL;
    return p ? p : "";
}

void mb_station_summary(const mb_station *st, char *buf, size_t len)
{
    mb_shiftlog_counts c;
    memset(&c, 0, sizeof c);
    if (st && st->log)
        mb_shiftlog_get_counts(st->log, &c);
    snprintf(buf, len,
             "%llu parts: %llu passed, %llu rejected, %llu faults, yield %.2f %%, "
             "%llu drift warnings",
             (unsigned long long)c.parts, (unsigned long long)c.passes,
             (unsigned long long)c.rejects, (unsigned long long)c.faults,
             c.parts ? 100.0 * (double)c.passes / (double)c.parts : 0.0,
             (unsigned long long)c.drift_signals);
}

void mb_station_close(mb_station *st)
{
    if (!st)
        return;
    if (st->handlers_set) {
        sigaction(SIGTERM, &st->old_term, NULL);
        sigaction(SIGINT, &st->old_int, NULL);
        sigaction(SIGHUP, &st->old_hup, NULL);
    }
    mb_source_close(st->src);
    mb_plc_close(st->plc);
    mb_shiftlog_close(st->log);
    mb_rejects_close(st->rejects);
    slots_free(st->slots, st->n_slots);
    free(st);
}
