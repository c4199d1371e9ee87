/*
 * capture/synth_source.c - the synthetic line as a live source: which part
 * is where on the belt in frame k, its pose, and the pacing.
 *
 * Slot arithmetic: with s = speed * k, the slot whose origin is in
 * [-R, pitch - R) is j = floor(s / pitch); since pitch >= W + 2R, slot j - 1
 * is already past the right edge (x >= W + R) and slot j + 1 has not
 * reached the left one, so at most one part is in the field. Slot j is in
 * the field while x_j < W + R.
 */
#include "synth_source.h"

#include "error.h"
#include "synth_internal.h"

#include <errno.h>
#include <limits.h>
#include <math.h>
#include <pthread.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* Index space of the empty frames between slots (noise seeds only). */
#define GAP_INDEX (UINT64_C(1) << 63)
/* Empty belt frames rendered once at open; frame k starts as a copy of
   empty frame k mod N_EMPTY and only the part's window is drawn over it. */
#define N_EMPTY 4
/* Frames in flight with render_ahead: the one handed out, the next ready,
   one being drawn. */
#define RING 3

typedef struct {
    mb_image frame;
    mb_synth_source_truth truth;
    double *xy;   /* render_ahead: the truth outlines, kept with the frame */
    uint64_t k;   /* the frame held */
    int rc;       /* of drawing it */
    int ready;    /* frame k is drawn */
} ring_slot;

typedef struct {
    mb_synth_source_config cfg;
    mb_synth *g;
    ring_slot slot[RING];
    int n_slots;       /* RING with render_ahead, else 1 */
    int cur;           /* the slot handed out last, -1 before */
    mb_image empty[N_EMPTY];
    double radius;     /* R, px */
    double pitch;      /* px */
    double y_lo, y_hi; /* range of the lateral position, px */
    int64_t t0;        /* CLOCK_MONOTONIC of frame 0, ns */
    int started;       /* t0 is set */
    uint64_t next_k;
    int max_points;    /* outline points a truth can hold */
    /* render_ahead: the worker draws frames next_draw, next_draw + 1, ...
       into slot k % RING while k < released + RING (frames below released
       are no longer held by the caller) */
    int ahead;
    pthread_t worker;
    pthread_mutex_t mu;
    pthread_cond_t cv;
    int quit;
    uint64_t next_draw, released;
} synth_src;

static const mb_source_ops synth_ops;

void mb_synth_source_config_default(mb_synth_source_config *cfg,
                                    mb_synth_family family)
{
    if (!cfg)
        return;
    memset(cfg, 0, sizeof *cfg);
    mb_synth_config_default(&cfg->synth, family);
    cfg->speed_px = 60;
    cfg->pitch_px = 0;
    cfg->fps = 0;
    cfg->drop_late = 0;
    cfg->max_frames = 0;
}

/* Lateral position and rotation of slot j: fixed per slot, from the seed. */
static void slot_pose(const synth_src *s, uint64_t j, double *y, double *a)
{
    mb_synth_rng r;
    /* tag 0x5107 keeps this stream apart from the generator's own */
    mb_synth_rng_seed(&r, s->cfg.synth.seed, 0x5107, j, 0);
    *y = s->y_hi > s->y_lo ? mb_synth_rng_range(&r, s->y_lo, s->y_hi)
                           : 0.5 * (s->y_lo + s->y_hi);
    *a = mb_synth_rng_range(&r, 0, 2 * M_PI);
}

static void copy_pixels(const mb_image *from, mb_image *to)
{
    for (int y = 0; y < from->height; y++)
        memcpy(to->pixels + (size_t)y * (size_t)to->stride,
               from->pixels + (size_t)y * (size_t)from->stride,
               (size_t)from->width);
}

/* Draw frame k and its truth into slot sl: a copy of an empty belt frame
   with the part's window drawn over it. */
static int render(synth_src *s, uint64_t k, ring_slot *sl)
{
    const mb_synth_config *c = &s->cfg.synth;
    uint64_t under = k % N_EMPTY;
    copy_pixels(&s->empty[under], &sl->frame);
    under |= GAP_INDEX;
    double travel = s->cfg.speed_px * (double)k;
    uint64_t j = (uint64_t)floor(travel / s->pitch);
    double x = -s->radius + travel - s->pitch * (double)j;
    mb_synth_source_truth *t = &sl->truth;
    t->frame = k;
    mb_pose pose = {0, 0, 1.0 / c->mm_per_px, 0};
    int rc;
    if (x >= c->width + s->radius) {
        t->part = -1;
        rc = mb_synth_make_over(s->g, under, 0, MB_SYNTH_EMPTY, &pose, under,
                                &sl->frame, &t->truth);
    } else {
        /* how many frames slot j was in the field before this one */
        double first = ceil((double)j * s->pitch / s->cfg.speed_px - 1e-9);
        double shot_d = (double)k - first;
        int shot =
            shot_d < 0 ? 0 : (shot_d > INT_MAX ? INT_MAX : (int)shot_d);
        pose.tx = x;
        slot_pose(s, j, &pose.ty, &pose.angle);
        t->part = (int64_t)j;
        rc = mb_synth_make_over(s->g, j, shot, MB_SYNTH_DRAW, &pose, under,
                                &sl->frame, &t->truth);
        if (rc == MB_ERANGE) /* the drawn defect found no place: good part */
            rc = mb_synth_make_over(s->g, j, shot, MB_SYNTH_NONE, &pose,
                                    under, &sl->frame, &t->truth);
    }
    if (rc == 0 && sl->xy) { /* the generator's outline buffer is reused */
        int n = 0;
        for (int o = 0; o < t->truth.outlines.n_outlines; o++)
            n += t->truth.outlines.counts[o];
        if (n > s->max_points)
            return MB_ERANGE;
        memcpy(sl->xy, t->truth.outlines.xy, sizeof(double) * 2 * (size_t)n);
        t->truth.outlines.xy = sl->xy;
    }
    return rc;
}

static void *draw_ahead(void *arg)
{
    synth_src *s = arg;
    pthread_mutex_lock(&s->mu);
    for (;;) {
        while (!s->quit && (s->next_draw >= s->released + RING ||
                            (s->cfg.max_frames &&
                             s->next_draw >= s->cfg.max_frames)))
            pthread_cond_wait(&s->cv, &s->mu);
        if (s->quit)
            break;
        uint64_t k = s->next_draw++;
        ring_slot *sl = &s->slot[k % RING];
        sl->ready = 0;
        pthread_mutex_unlock(&s->mu);
        int rc = render(s, k, sl);
        pthread_mutex_lock(&s->mu);
        sl->k = k;
        sl->rc = rc;
        sl->ready = 1;
        pthread_cond_broadcast(&s->cv);
    }
    pthread_mutex_unlock(&s->mu);
    return NULL;
}

/* render_ahead: hand back slot k once the worker has drawn it, waiting up
   to timeout_ms. */
static int take_drawn(synth_src *s, uint64_t k, int timeout_ms, ring_slot **out)
{
    struct timespec until;
    clock_gettime(CLOCK_REALTIME, &until);
    int64_t ns = until.tv_nsec + (int64_t)(timeout_ms > 0 ? timeout_ms : 0) * 1000000;
    until.tv_sec += (time_t)(ns / 1000000000);
    until.tv_nsec = (long)(ns % 1000000000);
    ring_slot *sl = &s->slot[k % RING];
    int rc = 0;
    pthread_mutex_lock(&s->mu);
    s->released = k; /* the frame handed out before is done with */
    pthread_cond_broadcast(&s->cv);
    while (!(sl->ready && sl->k == k) && rc == 0)
        rc = pthread_cond_timedwait(&s->cv, &s->mu, &until);
    int drawn = sl->ready && sl->k == k;
    pthread_mutex_unlock(&s->mu);
    if (!drawn)
        return rc == ETIMEDOUT ? MB_ETIMEOUT : MB_EIO;
    *out = sl;
    return 0;
}

static int synth_next(void *impl, int timeout_ms, mb_frame *out,
                      mb_source_stats *stats, char *err)
{
    (void)stats;
    synth_src *s = impl;
    uint64_t k = s->next_k;
    int64_t t_ns;
    if (s->cfg.fps > 0) {
        double period = 1e9 / s->cfg.fps;
        if (!s->started) { /* the clock starts with the first request */
            s->t0 = mb_source_clock_ns();
            s->started = 1;
        }
        if (s->cfg.drop_late) {
            double late = (double)(mb_source_clock_ns() - s->t0) / period;
            if (late > (double)k)
                k = (uint64_t)late;
        }
        if (s->cfg.max_frames && k >= s->cfg.max_frames)
            return mb_err_set(err, MB_ENOTFOUND,
                              "synthetic line: all %llu frames made",
                              (unsigned long long)s->cfg.max_frames);
        t_ns = s->t0 + (int64_t)llround((double)k * period);
        int rc = mb_source_sleep_until(t_ns, timeout_ms);
        if (rc < 0)
            return rc;
    } else {
        if (s->cfg.max_frames && k >= s->cfg.max_frames)
            return mb_err_set(err, MB_ENOTFOUND,
                              "synthetic line: all %llu frames made",
                              (unsigned long long)s->cfg.max_frames);
        t_ns = mb_source_clock_ns();
    }
    ring_slot *sl = &s->slot[0];
    int rc;
    s->cur = -1;
    if (s->ahead) {
        rc = take_drawn(s, k, timeout_ms, &sl);
        if (rc == MB_ETIMEOUT)
            return mb_err_set(err, rc, "synthetic line: frame %llu not drawn "
                              "in %d ms", (unsigned long long)k, timeout_ms);
        if (rc == 0)
            rc = sl->rc;
    } else {
        rc = render(s, k, sl);
    }
    if (rc < 0)
        return mb_err_set(err, MB_EIO,
                          "synthetic line: frame %llu could not be made (%s)",
                          (unsigned long long)k, mb_strerror(rc));
    s->cur = (int)(sl - s->slot);
    s->next_k = k + 1;
    out->view = sl->frame;
    out->seq = k;
    out->t_ns = t_ns;
    return 0;
}

static void synth_close(void *impl)
{
    synth_src *s = impl;
    if (!s)
        return;
    if (s->ahead) {
        pthread_mutex_lock(&s->mu);
        s->quit = 1;
        pthread_cond_broadcast(&s->cv);
        pthread_mutex_unlock(&s->mu);
        pthread_join(s->worker, NULL);
        pthread_cond_destroy(&s->cv);
        pthread_mutex_destroy(&s->mu);
    }
    mb_synth_close(s->g);
    for (int i = 0; i < RING; i++) {
        mb_image_free(&s->slot[i].frame);
        free(s->slot[i].xy);
    }
    for (int i = 0; i < N_EMPTY; i++)
        mb_image_free(&s->empty[i]);
    free(s);
}

static const mb_source_ops synth_ops = {"synth", synth_next, NULL, synth_close};

/* R from the nominal part: the farthest outline point from the part
   origin, 20 % more for variation and defects that change size, 2 mm for
   flash and contamination, and the blur margin. */
static int measure_radius(synth_src *s, char *err)
{
    const mb_synth_config *c = &s->cfg.synth;
    mb_synth_config nc = *c;
    nc.variation = 0;
    nc.defect_rate = 0;
    nc.noise_sigma = 0;
    mb_synth *probe = NULL;
    int rc = mb_synth_open(&nc, &probe, err);
    if (rc < 0)
        return rc;
    mb_synth_truth t;
    rc = mb_synth_make(probe, 0, 0, MB_SYNTH_NONE, &s->slot[0].frame, &t);
    if (rc < 0) {
        mb_synth_close(probe);
        return mb_err_set(err, rc,
                          "synthetic line: the nominal part could "
                          "not be made");
    }
    double r0 = 0;
    int n = 0;
    for (int o = 0; o < t.outlines.n_outlines; o++)
        n += t.outlines.counts[o];
    for (int i = 0; i < n; i++)
        r0 = fmax(r0, hypot(t.outlines.xy[2 * i] - t.pose.tx,
                            t.outlines.xy[2 * i + 1] - t.pose.ty));
    mb_synth_close(probe);
    double margin = ceil(3 * c->blur_sigma) + 2;
    s->radius = ceil(1.2 * r0 + 2.0 / c->mm_per_px + margin);
    /* lateral range: the part wholly inside the frame when it can be */
    double ry = ceil(1.1 * r0 + margin);
    s->y_lo = ry;
    s->y_hi = c->height - 1 - ry;
    if (s->y_hi < s->y_lo)
        s->y_lo = s->y_hi = 0.5 * (c->height - 1);
    return 0;
}

int mb_synth_source_open(const mb_synth_source_config *cfg, mb_source **out,
                         char *err)
{
    if (out)
        *out = NULL;
    if (!cfg || !out)
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: no configuration given");
    if (!(cfg->speed_px > 0) || !isfinite(cfg->speed_px))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: speed_px must be > 0 px per "
                          "frame (got %g)",
                          cfg->speed_px);
    if (!(cfg->fps >= 0) || !isfinite(cfg->fps) || cfg->fps > 100000)
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: fps must be 0 (as fast as "
                          "asked) or up to 100000 (got %g)",
                          cfg->fps);
    if (!(cfg->pitch_px >= 0) || !isfinite(cfg->pitch_px))
        return mb_err_set(err, MB_EINVAL,
                          "synthetic line: pitch_px must be >= 0 (got %g)",
                          cfg->pitch_px);
    synth_src *s = calloc(1, sizeof *s);
    if (!s)
        return mb_err_set(err, MB_ENOMEM, "synthetic line: out of memory");
    s->cfg = *cfg;
    /* a pose is given for every part: CUT cannot be drawn */
    s->cfg.synth.defect_mask &= ~(1u << MB_SYNTH_CUT);
    int rc = mb_synth_open(&s->cfg.synth, &s->g, err);
    if (rc < 0)
        goto fail;
    s->cur = -1;
    int want_ahead = cfg->render_ahead && !cfg->drop_late;
    s->n_slots = want_ahead ? RING : 1;
    s->max_points = mb_synth_max_points(s->g);
    for (int i = 0; i < s->n_slots; i++) {
        rc = mb_image_alloc(s->cfg.synth.width, s->cfg.synth.height,
                            &s->slot[i].frame);
        if (rc == 0 && want_ahead) {
            s->slot[i].xy = malloc(sizeof(double) * 2 * (size_t)s->max_points);
            rc = s->slot[i].xy ? 0 : MB_ENOMEM;
        }
        if (rc < 0) {
            mb_err_set(err, rc, "synthetic line: out of memory");
            goto fail;
        }
    }
    for (int i = 0; i < N_EMPTY; i++) {
        rc = mb_image_alloc(s->cfg.synth.width, s->cfg.synth.height,
                            &s->empty[i]);
        if (rc == 0)
            rc = mb_synth_make(s->g, GAP_INDEX | (uint64_t)i, 0, MB_SYNTH_EMPTY,
                               &s->empty[i], NULL);
        if (rc < 0) {
            mb_err_set(err, rc, "synthetic line: the empty belt frames could "
                                "not be made (%s)", mb_strerror(rc));
            goto fail;
        }
    }
    rc = measure_radius(s, err);
    if (rc < 0)
        goto fail;
    double min_pitch = s->cfg.synth.width + 2 * s->radius;
    if (cfg->pitch_px == 0) {
        s->pitch = min_pitch;
    } else if (cfg->pitch_px < min_pitch) {
        rc = mb_err_set(err, MB_EINVAL,
                        "synthetic line: pitch_px %g would put two parts in "
                        "view; it must be at least %g (frame width + 2 x "
                        "%g px)",
                        cfg->pitch_px, min_pitch, s->radius);
        goto fail;
    } else {
        s->pitch = cfg->pitch_px;
    }
    if (want_ahead) {
        pthread_mutex_init(&s->mu, NULL);
        pthread_cond_init(&s->cv, NULL);
        /* the worker takes no signals: the caller's handlers and its
           poll loop (EINTR) must see them */
        sigset_t all, old;
        sigfillset(&all);
        pthread_sigmask(SIG_SETMASK, &all, &old);
        s->ahead = pthread_create(&s->worker, NULL, draw_ahead, s) == 0;
        pthread_sigmask(SIG_SETMASK, &old, NULL);
        if (!s->ahead) { /* no thread to be had: draw on request */
            pthread_cond_destroy(&s->cv);
            pthread_mutex_destroy(&s->mu);
        }
    }
    rc = mb_source_create(&synth_ops, s, out, err);
    if (rc == 0)
        return 0;
fail:
    synth_close(s);
    return rc;
}

const mb_synth_source_truth *mb_synth_source_truth_of(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &synth_ops)
        return NULL;
    const synth_src *s = mb_source_impl(src);
    return s->cur >= 0 ? &s->slot[s->cur].truth : NULL;
}

double mb_synth_source_radius(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &synth_ops)
        return 0;
    const synth_src *s = mb_source_impl(src);
    return s->radius;
}

double mb_synth_source_pitch(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &synth_ops)
        return 0;
    const synth_src *s = mb_source_impl(src);
    return s->pitch;
}
