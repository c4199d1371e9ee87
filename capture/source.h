/*
 * capture/source.h - frame sources behind one interface: a V4L2 camera
 * (capture/v4l2.h), the synthetic production line (capture/synth_source.h)
 * and the replay of image files (inspect/replay_source.h).
 *
 * A source hands out one frame at a time: an 8-bit grey view, a sequence
 * number and a CLOCK_MONOTONIC timestamp. The view points into memory the
 * source owns (a V4L2 mmap buffer, a preallocated luma plane, a rendered or
 * decoded image) and stays valid until the next mb_source_next,
 * mb_source_reopen or mb_source_close on the same source. Nothing is copied
 * that need not be, and nothing is allocated per frame. Callers must not
 * write into the view.
 *
 * Sequence numbers start at 0 when the source is opened and grow by one per
 * frame the source produced, including frames it lost: a gap between two
 * consecutive frames is the number of frames dropped (a camera that ran out
 * of queued buffers, a paced source whose caller fell behind). They go on
 * counting across mb_source_reopen (the first frame after a reopen takes the
 * next number; what was missed while the device was away is not counted).
 *
 * Faults (camera unplugged): mb_source_next returns MB_ENODEV once, and
 * from then on returns MB_ENODEV at once without touching the device; the
 * caller calls mb_source_reopen with back-off (mb_source_backoff_ms) until
 * it returns 0. Statistics survive the reopen.
 *
 * Who provides a source: the open function of each kind (mb_v4l2_open,
 * mb_synth_source_open, mb_replay_open) wraps its own state in an
 * mb_source through mb_source_create and the table of functions below, so
 * a room that may not be included from capture/ (the replay source reads
 * files, which is io/'s business, and lives in inspect/) can still plug in.
 *
 * A source is used by one thread at a time.
 */
#ifndef MB_SOURCE_H
#define MB_SOURCE_H

#include <stdint.h>

#include "image.h"

/** One frame as handed out by a source. */
typedef struct {
    mb_image view; /**< 8-bit grey, read-only, owned by the source; valid
                        until the next call on the source */
    uint64_t seq;  /**< frame number, see above */
    int64_t t_ns;  /**< CLOCK_MONOTONIC, ns: when the frame was captured
                        (the driver's timestamp for a camera that gives a
                        monotonic one, else the time it was received; the
                        due time for a paced synthetic or replay source) */
} mb_frame;

/** Counters kept by every source, from open until close. */
typedef struct {
    uint64_t frames;   /**< frames handed out */
    uint64_t dropped;  /**< frames lost: sum of the sequence gaps */
    uint64_t timeouts; /**< mb_source_next calls that timed out */
    uint64_t bad;      /**< frames the source discarded itself: short or
                            flagged by the driver as corrupt */
    uint64_t faults;   /**< MB_ENODEV and MB_EIO results of mb_source_next */
    uint64_t reopens;  /**< successful mb_source_reopen calls */
    uint64_t reopen_failures; /**< failed mb_source_reopen calls */
} mb_source_stats;

typedef struct mb_source mb_source;

/**
 * The functions a kind of source provides. `impl` is the state given to
 * mb_source_create. next: wait at most timeout_ms (< 0: no limit) for a
 * frame; set out->view, out->t_ns and out->seq (the kind's own running
 * number: mb_source turns it into the public sequence number, see above);
 * may count discarded frames in stats->bad; return 0, MB_ETIMEOUT,
 * MB_ENODEV, MB_EIO or MB_ENOTFOUND (no more frames). reopen (may be NULL:
 * nothing to reopen): drop the device and open it again. close: free impl.
 */
typedef struct {
    const char *name; /**< "v4l2", "synth", "replay" */
    int (*next)(void *impl, int timeout_ms, mb_frame *out,
                mb_source_stats *stats, char *err);
    int (*reopen)(void *impl, char *err);
    void (*close)(void *impl);
} mb_source_ops;

/**
 * Wrap a kind's state in a source. On success the source owns impl (its
 * close function frees it); on failure (MB_EINVAL, MB_ENOMEM) impl is
 * closed through ops->close as well, so callers need not unwind it.
 */
int mb_source_create(const mb_source_ops *ops, void *impl, mb_source **out,
                     char *err);

/**
 * Wait at most timeout_ms (< 0: no limit) for the next frame.
 * Return value: 0 (*out filled); MB_ETIMEOUT (no frame in time: a camera
 * stalled, or a paced source's next frame is not due yet); MB_ENODEV (the
 * device is gone: reopen with back-off); MB_EIO (another device or file
 * error; the source may still work); MB_ENOTFOUND (no more frames: a replay
 * without looping has ended); MB_EINVAL (NULL argument).
 * err gets a sentence for every negative result but MB_ETIMEOUT.
 */
int mb_source_next(mb_source *src, int timeout_ms, mb_frame *out, char *err);

/**
 * Close the device and open it again with the same configuration; the
 * frame last handed out becomes invalid.
 * Return value: 0; MB_ENODEV (not back yet); another negative code from
 * the kind's open (the device came back different, e.g. without the
 * configured format). Sources with nothing to reopen return 0.
 */
int mb_source_reopen(mb_source *src, char *err);

/** Free the source and everything it owns. NULL-safe. */
void mb_source_close(mb_source *src);

/** The counters (zeroed for NULL). */
mb_source_stats mb_source_get_stats(const mb_source *src);

/** "v4l2", "synth", "replay"; "?" for NULL. */
const char *mb_source_name(const mb_source *src);

/** The kind's functions and state, for that kind's own accessors (e.g.
    mb_v4l2_get_info): NULL when src is NULL. */
const mb_source_ops *mb_source_ops_of(const mb_source *src);
void *mb_source_impl(const mb_source *src);

/**
 * Back-off before reopen attempt `attempt` (0 first), ms: 100 ms doubling
 * up to 5 s, so a replugged camera is found within seconds and a missing
 * one costs almost nothing.
 */
int mb_source_backoff_ms(int attempt);

/** CLOCK_MONOTONIC now, ns. */
int64_t mb_source_clock_ns(void);

/**
 * Pacing for sources with a frame rate: sleep until due_ns
 * (CLOCK_MONOTONIC) if that is at most timeout_ms away (< 0: no limit) and
 * return 0; otherwise sleep timeout_ms and return MB_ETIMEOUT. A due time
 * in the past returns 0 at once.
 */
int mb_source_sleep_until(int64_t due_ns, int timeout_ms);

#endif
