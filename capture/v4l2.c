/*
 * capture/v4l2.c - a V4L2 camera through libv4l2: format negotiation, the
 * exposure and gain controls, mmap streaming, waiting with poll(), faults.
 *
 * Every device call goes through libv4l2 (v4l2_open, v4l2_ioctl,
 * v4l2_mmap, v4l2_munmap, v4l2_close) so that libv4lconvert can supply
 * YU12 from cameras that only send compressed or other packed formats, and
 * so that libv4l2 plugins (the project's emulated camera among them) see
 * every call. The fd is opened O_NONBLOCK: poll() does the waiting, DQBUF
 * never blocks; EAGAIN after a ready poll (which an emulated device, whose
 * poll never waits, gives all the time) backs off for a millisecond.
 */
#include "v4l2.h"

#include "error.h"

#include <errno.h>
#include <fcntl.h>
#include <libv4l2.h>
#include <linux/videodev2.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <time.h>

typedef struct {
    void *start;
    size_t length;
} cam_buffer;

typedef struct {
    mb_v4l2_config cfg; /* cfg.path points at path below */
    char *path;
    int fd;
    mb_v4l2_info info;
    size_t min_bytes; /* bytes a whole frame needs (its luma, at least) */
    int src_bpl;      /* bytes per row in the device buffers */
    int n_buf;
    cam_buffer buf[MB_V4L2_MAX_BUFFERS];
    int held;      /* buffer lent to the caller, or -1 */
    mb_image luma; /* YUYV: the luma plane, allocated once */
} cam;

static const mb_source_ops cam_ops;

/* ---- helpers */

static int xioctl(int fd, unsigned long request, void *arg)
{
    int r;
    do
        r = v4l2_ioctl(fd, request, arg);
    while (r < 0 && errno == EINTR);
    return r;
}

/* A driver error that means the camera is gone (unplugged, powered off,
   its USB link reset) rather than a refused request. */
static int gone_errno(int e)
{
    return e == ENODEV || e == ENXIO || e == EIO || e == ESHUTDOWN;
}

static int dev_code(int e)
{
    return gone_errno(e) ? MB_ENODEV : MB_EIO;
}

static void fourcc_str(uint32_t f, char s[5])
{
    for (int i = 0; i < 4; i++) {
        char ch = (char)((f >> (8 * i)) & 0xff);
        s[i] = (ch >= 32 && ch < 127) ? ch : '?';
    }
    s[4] = '\0';
}

static void copy_cap_string(char *dst, size_t n, const __u8 *src, size_t src_n)
{
    size_t i = 0;
    for (; i + 1 < n && i < src_n && src[i]; i++)
        dst[i] = (char)src[i];
    dst[i] = '\0';
}

static int64_t now_ns(void)
{
    return mb_source_clock_ns();
}

/* ---- controls */

/* Set one control after checking it exists and the value is in range;
 *readback gets what the camera reports afterwards. */
static int set_control(cam *c, uint32_t id, const char *what, const char *field,
                       int value, int *readback, char *err)
{
    struct v4l2_queryctrl q;
    memset(&q, 0, sizeof q);
    q.id = id;
    if (xioctl(c->fd, VIDIOC_QUERYCTRL, &q) < 0) {
        if (gone_errno(errno))
            return mb_err_set(err, MB_ENODEV,
                              "camera %s went away while querying %s", c->path,
                              what);
        return mb_err_set(err, MB_EINVAL,
                          "camera %s has no %s control; leave %s unset for "
                          "this camera",
                          c->path, what, field);
    }
    if (q.flags & V4L2_CTRL_FLAG_DISABLED)
        return mb_err_set(err, MB_EINVAL,
                          "camera %s has its %s control disabled; leave %s "
                          "unset for this camera",
                          c->path, what, field);
    if (value < q.minimum || value > q.maximum)
        return mb_err_set(err, MB_ERANGE,
                          "camera %s: %s %d is outside the camera's range "
                          "%d..%d (field %s)",
                          c->path, what, value, q.minimum, q.maximum, field);
    struct v4l2_control ctl = {id, value};
    if (xioctl(c->fd, VIDIOC_S_CTRL, &ctl) < 0)
        return mb_err_set(err, dev_code(errno),
                          "camera %s: setting %s to %d failed: %s", c->path,
                          what, value, strerror(errno));
    ctl.value = -1;
    if (xioctl(c->fd, VIDIOC_G_CTRL, &ctl) < 0)
        return mb_err_set(err, dev_code(errno),
                          "camera %s: reading %s back failed: %s", c->path,
                          what, strerror(errno));
    if (readback)
        *readback = ctl.value;
    return 0;
}

static int set_controls(cam *c, char *err)
{
    c->info.exposure_100us = -1;
    c->info.gain = -1;
    if (c->cfg.exposure_us > 0) {
        /* Manual first: most cameras refuse (EACCES) or ignore an absolute
           exposure while their automatic exposure is on. A camera without
           the menu has no automatic exposure to turn off. */
        struct v4l2_queryctrl q;
        memset(&q, 0, sizeof q);
        q.id = V4L2_CID_EXPOSURE_AUTO;
        if (xioctl(c->fd, VIDIOC_QUERYCTRL, &q) == 0 &&
            !(q.flags & V4L2_CTRL_FLAG_DISABLED)) {
            int rc =
                set_control(c, V4L2_CID_EXPOSURE_AUTO, "automatic exposure",
                            "exposure_us", V4L2_EXPOSURE_MANUAL, NULL, err);
            if (rc < 0)
                return rc;
        }
        int units = (c->cfg.exposure_us + 50) / 100;
        if (units < 1)
            units = 1;
        int rc = set_control(c, V4L2_CID_EXPOSURE_ABSOLUTE,
                             "exposure (100 us units)", "exposure_us", units,
                             &c->info.exposure_100us, err);
        if (rc < 0)
            return rc;
    }
    if (c->cfg.gain >= 0) {
        int rc = set_control(c, V4L2_CID_GAIN, "gain", "gain", c->cfg.gain,
                             &c->info.gain, err);
        if (rc < 0)
            return rc;
    }
    return 0;
}

/* ---- format */

#define MAX_OFFERED 64

static int negotiate(cam *c, char *err)
{
    uint32_t offered[MAX_OFFERED];
    int emulated[MAX_OFFERED], n = 0;
    for (int i = 0; n < MAX_OFFERED; i++) {
        struct v4l2_fmtdesc d;
        memset(&d, 0, sizeof d);
        d.index = (__u32)i;
        d.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        if (xioctl(c->fd, VIDIOC_ENUM_FMT, &d) < 0) {
            if (gone_errno(errno))
                return mb_err_set(err, MB_ENODEV,
                                  "camera %s went away while listing its "
                                  "formats",
                                  c->path);
            break;
        }
        offered[n] = d.pixelformat;
        emulated[n] = (d.flags & V4L2_FMT_FLAG_EMULATED) != 0;
        n++;
    }

    int w = c->cfg.width, h = c->cfg.height;
    if (w == 0 || h == 0) {
        struct v4l2_format cur;
        memset(&cur, 0, sizeof cur);
        cur.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        if (xioctl(c->fd, VIDIOC_G_FMT, &cur) < 0)
            return mb_err_set(err, dev_code(errno),
                              "camera %s: reading its format failed: %s",
                              c->path, strerror(errno));
        w = (int)cur.fmt.pix.width;
        h = (int)cur.fmt.pix.height;
    }

    /* GREY and YUYV only when the camera sends them itself (libv4lconvert
       never makes them anyway); planar 4:2:0 also through conversion. */
    static const uint32_t pref[] = {V4L2_PIX_FMT_GREY, V4L2_PIX_FMT_YUYV,
                                    V4L2_PIX_FMT_YUV420, V4L2_PIX_FMT_YVU420};
    char other[160] = "";
    int other_size = 0;
    for (size_t p = 0; p < sizeof pref / sizeof pref[0]; p++) {
        int k = -1;
        for (int i = 0; i < n && k < 0; i++)
            if (offered[i] == pref[p] && (p >= 2 || !emulated[i]))
                k = i;
        if (k < 0)
            continue;
        struct v4l2_format f;
        memset(&f, 0, sizeof f);
        f.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        f.fmt.pix.width = (__u32)w;
        f.fmt.pix.height = (__u32)h;
        f.fmt.pix.pixelformat = pref[p];
        f.fmt.pix.field = V4L2_FIELD_NONE;
        if (xioctl(c->fd, VIDIOC_TRY_FMT, &f) < 0) {
            if (gone_errno(errno))
                return mb_err_set(err, MB_ENODEV,
                                  "camera %s went away while trying a "
                                  "format",
                                  c->path);
            continue;
        }
        if (f.fmt.pix.pixelformat != pref[p] || (int)f.fmt.pix.width != w ||
            (int)f.fmt.pix.height != h) {
            char a[5], b[5];
            fourcc_str(pref[p], a);
            fourcc_str(f.fmt.pix.pixelformat, b);
            size_t len = strlen(other);
            snprintf(other + len, sizeof other - len, "%s%s -> %s %ux%u",
                     len ? ", " : "", a, b, f.fmt.pix.width, f.fmt.pix.height);
            if (f.fmt.pix.pixelformat == pref[p])
                other_size = 1;
            continue;
        }
        /* Set it, then believe only what the driver says it set. */
        if (xioctl(c->fd, VIDIOC_S_FMT, &f) < 0)
            return mb_err_set(err, dev_code(errno),
                              "camera %s: setting the format failed: %s",
                              c->path, strerror(errno));
        struct v4l2_format got;
        memset(&got, 0, sizeof got);
        got.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        if (xioctl(c->fd, VIDIOC_G_FMT, &got) < 0)
            return mb_err_set(err, dev_code(errno),
                              "camera %s: reading its format failed: %s",
                              c->path, strerror(errno));
        char a[5], b[5];
        fourcc_str(pref[p], a);
        fourcc_str(got.fmt.pix.pixelformat, b);
        if (got.fmt.pix.pixelformat != pref[p])
            return mb_err_set(err, MB_EFORMAT,
                              "camera %s was asked for %s but gives %s",
                              c->path, a, b);
        if ((int)got.fmt.pix.width != w || (int)got.fmt.pix.height != h)
            return mb_err_set(err, MB_ESIZE,
                              "camera %s was asked for %dx%d but gives "
                              "%ux%u",
                              c->path, w, h, got.fmt.pix.width,
                              got.fmt.pix.height);
        int bpp = pref[p] == V4L2_PIX_FMT_YUYV ? 2 : 1;
        int bpl = (int)got.fmt.pix.bytesperline;
        if (bpl < w * bpp)
            bpl = w * bpp;
        c->info.fourcc = pref[p];
        c->info.emulated = emulated[k];
        c->info.width = w;
        c->info.height = h;
        if (pref[p] == V4L2_PIX_FMT_YUYV) {
            c->info.stride = 0; /* set from the luma plane at allocation */
            c->min_bytes = (size_t)bpl * (size_t)(h - 1) + (size_t)(2 * w);
        } else if (pref[p] == V4L2_PIX_FMT_GREY) {
            c->info.stride = bpl;
            c->min_bytes = (size_t)bpl * (size_t)(h - 1) + (size_t)w;
        } else {
            c->info.stride = bpl; /* bytesperline of the Y plane */
            c->min_bytes = (size_t)bpl * (size_t)h;
        }
        c->src_bpl = bpl;
        return 0;
    }

    char list[200] = "";
    for (int i = 0; i < n; i++) {
        char s[5];
        fourcc_str(offered[i], s);
        size_t len = strlen(list);
        snprintf(list + len, sizeof list - len, "%s%s%s", i ? " " : "", s,
                 emulated[i] ? "(converted)" : "");
    }
    if (other[0])
        return mb_err_set(err, other_size ? MB_ESIZE : MB_EFORMAT,
                          "camera %s gives none of GREY, YUYV, YU12, YV12 "
                          "at %dx%d (it answered %s; it offers %s)",
                          c->path, w, h, other, n ? list : "nothing");
    return mb_err_set(err, MB_EFORMAT,
                      "camera %s offers none of GREY, YUYV, YU12, YV12 (it "
                      "offers %s)",
                      c->path, n ? list : "nothing");
}

/* ---- device life */

static void close_device(cam *c)
{
    if (c->fd < 0)
        return;
    /* Errors are ignored: after an unplug every call fails, and all that
       matters is that the fd and the mappings are released. */
    enum v4l2_buf_type type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    xioctl(c->fd, VIDIOC_STREAMOFF, &type);
    for (int i = 0; i < c->n_buf; i++)
        if (c->buf[i].start)
            v4l2_munmap(c->buf[i].start, c->buf[i].length);
    memset(c->buf, 0, sizeof c->buf);
    if (c->n_buf > 0) {
        struct v4l2_requestbuffers req;
        memset(&req, 0, sizeof req);
        req.count = 0;
        req.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        req.memory = V4L2_MEMORY_MMAP;
        xioctl(c->fd, VIDIOC_REQBUFS, &req);
    }
    c->n_buf = 0;
    c->held = -1;
    v4l2_close(c->fd);
    c->fd = -1;
}

/* The v4l2_buffer naming mmap capture buffer i (QUERYBUF, QBUF). */
static struct v4l2_buffer mmap_buffer(int i)
{
    struct v4l2_buffer b;
    memset(&b, 0, sizeof b);
    b.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    b.memory = V4L2_MEMORY_MMAP;
    b.index = (__u32)i;
    return b;
}

static int start_streaming(cam *c, char *err)
{
    struct v4l2_requestbuffers req;
    memset(&req, 0, sizeof req);
    req.count = (__u32)c->cfg.buffers;
    req.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    req.memory = V4L2_MEMORY_MMAP;
    if (xioctl(c->fd, VIDIOC_REQBUFS, &req) < 0)
        return mb_err_set(err, dev_code(errno),
                          "camera %s: requesting %d mmap buffers failed: %s",
                          c->path, c->cfg.buffers, strerror(errno));
    if (req.count < 2)
        return mb_err_set(err, MB_EIO, "camera %s granted only %u mmap buffers",
                          c->path, req.count);
    c->n_buf =
        req.count > MB_V4L2_MAX_BUFFERS ? MB_V4L2_MAX_BUFFERS : (int)req.count;
    c->info.buffers = c->n_buf;
    for (int i = 0; i < c->n_buf; i++) {
        struct v4l2_buffer b = mmap_buffer(i);
        if (xioctl(c->fd, VIDIOC_QUERYBUF, &b) < 0)
            return mb_err_set(err, dev_code(errno),
                              "camera %s: querying buffer %d failed: %s",
                              c->path, i, strerror(errno));
        if (b.length < c->min_bytes)
            return mb_err_set(err, MB_EIO,
                              "camera %s: buffer %d holds %u bytes, a frame "
                              "needs %zu",
                              c->path, i, b.length, c->min_bytes);
        void *p = v4l2_mmap(NULL, b.length, PROT_READ | PROT_WRITE, MAP_SHARED,
                            c->fd, (int64_t)b.m.offset);
        if (p == MAP_FAILED)
            return mb_err_set(err, dev_code(errno),
                              "camera %s: mapping buffer %d failed: %s",
                              c->path, i, strerror(errno));
        c->buf[i].start = p;
        c->buf[i].length = b.length;
    }
    for (int i = 0; i < c->n_buf; i++) {
        struct v4l2_buffer b = mmap_buffer(i);
        if (xioctl(c->fd, VIDIOC_QBUF, &b) < 0)
            return mb_err_set(err, dev_code(errno),
                              "camera %s: queueing buffer %d failed: %s",
                              c->path, i, strerror(errno));
    }
    enum v4l2_buf_type type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    if (xioctl(c->fd, VIDIOC_STREAMON, &type) < 0)
        return mb_err_set(err, dev_code(errno),
                          "camera %s: starting the stream failed: %s", c->path,
                          strerror(errno));
    return 0;
}

/* Open the node, negotiate, set the controls, start streaming. On failure
   the device is closed again. `again`: a reopen, where a missing node means
   "not back yet". */
static int open_device(cam *c, int again, char *err)
{
    c->fd = v4l2_open(c->path, O_RDWR | O_NONBLOCK | O_CLOEXEC);
    if (c->fd < 0) {
        int e = errno;
        if (e == ENOENT)
            return mb_err_set(err, again ? MB_ENODEV : MB_ENOTFOUND,
                              "camera %s: no such device node%s", c->path,
                              again ? " (not back yet)" : "");
        if (e == EACCES || e == EPERM)
            return mb_err_set(err, MB_EIO,
                              "camera %s: permission denied (is the user in "
                              "the video group?)",
                              c->path);
        if (gone_errno(e))
            return mb_err_set(err, MB_ENODEV, "camera %s: %s", c->path,
                              strerror(e));
        return mb_err_set(err, MB_EIO,
                          "camera %s cannot be opened as a V4L2 device: %s",
                          c->path, strerror(e));
    }
    struct v4l2_capability cap;
    memset(&cap, 0, sizeof cap);
    int rc;
    if (xioctl(c->fd, VIDIOC_QUERYCAP, &cap) < 0) {
        rc = mb_err_set(err, dev_code(errno),
                        "camera %s is not a V4L2 device: %s", c->path,
                        strerror(errno));
        goto fail;
    }
    uint32_t caps = (cap.capabilities & V4L2_CAP_DEVICE_CAPS)
                        ? cap.device_caps
                        : cap.capabilities;
    copy_cap_string(c->info.driver, sizeof c->info.driver, cap.driver,
                    sizeof cap.driver);
    copy_cap_string(c->info.card, sizeof c->info.card, cap.card,
                    sizeof cap.card);
    copy_cap_string(c->info.bus_info, sizeof c->info.bus_info, cap.bus_info,
                    sizeof cap.bus_info);
    if (!(caps & V4L2_CAP_VIDEO_CAPTURE) || !(caps & V4L2_CAP_STREAMING)) {
        rc = mb_err_set(err, MB_EIO,
                        "camera %s (%s) is not a streaming video capture "
                        "device",
                        c->path, c->info.card);
        goto fail;
    }
    rc = negotiate(c, err);
    if (rc < 0)
        goto fail;
    if (c->info.fourcc == V4L2_PIX_FMT_YUYV &&
        (c->luma.width != c->info.width || c->luma.height != c->info.height)) {
        mb_image_free(&c->luma);
        if (mb_image_alloc(c->info.width, c->info.height, &c->luma) < 0) {
            rc =
                mb_err_set(err, MB_ENOMEM, "camera %s: out of memory", c->path);
            goto fail;
        }
    }
    if (c->info.fourcc == V4L2_PIX_FMT_YUYV)
        c->info.stride = c->luma.stride;
    rc = set_controls(c, err);
    if (rc < 0)
        goto fail;
    rc = start_streaming(c, err);
    if (rc < 0)
        goto fail;
    c->held = -1;
    return 0;
fail:
    close_device(c);
    return rc;
}

/* ---- the source functions */

static int requeue(cam *c, int index, char *err)
{
    struct v4l2_buffer b;
    memset(&b, 0, sizeof b);
    b.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
    b.memory = V4L2_MEMORY_MMAP;
    b.index = (__u32)index;
    if (xioctl(c->fd, VIDIOC_QBUF, &b) < 0)
        return mb_err_set(err, dev_code(errno),
                          "camera %s: queueing buffer %d again failed: %s",
                          c->path, index, strerror(errno));
    return 0;
}

static void luma_of_yuyv(const cam *c, const uint8_t *src)
{
    for (int y = 0; y < c->info.height; y++) {
        const uint8_t *s = src + (size_t)y * (size_t)c->src_bpl;
        uint8_t *d = c->luma.pixels + (size_t)y * (size_t)c->luma.stride;
        for (int x = 0; x < c->info.width; x++)
            d[x] = s[2 * x];
    }
}

static int cam_next(void *impl, int timeout_ms, mb_frame *out,
                    mb_source_stats *stats, char *err)
{
    cam *c = impl;
    if (c->fd < 0)
        return mb_err_set(err, MB_ENODEV, "camera %s is closed; reopen it",
                          c->path);
    if (c->held >= 0) {
        int idx = c->held;
        c->held = -1;
        int rc = requeue(c, idx, err);
        if (rc < 0)
            return rc;
    }
    int64_t deadline =
        timeout_ms >= 0 ? now_ns() + (int64_t)timeout_ms * 1000000 : 0;
    for (;;) {
        int wait_ms = -1;
        if (timeout_ms >= 0) {
            int64_t left = deadline - now_ns();
            wait_ms = left <= 0 ? 0 : (int)((left + 999999) / 1000000);
        }
        struct pollfd pfd = {c->fd, POLLIN, 0};
        int r = poll(&pfd, 1, wait_ms);
        if (r < 0) {
            if (errno == EINTR)
                continue;
            return mb_err_set(err, MB_EIO, "camera %s: poll failed: %s",
                              c->path, strerror(errno));
        }
        if (r == 0)
            return MB_ETIMEOUT;
        struct v4l2_buffer b;
        memset(&b, 0, sizeof b);
        b.type = V4L2_BUF_TYPE_VIDEO_CAPTURE;
        b.memory = V4L2_MEMORY_MMAP;
        if (v4l2_ioctl(c->fd, VIDIOC_DQBUF, &b) < 0) {
            int e = errno;
            if (e == EINTR)
                continue;
            if (e != EAGAIN)
                return mb_err_set(err, dev_code(e),
                                  "camera %s: dequeueing a frame failed: %s",
                                  c->path, strerror(e));
            /* Ready but nothing to dequeue: wait a little and look again
               (bounded by the deadline). */
            int64_t t = now_ns();
            if (timeout_ms >= 0 && t >= deadline)
                return MB_ETIMEOUT;
            int64_t until = t + 1000000;
            if (timeout_ms >= 0 && until > deadline)
                until = deadline;
            mb_source_sleep_until(until, -1);
            continue;
        }
        if ((int)b.index < 0 || (int)b.index >= c->n_buf)
            return mb_err_set(err, MB_EIO, "camera %s returned buffer %u of %d",
                              c->path, b.index, c->n_buf);
        if ((b.flags & V4L2_BUF_FLAG_ERROR) || b.bytesused < c->min_bytes) {
            stats->bad++;
            int rc = requeue(c, (int)b.index, err);
            if (rc < 0)
                return rc;
            if (timeout_ms >= 0 && now_ns() >= deadline)
                return MB_ETIMEOUT;
            continue;
        }
        c->held = (int)b.index;
        int64_t t_ns;
        if ((b.flags & V4L2_BUF_FLAG_TIMESTAMP_MASK) ==
                V4L2_BUF_FLAG_TIMESTAMP_MONOTONIC &&
            (b.timestamp.tv_sec || b.timestamp.tv_usec))
            t_ns = (int64_t)b.timestamp.tv_sec * 1000000000 +
                   (int64_t)b.timestamp.tv_usec * 1000;
        else
            t_ns = now_ns();
        uint8_t *data = c->buf[b.index].start;
        out->view.width = c->info.width;
        out->view.height = c->info.height;
        if (c->info.fourcc == V4L2_PIX_FMT_YUYV) {
            luma_of_yuyv(c, data);
            out->view.pixels = c->luma.pixels;
            out->view.stride = c->luma.stride;
        } else {
            out->view.pixels = data; /* GREY, or the Y plane of YU12/YV12 */
            out->view.stride = c->info.stride;
        }
        out->seq = b.sequence;
        out->t_ns = t_ns;
        return 0;
    }
}

static int cam_reopen(void *impl, char *err)
{
    cam *c = impl;
    close_device(c);
    return open_device(c, 1, err);
}

static void cam_close(void *impl)
{
    cam *c = impl;
    if (!c)
        return;
    close_device(c);
    mb_image_free(&c->luma);
    free(c->path);
    free(c);
}

static const mb_source_ops cam_ops = {"v4l2", cam_next, cam_reopen, cam_close};

void mb_v4l2_config_default(mb_v4l2_config *cfg)
{
    if (!cfg)
        return;
    memset(cfg, 0, sizeof *cfg);
    cfg->path = NULL;
    cfg->width = 1280;
    cfg->height = 1024;
    cfg->exposure_us = 0;
    cfg->gain = -1;
    cfg->buffers = 4;
}

static int check_config(const mb_v4l2_config *cfg, char *err)
{
    if (!cfg->path || !cfg->path[0])
        return mb_err_set(err, MB_EINVAL, "camera: no device path given");
    if (cfg->width < 0 || cfg->height < 0 || cfg->width > 16384 ||
        cfg->height > 16384 || ((cfg->width == 0) != (cfg->height == 0)))
        return mb_err_set(err, MB_EINVAL,
                          "camera %s: width and height must both be 1..16384 "
                          "px, or both 0 for the camera's own size (got "
                          "%dx%d)",
                          cfg->path, cfg->width, cfg->height);
    if (cfg->buffers < 4 || cfg->buffers > MB_V4L2_MAX_BUFFERS)
        return mb_err_set(err, MB_EINVAL,
                          "camera %s: buffers must be 4..%d (got %d)",
                          cfg->path, MB_V4L2_MAX_BUFFERS, cfg->buffers);
    if (cfg->exposure_us < 0)
        return mb_err_set(err, MB_EINVAL,
                          "camera %s: exposure_us must be >= 0 (0 leaves "
                          "the camera's exposure alone; got %d)",
                          cfg->path, cfg->exposure_us);
    if (cfg->gain < -1)
        return mb_err_set(err, MB_EINVAL,
                          "camera %s: gain must be >= 0, or -1 to leave it "
                          "(got %d)",
                          cfg->path, cfg->gain);
    return 0;
}

int mb_v4l2_open(const mb_v4l2_config *cfg, mb_source **out, char *err)
{
    if (out)
        *out = NULL;
    if (!cfg || !out)
        return mb_err_set(err, MB_EINVAL, "camera: no configuration given");
    int rc = check_config(cfg, err);
    if (rc < 0)
        return rc;
    cam *c = calloc(1, sizeof *c);
    if (!c)
        return mb_err_set(err, MB_ENOMEM, "camera: out of memory");
    c->fd = -1;
    c->held = -1;
    c->cfg = *cfg;
    c->path = strdup(cfg->path);
    rc = MB_ENOMEM;
    if (!c->path) {
        mb_err_set(err, rc, "camera: out of memory");
        goto fail;
    }
    c->cfg.path = c->path;
    rc = open_device(c, 0, err);
    if (rc < 0)
        goto fail;
    return mb_source_create(&cam_ops, c, out, err);
fail:
    cam_close(c);
    return rc;
}

int mb_v4l2_get_info(const mb_source *src, mb_v4l2_info *out)
{
    if (!src || !out || mb_source_ops_of(src) != &cam_ops)
        return MB_EINVAL;
    const cam *c = mb_source_impl(src);
    *out = c->info;
    return 0;
}
