/*
 * capture/source.c - the frame-source wrapper: argument checks, the public
 * sequence numbers (dropped frames from gaps), the fault state and the
 * counters, the same for every kind of source.
 */
#include "source.h"

#include "error.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

struct mb_source {
    const mb_source_ops *ops;
    void *impl;
    mb_source_stats stats;
    int gone;          /* MB_ENODEV seen, not reopened yet */
    int fresh;         /* no frame since open or reopen */
    int64_t offset;    /* public seq = kind's seq + offset */
    uint64_t next_seq; /* public number the next frame should have */
};

int mb_source_create(const mb_source_ops *ops, void *impl, mb_source **out,
                     char *err)
{
    if (out)
        *out = NULL;
    if (!ops || !ops->next || !ops->close || !out) {
        if (ops && ops->close && impl)
            ops->close(impl);
        return mb_err_set(err, MB_EINVAL,
                          "frame source: incomplete "
                          "function table");
    }
    mb_source *s = calloc(1, sizeof *s);
    if (!s) {
        ops->close(impl);
        return mb_err_set(err, MB_ENOMEM, "frame source: out of memory");
    }
    s->ops = ops;
    s->impl = impl;
    s->fresh = 1;
    *out = s;
    return 0;
}

/* Turn the kind's running number into the public one. A number that goes
   backwards (a driver restarted its count, or its 32-bit counter wrapped)
   restarts the mapping without counting drops. */
static uint64_t map_seq(mb_source *s, uint64_t raw)
{
    if (s->fresh || (int64_t)raw + s->offset < (int64_t)s->next_seq) {
        s->offset = (int64_t)s->next_seq - (int64_t)raw;
        s->fresh = 0;
    }
    uint64_t seq = (uint64_t)((int64_t)raw + s->offset);
    s->stats.dropped += seq - s->next_seq;
    s->next_seq = seq + 1;
    return seq;
}

int mb_source_next(mb_source *src, int timeout_ms, mb_frame *out, char *err)
{
    if (!src || !out)
        return mb_err_set(err, MB_EINVAL,
                          "frame source: no source or no "
                          "frame given");
    memset(out, 0, sizeof *out);
    if (src->gone) {
        src->stats.faults++;
        return mb_err_set(err, MB_ENODEV,
                          "%s source: the device is gone; reopen it",
                          src->ops->name);
    }
    mb_frame f;
    memset(&f, 0, sizeof f);
    int rc = src->ops->next(src->impl, timeout_ms, &f, &src->stats, err);
    if (rc == MB_ETIMEOUT) {
        src->stats.timeouts++;
        return rc;
    }
    if (rc == MB_ENODEV)
        src->gone = 1;
    if (rc == MB_ENODEV || rc == MB_EIO)
        src->stats.faults++;
    if (rc < 0)
        return rc;
    MB_ASSERT(f.view.pixels && f.view.width > 0 && f.view.height > 0 &&
              f.view.stride >= f.view.width);
    f.seq = map_seq(src, f.seq);
    src->stats.frames++;
    *out = f;
    return 0;
}

int mb_source_reopen(mb_source *src, char *err)
{
    if (!src)
        return mb_err_set(err, MB_EINVAL, "frame source: no source given");
    if (!src->ops->reopen) {
        src->gone = 0;
        return 0;
    }
    int rc = src->ops->reopen(src->impl, err);
    if (rc < 0) {
        src->gone = 1; /* the old device state is dropped either way */
        src->stats.reopen_failures++;
        return rc;
    }
    src->gone = 0;
    src->fresh = 1;
    src->stats.reopens++;
    return 0;
}

void mb_source_close(mb_source *src)
{
    if (!src)
        return;
    src->ops->close(src->impl);
    free(src);
}

mb_source_stats mb_source_get_stats(const mb_source *src)
{
    mb_source_stats z;
    memset(&z, 0, sizeof z);
    return src ? src->stats : z;
}

const char *mb_source_name(const mb_source *src)
{
    return src && src->ops->name ? src->ops->name : "?";
}

const mb_source_ops *mb_source_ops_of(const mb_source *src)
{
    return src ? src->ops : NULL;
}

void *mb_source_impl(const mb_source *src)
{
    return src ? src->impl : NULL;
}

int mb_source_backoff_ms(int attempt)
{
    if (attempt < 0)
        attempt = 0;
    int ms = 100;
    for (int i = 0; i < attempt && ms < 5000; i++)
        ms *= 2;
    return ms < 5000 ? ms : 5000;
}

int64_t mb_source_clock_ns(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

static void sleep_to(int64_t t_ns)
{
    struct timespec ts = {(time_t)(t_ns / 1000000000),
                          (long)(t_ns % 1000000000)};
    while (clock_nanosleep(CLOCK_MONOTONIC, TIMER_ABSTIME, &ts, NULL) == EINTR)
        ;
}

int mb_source_sleep_until(int64_t due_ns, int timeout_ms)
{
    int64_t now = mb_source_clock_ns();
    if (due_ns <= now)
        return 0;
    if (timeout_ms >= 0 && due_ns - now > (int64_t)timeout_ms * 1000000) {
        sleep_to(now + (int64_t)timeout_ms * 1000000);
        return MB_ETIMEOUT;
    }
    sleep_to(due_ns);
    return 0;
}
