/*
 * capture/v4l2.h - a V4L2 camera as a frame source, through libv4l2.
 *
 * Opening (Linux V4L2 API documentation, "Video Capture Interface" and
 * "Streaming I/O (Memory Mapping)"; libv4l2(3)):
 *   - the device node by path; symbolic links such as
 *     /dev/v4l/by-id/usb-...-video-index0 are followed, so a camera keeps
 *     its configured name whatever /dev/videoN it gets after a replug;
 *   - the pixel format, in this order of preference, at the configured size:
 *       GREY  8-bit grey, offered natively by the camera: frames are views
 *             straight into the mmap buffers, nothing copied;
 *       YUYV  4:2:2 packed, native: the luma (every other byte) is taken
 *             into one preallocated plane;
 *       YU12, YV12  planar 4:2:0, native or converted by libv4lconvert
 *             (which turns MJPEG, UYVY, Bayer and others into RGB24, BGR24,
 *             YU12 or YV12, never into GREY): the first plane is the luma
 *             and is used in place.
 *     After VIDIOC_S_FMT the format actually set is read back: a camera
 *     that cannot give what was asked silently gives its own, and that is
 *     refused with a sentence naming what it gave;
 *   - exposure and gain: with exposure_us > 0, V4L2_CID_EXPOSURE_AUTO is set
 *     to V4L2_EXPOSURE_MANUAL first (cameras refuse an absolute exposure
 *     while automatic exposure is on), then V4L2_CID_EXPOSURE_ABSOLUTE in
 *     its unit of 100 us; with gain >= 0, V4L2_CID_GAIN. A control the
 *     camera lacks or a value outside its range is refused at open. The
 *     values the camera reports afterwards are in mb_v4l2_info;
 *   - mmap streaming with `buffers` buffers (at least 4: one held by the
 *     caller, the rest queued so the camera never waits for the
 *     inspection).
 *
 * Frames: mb_source_next waits with poll() and the timeout, then dequeues;
 * the buffer handed out is queued again at the next call. Sequence gaps
 * reported by the driver (v4l2_buffer.sequence) count as dropped frames.
 * Frames the driver marks V4L2_BUF_FLAG_ERROR and frames shorter than the
 * format are given back to the driver and counted in stats.bad. Timestamps
 * are the driver's when it says they are CLOCK_MONOTONIC, else the time of
 * dequeueing.
 *
 * Faults: ENODEV, ENXIO, EIO or ESHUTDOWN from the driver (camera unplugged
 * or dead) give MB_ENODEV; mb_source_reopen closes everything and opens the
 * path again with the same configuration (MB_ENODEV while the node is still
 * missing).
 *
 * libv4l2 writes its own diagnostics to stderr (or to the file its global
 * v4l2_log_file points to); this module prints nothing.
 */
#ifndef MB_V4L2_H
#define MB_V4L2_H

#include <stdint.h>

#include "source.h"

/** Most mmap buffers (libv4l2 manages at most 32). */
#define MB_V4L2_MAX_BUFFERS 32

typedef struct {
    const char *path;  /**< device node, e.g. "/dev/v4l/by-id/usb-...-video-
                            index0"; copied at open */
    int width, height; /**< frame size, px; 0 and 0 keep the camera's
                            current size; default 1280 x 1024 */
    int exposure_us;   /**< > 0: manual exposure, us (rounded to the camera's
                            100 us unit, at least one unit); 0: leave the
                            camera's exposure alone; default 0 */
    int gain;          /**< >= 0: V4L2_CID_GAIN in the camera's own units;
                            -1: leave it; default -1 */
    int buffers;       /**< mmap buffers to request, 4 .. MB_V4L2_MAX_BUFFERS;
                            default 4; the driver may grant more */
} mb_v4l2_config;

/** What was negotiated. */
typedef struct {
    uint32_t fourcc;    /**< V4L2_PIX_FMT_GREY, _YUYV, _YUV420 or _YVU420 */
    int emulated;       /**< 1 when libv4lconvert converts to fourcc */
    int width, height;  /**< px */
    int stride;         /**< bytes per row of the frames handed out */
    int buffers;        /**< mmap buffers granted */
    int exposure_100us; /**< V4L2_CID_EXPOSURE_ABSOLUTE read back; -1 when
                             not set */
    int gain;           /**< V4L2_CID_GAIN read back; -1 when not set */
    char driver[16], card[32], bus_info[32]; /**< from VIDIOC_QUERYCAP */
} mb_v4l2_info;

/** Defaults (see the field comments); path is NULL. */
void mb_v4l2_config_default(mb_v4l2_config *cfg);

/**
 * Open the camera and start streaming.
 * Return value: 0; MB_EINVAL (a configuration field out of range, or a
 * control the camera lacks: the sentence names it); MB_ENOTFOUND (no such
 * device node); MB_EIO (not a capture device, no permission, an ioctl
 * failed); MB_EFORMAT (none of GREY, YUYV, YU12, YV12 at the configured
 * size: the sentence lists what the camera offers); MB_ESIZE (the camera
 * gave another size); MB_ERANGE (exposure or gain outside the camera's
 * range); MB_ENODEV (the device went away while opening); MB_ENOMEM.
 */
int mb_v4l2_open(const mb_v4l2_config *cfg, mb_source **out, char *err);

/**
 * The negotiated format and controls of a source made by mb_v4l2_open.
 * Return value: 0; MB_EINVAL (NULL, or not a V4L2 source).
 */
int mb_v4l2_get_info(const mb_source *src, mb_v4l2_info *out);

#endif
