/*
 * tests/capture/v4l2_emu/emucam.h - what the emulated camera and the tests
 * that drive it share: the device name it claims, the environment
 * variables that configure it and inject faults, and the picture it sends.
 *
 * The emulated camera is a libv4l2 plugin (modeband_emucam.so, see
 * emucam.c). libv4l2 offers every fd it opens to its plugins; this one
 * claims an fd only when the file behind it is named "modeband-emucam..."
 * (a memfd made with that name, or a regular file), so no real device can
 * ever be taken over. The fd's file holds the mmap buffers.
 *
 * Environment, read when the device is opened (all optional):
 *   MB_EMUCAM_FORMATS       pixel formats offered, in order, from GREY,
 *                           YUYV, UYVY (default "GREY,YUYV")
 *   MB_EMUCAM_FPS           frame rate (default 200)
 *   MB_EMUCAM_BPL_ALIGN     bytes per line rounded up to this (default 64)
 *   MB_EMUCAM_UNPLUG_AFTER  after this many frames dequeued the camera is
 *                           gone: every call fails with ENODEV
 *   MB_EMUCAM_STALL_AT      frame number from which the camera stalls ...
 *   MB_EMUCAM_STALL_MS      ... for this long (default 1000 ms)
 *   MB_EMUCAM_SHORT_AT      frame number delivered short (half its bytes)
 *   MB_EMUCAM_GAP_AT        frame number at which the sequence skips ...
 *   MB_EMUCAM_GAP           ... this many numbers (frames lost; default 3)
 *   MB_EMUCAM_NO_CONTROLS   1: no exposure or gain controls
 *   MB_EMUCAM_LOG           file to which S_FMT, STREAMON and every
 *                           control change are appended, one line each
 * Frame numbers count the frames the camera exposes from STREAMON (0
 * first); frames it drops because no buffer was queued count too, as on a
 * real camera.
 */
#ifndef MB_EMUCAM_H
#define MB_EMUCAM_H

#include <stdint.h>

/** Substring of the file name the plugin claims. */
#define EMUCAM_NAME "modeband-emucam"

/** The luma the camera sends at (x, y) in the frame with sequence number
    seq: a ramp in x and y that moves with seq, so a wrong stride, a wrong
    byte of a packed format or a stale buffer all show. */
static inline uint8_t emucam_luma(int x, int y, uint32_t seq)
{
    return (uint8_t)(x * 7 + y * 13 + seq * 29);
}

/** The chroma samples (cb for which = 0, cr for which = 1) of the pixel
    pair starting at even x: unrelated to the luma on purpose. */
static inline uint8_t emucam_chroma(int x, int y, uint32_t seq, int which)
{
    return (uint8_t)(which ? 200 - x - 3 * (int)seq : 60 + y + 5 * (int)seq);
}

#endif
