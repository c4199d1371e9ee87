/*
 * inspect/replay_source.h - replay of image files (PGM, PNG) as a frame
 * source (capture/source.h): a folder, read in name order, or an explicit
 * list, at a frame rate or as fast as asked, once or looping.
 *
 * Why here and not in capture/: replay reads files, and files belong to io/
 * (io/image_file.h, io/file_list.h), which capture/ may not include; io/
 * in turn may not include capture/ (DESIGN.md, rooms). inspect/ knows every
 * room, so it assembles the replay source from io/'s readers and plugs it
 * into capture/'s table of source functions.
 *
 * Frames: frame k is file k mod n (k counting on through the loops), its
 * sequence number k. With fps > 0 frame k is due k / fps after the first
 * mb_source_next and is not handed out before (a caller that falls behind
 * gets every frame in turn); with fps = 0 frames come as fast as asked.
 * Images may differ in size from file to file.
 *
 * Memory: with preload (the default) every file is decoded at open, so a
 * damaged file is refused before the first frame and nothing is read or
 * allocated per frame; the total is capped by preload_max_mb. Without
 * preload each file is decoded when its frame is due (the decoder allocates
 * per frame; a damaged file gives MB_EIO naming it, and the next call goes
 * on with the next file).
 */
#ifndef MB_REPLAY_SOURCE_H
#define MB_REPLAY_SOURCE_H

#include "source.h"

typedef struct {
    const char *dir;          /**< folder of .pgm / .png files, or NULL */
    const char *const *files; /**< or: the files in playing order */
    int n_files;              /**< entries of files (when dir is NULL) */
    double fps;               /**< frames per second; 0 = as fast as asked */
    int loop;                 /**< 1: start again after the last file */
    int preload;              /**< 1 (default): decode everything at open */
    int preload_max_mb;       /**< cap on the decoded total, MB; default 512 */
} mb_replay_config;

/** Defaults: no files, fps 0, no loop, preload with a 512 MB cap. */
void mb_replay_config_default(mb_replay_config *cfg);

/**
 * List (and with preload decode) the files.
 * Return value: 0; MB_EINVAL (neither a folder nor files, a bad field);
 * MB_ENOTFOUND (no such folder, a missing file, or no image file in the
 * folder); MB_EIO, MB_EFORMAT, MB_ERANGE (a file that cannot be read or
 * decoded; preload only); MB_ENOMEM (also: the preload cap exceeded).
 */
int mb_replay_open(const mb_replay_config *cfg, mb_source **out, char *err);

/** The file of the frame last handed out by a replay source (NULL for
    another kind of source or before the first frame). */
const char *mb_replay_current_file(const mb_source *src);

/** Number of files a replay source plays (0 for another kind). */
int mb_replay_count(const mb_source *src);

#endif
