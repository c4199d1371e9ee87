/*
 * io/rejects.h - where reject images go, under a disk cap.
 *
 * Layout: FOLDER/YYYY-MM-DD/HHMMSS.mmm_<seq>.png, the local date and time
 * of the part, so file names sort by time within a day and day folders
 * sort by date. The PNG itself is written by the caller
 * (io/overlay.h, mb_overlay_save) to the path mb_rejects_path gives; then
 * mb_rejects_added counts its size and, when the total passes the cap,
 * deletes the oldest images (whole days first, then the oldest files of
 * the oldest day) until the total is at most 90% of the cap, so the scan
 * happens once per tenth of the cap rather than per image.
 *
 * The total is learned by one scan at open (only .png files in day
 * folders count); other files in the folder are left alone.
 */
#ifndef MB_REJECTS_H
#define MB_REJECTS_H

#include <stddef.h>
#include <stdint.h>

typedef struct mb_rejects mb_rejects;

/**
 * Open the store: create folder (one level) and measure what it holds.
 * cap_mb 0 disables saving (mb_rejects_path then returns MB_ERANGE).
 * Return value: 0; MB_EINVAL; MB_EIO (folder cannot be made or read);
 * MB_ENOMEM.
 */
int mb_rejects_open(const char *folder, int cap_mb, mb_rejects **out,
                    char *err);

/** Free. NULL-safe. */
void mb_rejects_close(mb_rejects *r);

/**
 * The path for part seq's image at wall-clock now_ms (CLOCK_REALTIME ms),
 * with its day folder made. Return value: 0; MB_ERANGE (saving disabled);
 * MB_ESIZE (out too small); MB_EIO (day folder not made).
 */
int mb_rejects_path(mb_rejects *r, int64_t now_ms, uint32_t seq, char *out,
                    size_t size, char *err);

/**
 * Count an image just saved at path and enforce the cap.
 * Return value: the number of images deleted (>= 0); MB_EIO (path cannot
 * be read); MB_EINVAL.
 */
int mb_rejects_added(mb_rejects *r, const char *path, char *err);

/** Bytes of images in the store as counted. */
uint64_t mb_rejects_bytes(const mb_rejects *r);

/** Images deleted by the cap since open. */
uint64_t mb_rejects_deleted(const mb_rejects *r);

#endif
