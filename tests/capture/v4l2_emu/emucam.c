/*
 * tests/capture/v4l2_emu/emucam.c - an emulated V4L2 camera as a libv4l2
 * plugin (struct libv4l_dev_ops exported as libv4l2_plugin; libv4l2 calls
 * init(fd) for every device it opens and keeps the first plugin that
 * returns non-NULL). It lets the capture code run through the real
 * libv4l2 and libv4lconvert on machines without a camera or a kernel
 * module. Configuration and faults: emucam.h.
 *
 * What it implements (Linux V4L2 API documentation, "Video Capture
 * Interface", "Streaming I/O (Memory Mapping)", "User Controls" and
 * "Camera Control Reference"): VIDIOC_QUERYCAP, ENUM_FMT, G/S/TRY_FMT for
 * GREY, YUYV and UYVY, REQBUFS, QUERYBUF, QBUF, DQBUF, STREAMON/OFF,
 * QUERYCTRL (with V4L2_CTRL_FLAG_NEXT_CTRL), QUERYMENU, G/S_CTRL for
 * V4L2_CID_EXPOSURE_AUTO, V4L2_CID_EXPOSURE_ABSOLUTE (refused with EACCES
 * while the automatic exposure is on, as UVC cameras do) and V4L2_CID_GAIN.
 * Anything else fails with ENOTTY, unknown controls with EINVAL.
 *
 * Buffers live in the claimed file itself: REQBUFS sizes it to count
 * page-aligned buffers and QUERYBUF gives each one's offset, so the mmap()
 * that libv4l2 and the application do on the fd maps exactly the memory
 * this plugin writes (plugins have no mmap hook).
 *
 * Timing: a free-running sensor. Frame n is exposed at STREAMON + n / fps
 * (+ the stall, for frames after MB_EMUCAM_STALL_AT); when it is due it
 * goes into the oldest queued buffer, or is lost if none is queued (its
 * sequence number is skipped). The work is done lazily in DQBUF, since a
 * plugin sees no clock of its own. poll() on a memfd or regular file never
 * waits, so DQBUF stands in for it: blocking, it sleeps until a frame is
 * done; non-blocking, it sleeps until the next frame when that is at most
 * 50 ms away and otherwise sleeps 50 ms and fails with EAGAIN (so a
 * caller's timeout fires within 50 ms of its deadline during a stall).
 */
#define _GNU_SOURCE
#include "emucam.h"

#include <errno.h>
#include <fcntl.h>
#include <libv4l-plugin.h>
#include <linux/videodev2.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <sys/time.h>
#include <time.h>
#include <unistd.h>

#define MAX_FORMATS 4
#define MAX_BUFFERS 32
#define NB_WAIT_NS 50000000LL /* longest sleep of a non-blocking DQBUF */

enum { B_IDLE = 0, B_QUEUED, B_DONE }; /* buffer states */

typedef struct {
    int fd;
    /* configuration */
    uint32_t formats[MAX_FORMATS];
    int n_formats;
    double fps;
    int bpl_align;
    long unplug_after, stall_at, stall_ms, short_at, gap_at, gap;
    int no_controls;
    char log_path[512];
    /* format */
    struct v4l2_pix_format pix;
    /* buffers */
    int n_buf;
    size_t buf_size; /* page aligned */
    uint8_t *map;
    int state[MAX_BUFFERS];
    int queue[MAX_BUFFERS], q_head, q_len; /* queued, oldest first */
    int done[MAX_BUFFERS], d_head, d_len;  /* done, oldest first */
    struct v4l2_buffer info[MAX_BUFFERS];  /* what DQBUF reports */
    /* stream */
    int streaming;
    int64_t t_start;
    long next_frame; /* next frame number to expose */
    long delivered;  /* frames dequeued */
    long seq_skip;   /* sequence numbers skipped by the injected gap */
    int gone;
    /* controls */
    int exp_auto, exp_abs, gain;
} emu;

/* ---- small helpers */

static int64_t mono_ns(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000000000LL + ts.tv_nsec;
}

static void sleep_until(int64_t t)
{
    struct timespec ts = {(time_t)(t / 1000000000LL), (long)(t % 1000000000LL)};
    while (clock_nanosleep(CLOCK_MONOTONIC, TIMER_ABSTIME, &ts, NULL) == EINTR)
        ;
}

static long env_long(const char *name, long def)
{
    const char *s = getenv(name);
    if (!s || !*s)
        return def;
    char *end;
    long v = strtol(s, &end, 10);
    return *end ? def : v;
}

static void emu_log(const emu *e, const char *fmt, ...)
{
    if (!e->log_path[0])
        return;
    FILE *f = fopen(e->log_path, "a");
    if (!f)
        return;
    va_list ap;
    va_start(ap, fmt);
    vfprintf(f, fmt, ap);
    va_end(ap);
    fputc('\n', f);
    fclose(f);
}

static int fail(int e)
{
    errno = e;
    return -1;
}

static int bytes_per_pixel(uint32_t f)
{
    return f == V4L2_PIX_FMT_GREY ? 1 : 2;
}

static int offered(const emu *e, uint32_t f)
{
    for (int i = 0; i < e->n_formats; i++)
        if (e->formats[i] == f)
            return 1;
    return 0;
}

/* ---- init / close */

static void *emu_init(int fd)
{
    char link[64], target[512];
    snprintf(link, sizeof link, "/proc/self/fd/%d", fd);
    ssize_t n = readlink(link, target, sizeof target - 1);
    if (n <= 0)
        return NULL;
    target[n] = '\0';
    if (!strstr(target, EMUCAM_NAME))
        return NULL; /* not ours: leave it to libv4l2 or another plugin */

    emu *e = calloc(1, sizeof *e);
    if (!e)
        return NULL;
    e->fd = fd;
    const char *fl = getenv("MB_EMUCAM_FORMATS");
    char list[64];
    snprintf(list, sizeof list, "%s", fl && *fl ? fl : "GREY,YUYV");
    for (char *tok = strtok(list, ","); tok && e->n_formats < MAX_FORMATS;
         tok = strtok(NULL, ",")) {
        if (!strcmp(tok, "GREY"))
            e->formats[e->n_formats++] = V4L2_PIX_FMT_GREY;
        else if (!strcmp(tok, "YUYV"))
            e->formats[e->n_formats++] = V4L2_PIX_FMT_YUYV;
        else if (!strcmp(tok, "UYVY"))
            e->formats[e->n_formats++] = V4L2_PIX_FMT_UYVY;
    }
    if (e->n_formats == 0)
        e->formats[e->n_formats++] = V4L2_PIX_FMT_GREY;
    e->fps = (double)env_long("MB_EMUCAM_FPS", 200);
    if (e->fps <= 0)
        e->fps = 200;
    e->bpl_align = (int)env_long("MB_EMUCAM_BPL_ALIGN", 64);
    if (e->bpl_align < 1)
        e->bpl_align = 1;
    e->unplug_after = env_long("MB_EMUCAM_UNPLUG_AFTER", -1);
    e->stall_at = env_long("MB_EMUCAM_STALL_AT", -1);
    e->stall_ms = env_long("MB_EMUCAM_STALL_MS", 1000);
    e->short_at = env_long("MB_EMUCAM_SHORT_AT", -1);
    e->gap_at = env_long("MB_EMUCAM_GAP_AT", -1);
    e->gap = env_long("MB_EMUCAM_GAP", 3);
    e->no_controls = env_long("MB_EMUCAM_NO_CONTROLS", 0) != 0;
    const char *lp = getenv("MB_EMUCAM_LOG");
    if (lp)
        snprintf(e->log_path, sizeof e->log_path, "%s", lp);

    e->pix.width = 640;
    e->pix.height = 480;
    e->pix.pixelformat = e->formats[0];
    e->exp_auto = V4L2_EXPOSURE_APERTURE_PRIORITY;
    e->exp_abs = 156;
    e->gain = 32;
    return e;
}

static void release_buffers(emu *e)
{
    if (e->map)
        munmap(e->map, e->buf_size * (size_t)e->n_buf);
    e->map = NULL;
    e->n_buf = 0;
    e->q_len = e->d_len = 0;
    memset(e->state, 0, sizeof e->state);
}

static void emu_close(void *priv)
{
    emu *e = priv;
    if (!e)
        return;
    release_buffers(e);
    free(e);
}

/* ---- formats */

static void adjust(const emu *e, struct v4l2_pix_format *p)
{
    if (!offered(e, p->pixelformat))
        p->pixelformat = e->formats[0];
    if (p->width < 16)
        p->width = 16;
    if (p->width > 4096)
        p->width = 4096;
    if (p->height < 16)
        p->height = 16;
    if (p->height > 4096)
        p->height = 4096;
    p->width &= ~1u; /* packed 4:2:2 pairs */
    unsigned row = p->width * (unsigned)bytes_per_pixel(p->pixelformat);
    unsigned a = (unsigned)e->bpl_align;
    p->bytesperline = (row + a - 1) / a * a;
    p->sizeimage = p->bytesperline * p->height;
    p->field = V4L2_FIELD_NONE;
    p->colorspace = V4L2_COLORSPACE_SRGB;
    p->priv = 0;
    p->flags = 0;
    p->ycbcr_enc = 0;
    p->quantization = 0;
    p->xfer_func = 0;
}

static const char *fourcc_name(uint32_t f)
{
    switch (f) {
    case V4L2_PIX_FMT_GREY: return "GREY";
    case V4L2_PIX_FMT_YUYV: return "YUYV";
    case V4L2_PIX_FMT_UYVY: return "UYVY";
    default: return "?";
    }
}

/* ---- frames */

static void fill(const emu *e, uint8_t *dst, uint32_t seq)
{
    const struct v4l2_pix_format *p = &e->pix;
    for (int y = 0; y < (int)p->height; y++) {
        uint8_t *row = dst + (size_t)y * p->bytesperline;
        if (p->pixelformat == V4L2_PIX_FMT_GREY) {
            for (int x = 0; x < (int)p->width; x++)
                row[x] = emucam_luma(x, y, seq);
            continue;
        }
        int uyvy = p->pixelformat == V4L2_PIX_FMT_UYVY;
        for (int x = 0; x < (int)p->width; x += 2) {
            uint8_t *q = row + 2 * x;
            uint8_t y0 = emucam_luma(x, y, seq),
                    y1 = emucam_luma(x + 1, y, seq);
            uint8_t cb = emucam_chroma(x, y, seq, 0),
                    cr = emucam_chroma(x, y, seq, 1);
            if (uyvy) {
                q[0] = cb;
                q[1] = y0;
                q[2] = cr;
                q[3] = y1;
            } else {
                q[0] = y0;
                q[1] = cb;
                q[2] = y1;
                q[3] = cr;
            }
        }
    }
}

static int64_t due_time(const emu *e, long n)
{
    int64_t t = e->t_start + (int64_t)((double)n * 1e9 / e->fps);
    if (e->stall_at >= 0 && n >= e->stall_at)
        t += (int64_t)e->stall_ms * 1000000LL;
    return t;
}

/* Expose every frame due by `now`: into the oldest queued buffer, or lost. */
static void run_sensor(emu *e, int64_t now)
{
    while (due_time(e, e->next_frame) <= now) {
        long n = e->next_frame++;
        if (n == e->gap_at)
            e->seq_skip += e->gap; /* frames the sensor lost */
        if (e->q_len == 0)
            continue; /* no buffer: the frame is dropped */
        int i = e->queue[e->q_head];
        e->q_head = (e->q_head + 1) % MAX_BUFFERS;
        e->q_len--;
        uint32_t seq = (uint32_t)(n + e->seq_skip);
        fill(e, e->map + (size_t)i * e->buf_size, seq);
        struct v4l2_buffer *b = &e->info[i];
        int64_t t = due_time(e, n);
        b->sequence = seq;
        b->bytesused =
            n == e->short_at ? e->pix.sizeimage / 2 : e->pix.sizeimage;
        b->timestamp.tv_sec = (time_t)(t / 1000000000LL);
        b->timestamp.tv_usec = (suseconds_t)(t % 1000000000LL / 1000);
        e->state[i] = B_DONE;
        e->done[(e->d_head + e->d_len) % MAX_BUFFERS] = i;
        e->d_len++;
    }
}

static void describe(const emu *e, int i, struct v4l2_buffer *b)
{
    uint32_t type = b->type;
    *b = e->info[i];
    b->type = type;
    b->index = (uint32_t)i;
    b->memory = V4L2_MEMORY_MMAP;
    b->m.offset = (uint32_t)((size_t)i * e->buf_size);
    b->length = e->pix.sizeimage;
    b->field = V4L2_FIELD_NONE;
    b->flags = V4L2_BUF_FLAG_TIMESTAMP_MONOTONIC | V4L2_BUF_FLAG_TSTAMP_SRC_EOF;
    if (e->state[i] == B_QUEUED)
        b->flags |= V4L2_BUF_FLAG_QUEUED;
    if (e->state[i] == B_DONE)
        b->flags |= V4L2_BUF_FLAG_DONE;
}

static int do_reqbufs(emu *e, struct v4l2_requestbuffers *r)
{
    if (r->type != V4L2_BUF_TYPE_VIDEO_CAPTURE || r->memory != V4L2_MEMORY_MMAP)
        return fail(EINVAL);
    if (e->streaming)
        return fail(EBUSY);
    release_buffers(e);
    r->capabilities = V4L2_BUF_CAP_SUPPORTS_MMAP;
    if (r->count == 0)
        return 0;
    unsigned count = r->count < 2 ? 2 : r->count;
    if (count > MAX_BUFFERS)
        count = MAX_BUFFERS;
    size_t page = (size_t)sysconf(_SC_PAGESIZE);
    e->buf_size = (e->pix.sizeimage + page - 1) / page * page;
    size_t total = e->buf_size * count;
    if (ftruncate(e->fd, (off_t)total) < 0)
        return fail(ENOMEM);
    void *m = mmap(NULL, total, PROT_READ | PROT_WRITE, MAP_SHARED, e->fd, 0);
    if (m == MAP_FAILED)
        return fail(ENOMEM);
    e->map = m;
    e->n_buf = (int)count;
    memset(e->info, 0, sizeof e->info);
    r->count = count;
    emu_log(e, "REQBUFS %u", count);
    return 0;
}

static int do_dqbuf(emu *e, struct v4l2_buffer *b)
{
    if (!e->streaming)
        return fail(EINVAL);
    int nonblock = (fcntl(e->fd, F_GETFL) & O_NONBLOCK) != 0;
    for (;;) {
        if (e->unplug_after >= 0 && e->delivered >= e->unplug_after) {
            e->gone = 1;
            emu_log(e, "UNPLUG after %ld frames", e->delivered);
            return fail(ENODEV);
        }
        int64_t now = mono_ns();
        run_sensor(e, now);
        if (e->d_len > 0)
            break;
        if (e->q_len == 0)
            return fail(EINVAL); /* nothing queued: would wait forever */
        int64_t next = due_time(e, e->next_frame);
        if (nonblock && next - now > NB_WAIT_NS) {
            sleep_until(now + NB_WAIT_NS);
            return fail(EAGAIN);
        }
        sleep_until(next);
    }
    int i = e->done[e->d_head];
    e->d_head = (e->d_head + 1) % MAX_BUFFERS;
    e->d_len--;
    e->state[i] = B_IDLE;
    describe(e, i, b);
    e->delivered++;
    return 0;
}

/* ---- controls */

typedef struct {
    uint32_t id;
    uint32_t type;
    const char *name;
    int min, max, def;
} ctrl_def;

/* ascending id order, for V4L2_CTRL_FLAG_NEXT_CTRL */
static const ctrl_def controls[] = {
    {V4L2_CID_GAIN, V4L2_CTRL_TYPE_INTEGER, "Gain", 0, 255, 32},
    {V4L2_CID_EXPOSURE_AUTO, V4L2_CTRL_TYPE_MENU, "Auto Exposure", 0, 3, 3},
    {V4L2_CID_EXPOSURE_ABSOLUTE, V4L2_CTRL_TYPE_INTEGER,
     "Exposure Time, Absolute", 1, 5000, 156},
};
#define N_CONTROLS ((int)(sizeof controls / sizeof controls[0]))

static const ctrl_def *find_control(const emu *e, uint32_t id)
{
    if (e->no_controls)
        return NULL;
    for (int i = 0; i < N_CONTROLS; i++)
        if (controls[i].id == id)
            return &controls[i];
    return NULL;
}

static int do_queryctrl(const emu *e, struct v4l2_queryctrl *q)
{
    const ctrl_def *c = NULL;
    if (q->id & V4L2_CTRL_FLAG_NEXT_CTRL) {
        uint32_t after =
            q->id & ~(V4L2_CTRL_FLAG_NEXT_CTRL | V4L2_CTRL_FLAG_NEXT_COMPOUND);
        for (int i = 0; i < N_CONTROLS && !c && !e->no_controls; i++)
            if (controls[i].id > after)
                c = &controls[i];
    } else {
        c = find_control(e, q->id);
    }
    if (!c)
        return fail(EINVAL);
    memset(q, 0, sizeof *q);
    q->id = c->id;
    q->type = c->type;
    snprintf((char *)q->name, sizeof q->name, "%s", c->name);
    q->minimum = c->min;
    q->maximum = c->max;
    q->step = 1;
    q->default_value = c->def;
    return 0;
}

static int *control_value(emu *e, uint32_t id)
{
    switch (id) {
    case V4L2_CID_GAIN: return &e->gain;
    case V4L2_CID_EXPOSURE_AUTO: return &e->exp_auto;
    case V4L2_CID_EXPOSURE_ABSOLUTE: return &e->exp_abs;
    default: return NULL;
    }
}

static int do_s_ctrl(emu *e, struct v4l2_control *c)
{
    const ctrl_def *d = find_control(e, c->id);
    if (!d)
        return fail(EINVAL);
    if (c->value < d->min || c->value > d->max)
        return fail(ERANGE);
    if (c->id == V4L2_CID_EXPOSURE_AUTO && c->value != V4L2_EXPOSURE_MANUAL &&
        c->value != V4L2_EXPOSURE_APERTURE_PRIORITY)
        return fail(EINVAL); /* like UVC: only these two menu entries */
    if (c->id == V4L2_CID_EXPOSURE_ABSOLUTE &&
        e->exp_auto != V4L2_EXPOSURE_MANUAL) {
        emu_log(e, "S_CTRL exposure_absolute=%d refused (auto exposure on)",
                c->value);
        return fail(EACCES);
    }
    *control_value(e, c->id) = c->value;
    emu_log(e, "S_CTRL %s=%d",
            c->id == V4L2_CID_GAIN
                ? "gain"
                : (c->id == V4L2_CID_EXPOSURE_AUTO ? "exposure_auto"
                                                   : "exposure_absolute"),
            c->value);
    return 0;
}

/* ---- the ioctl entry */

static int emu_ioctl(void *priv, int fd, unsigned long request, void *arg)
{
    emu *e = priv;
    (void)fd;
    if (e->gone)
        return fail(ENODEV);
    switch ((unsigned int)request) {
    case VIDIOC_QUERYCAP: {
        struct v4l2_capability *cap = arg;
        memset(cap, 0, sizeof *cap);
        snprintf((char *)cap->driver, sizeof cap->driver, "mb-emucam");
        snprintf((char *)cap->card, sizeof cap->card,
                 "modeband emulated camera");
        snprintf((char *)cap->bus_info, sizeof cap->bus_info,
                 "platform:mb-emucam");
        cap->version = 0x00060100;
        cap->device_caps = V4L2_CAP_VIDEO_CAPTURE | V4L2_CAP_STREAMING;
        cap->capabilities = cap->device_caps | V4L2_CAP_DEVICE_CAPS;
        return 0;
    }
    case VIDIOC_ENUM_FMT: {
        struct v4l2_fmtdesc *d = arg;
        if (d->type != V4L2_BUF_TYPE_VIDEO_CAPTURE ||
            d->index >= (uint32_t)e->n_formats)
            return fail(EINVAL);
        uint32_t idx = d->index, type = d->type;
        memset(d, 0, sizeof *d);
        d->index = idx;
        d->type = type;
        d->pixelformat = e->formats[idx];
        snprintf((char *)d->description, sizeof d->description, "%s",
                 fourcc_name(d->pixelformat));
        return 0;
    }
    case VIDIOC_G_FMT:
    case VIDIOC_S_FMT:
    case VIDIOC_TRY_FMT: {
        struct v4l2_format *f = arg;
        if (f->type != V4L2_BUF_TYPE_VIDEO_CAPTURE)
            return fail(EINVAL);
        if ((unsigned int)request == VIDIOC_G_FMT) {
            f->fmt.pix = e->pix;
            return 0;
        }
        adjust(e, &f->fmt.pix);
        if ((unsigned int)request == VIDIOC_S_FMT) {
            if (e->n_buf > 0)
                return fail(EBUSY);
            e->pix = f->fmt.pix;
            emu_log(e, "S_FMT %s %ux%u bpl %u", fourcc_name(e->pix.pixelformat),
                    e->pix.width, e->pix.height, e->pix.bytesperline);
        }
        return 0;
    }
    case VIDIOC_REQBUFS: return do_reqbufs(e, arg);
    case VIDIOC_QUERYBUF: {
        struct v4l2_buffer *b = arg;
        if (b->type != V4L2_BUF_TYPE_VIDEO_CAPTURE ||
            b->index >= (uint32_t)e->n_buf)
            return fail(EINVAL);
        describe(e, (int)b->index, b);
        return 0;
    }
    case VIDIOC_QBUF: {
        struct v4l2_buffer *b = arg;
        if (b->type != V4L2_BUF_TYPE_VIDEO_CAPTURE ||
            b->memory != V4L2_MEMORY_MMAP || b->index >= (uint32_t)e->n_buf ||
            e->state[b->index] != B_IDLE)
            return fail(EINVAL);
        int i = (int)b->index;
        e->state[i] = B_QUEUED;
        e->queue[(e->q_head + e->q_len) % MAX_BUFFERS] = i;
        e->q_len++;
        describe(e, i, b);
        return 0;
    }
    case VIDIOC_DQBUF: {
        struct v4l2_buffer *b = arg;
        if (b->type != V4L2_BUF_TYPE_VIDEO_CAPTURE ||
            b->memory != V4L2_MEMORY_MMAP)
            return fail(EINVAL);
        return do_dqbuf(e, b);
    }
    case VIDIOC_STREAMON:
        if (*(int *)arg != V4L2_BUF_TYPE_VIDEO_CAPTURE || e->n_buf == 0)
            return fail(EINVAL);
        if (!e->streaming) {
            e->streaming = 1;
            e->t_start = mono_ns();
            e->next_frame = 0;
            e->seq_skip = 0;
            emu_log(e, "STREAMON %s %ux%u", fourcc_name(e->pix.pixelformat),
                    e->pix.width, e->pix.height);
        }
        return 0;
    case VIDIOC_STREAMOFF:
        if (*(int *)arg != V4L2_BUF_TYPE_VIDEO_CAPTURE)
            return fail(EINVAL);
        e->streaming = 0;
        e->q_len = e->d_len = 0;
        for (int i = 0; i < e->n_buf; i++)
            e->state[i] = B_IDLE;
        return 0;
    case VIDIOC_QUERYCTRL: return do_queryctrl(e, arg);
    case VIDIOC_QUERYMENU: {
        struct v4l2_querymenu *m = arg;
        static const char *const names[] = {"Auto Mode", "Manual Mode",
                                            "Shutter Priority Mode",
                                            "Aperture Priority Mode"};
        if (m->id != V4L2_CID_EXPOSURE_AUTO || e->no_controls || m->index > 3 ||
            (m->index != 1 && m->index != 3))
            return fail(EINVAL);
        snprintf((char *)m->name, sizeof m->name, "%s", names[m->index]);
        return 0;
    }
    case VIDIOC_G_CTRL: {
        struct v4l2_control *c = arg;
        if (!find_control(e, c->id))
            return fail(EINVAL);
        c->value = *control_value(e, c->id);
        return 0;
    }
    case VIDIOC_S_CTRL: return do_s_ctrl(e, arg);
    default: return fail(ENOTTY);
    }
}

/* The table libv4l2 looks up with dlsym. read and write stay NULL: the
   camera streams only (libv4l2 answers read() with EINVAL then). */
__attribute__((visibility("default")))
const struct libv4l_dev_ops libv4l2_plugin = {
    .init = emu_init,
    .close = emu_close,
    .ioctl = emu_ioctl,
    .read = NULL,
    .write = NULL,
};
