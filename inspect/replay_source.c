/*
 * inspect/replay_source.c - image files played back as frames; see the
 * header for why this capture/-style source lives in inspect/.
 */
#include "replay_source.h"

#include "error.h"
#include "file_list.h"
#include "image_file.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

typedef struct {
    mb_replay_config cfg;
    mb_file_list files; /* owned copies of the paths */
    mb_image *images;   /* preload: one per file; else NULL */
    mb_image current;   /* streaming: the image of the last frame */
    int current_file;   /* file of the last frame handed out, or -1 */
    uint64_t next_k;
    int64_t t0;
    int started;
} replay;

static const mb_source_ops replay_ops;

void mb_replay_config_default(mb_replay_config *cfg)
{
    if (!cfg)
        return;
    memset(cfg, 0, sizeof *cfg);
    cfg->fps = 0;
    cfg->loop = 0;
    cfg->preload = 1;
    cfg->preload_max_mb = 512;
}

static void replay_close(void *impl)
{
    replay *r = impl;
    if (!r)
        return;
    if (r->images)
        for (int i = 0; i < r->files.count; i++)
            mb_image_free(&r->images[i]);
    free(r->images);
    mb_image_free(&r->current);
    mb_file_list_free(&r->files);
    free(r);
}

static int replay_next(void *impl, int timeout_ms, mb_frame *out,
                       mb_source_stats *stats, char *err)
{
    (void)stats;
    replay *r = impl;
    uint64_t k = r->next_k;
    uint64_t n = (uint64_t)r->files.count;
    if (!r->cfg.loop && k >= n)
        return mb_err_set(err, MB_ENOTFOUND, "replay: all %llu files played",
                          (unsigned long long)n);
    int64_t t_ns;
    if (r->cfg.fps > 0) {
        if (!r->started) {
            r->t0 = mb_source_clock_ns();
            r->started = 1;
        }
        t_ns = r->t0 + (int64_t)llround((double)k * 1e9 / r->cfg.fps);
        int rc = mb_source_sleep_until(t_ns, timeout_ms);
        if (rc < 0)
            return rc;
    } else {
        t_ns = mb_source_clock_ns();
    }
    int i = (int)(k % n);
    r->next_k = k + 1;
    const mb_image *img;
    if (r->images) {
        img = &r->images[i];
    } else {
        mb_image_free(&r->current);
        r->current_file = -1;
        char e2[MB_ERR_LEN];
        int rc = mb_image_load(r->files.paths[i], &r->current, e2);
        if (rc < 0)
            return mb_err_set(err, MB_EIO, "replay: frame %llu: %s",
                              (unsigned long long)k, e2);
        img = &r->current;
    }
    r->current_file = i;
    out->view = *img;
    out->seq = k;
    out->t_ns = t_ns;
    return 0;
}

static const mb_source_ops replay_ops = {"replay", replay_next, NULL,
                                         replay_close};

static int copy_files(replay *r, const mb_replay_config *cfg, char *err)
{
    r->files.paths = calloc((size_t)cfg->n_files, sizeof(char *));
    if (!r->files.paths)
        return mb_err_set(err, MB_ENOMEM, "replay: out of memory");
    for (int i = 0; i < cfg->n_files; i++) {
        if (!cfg->files[i])
            return mb_err_set(err, MB_EINVAL, "replay: file %d is NULL", i);
        struct stat st;
        if (stat(cfg->files[i], &st) != 0 || !S_ISREG(st.st_mode))
            return mb_err_set(err, MB_ENOTFOUND, "replay: %s: no such file",
                              cfg->files[i]);
        r->files.paths[i] = strdup(cfg->files[i]);
        if (!r->files.paths[i])
            return mb_err_set(err, MB_ENOMEM, "replay: out of memory");
        r->files.count = i + 1;
    }
    return 0;
}

static int preload(replay *r, char *err)
{
    r->images = calloc((size_t)r->files.count, sizeof(mb_image));
    if (!r->images)
        return mb_err_set(err, MB_ENOMEM, "replay: out of memory");
    double total_mb = 0;
    for (int i = 0; i < r->files.count; i++) {
        int rc = mb_image_load(r->files.paths[i], &r->images[i], err);
        if (rc < 0)
            return rc;
        total_mb += (double)r->images[i].stride * r->images[i].height /
                    (1024.0 * 1024.0);
        if (total_mb > r->cfg.preload_max_mb)
            return mb_err_set(err, MB_ENOMEM,
                              "replay: the first %d files already take more "
                              "than preload_max_mb = %d MB; raise it or turn "
                              "preload off",
                              i + 1, r->cfg.preload_max_mb);
    }
    return 0;
}

int mb_replay_open(const mb_replay_config *cfg, mb_source **out, char *err)
{
    if (out)
        *out = NULL;
    if (!cfg || !out)
        return mb_err_set(err, MB_EINVAL, "replay: no configuration given");
    if (!cfg->dir && (!cfg->files || cfg->n_files <= 0))
        return mb_err_set(err, MB_EINVAL,
                          "replay: give a folder or a list of files");
    if (!(cfg->fps >= 0) || !isfinite(cfg->fps) || cfg->fps > 100000)
        return mb_err_set(err, MB_EINVAL,
                          "replay: fps must be 0 (as fast as asked) or up "
                          "to 100000 (got %g)",
                          cfg->fps);
    if (cfg->preload && cfg->preload_max_mb <= 0)
        return mb_err_set(err, MB_EINVAL,
                          "replay: preload_max_mb must be > 0 (got %d)",
                          cfg->preload_max_mb);
    replay *r = calloc(1, sizeof *r);
    if (!r)
        return mb_err_set(err, MB_ENOMEM, "replay: out of memory");
    r->cfg = *cfg;
    r->cfg.dir = NULL;
    r->cfg.files = NULL; /* the copies in r->files are used */
    r->current_file = -1;
    int rc;
    if (cfg->dir) {
        static const char *const exts[] = {".pgm", ".png"};
        rc = mb_file_list_dir(cfg->dir, exts, 2, &r->files, err);
        if (rc == 0 && r->files.count == 0)
            rc = mb_err_set(err, MB_ENOTFOUND,
                            "replay: %s holds no .pgm or .png file", cfg->dir);
    } else {
        rc = copy_files(r, cfg, err);
    }
    if (rc < 0)
        goto fail;
    if (cfg->preload) {
        rc = preload(r, err);
        if (rc < 0)
            goto fail;
    }
    return mb_source_create(&replay_ops, r, out, err);
fail:
    replay_close(r);
    return rc;
}

const char *mb_replay_current_file(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &replay_ops)
        return NULL;
    const replay *r = mb_source_impl(src);
    return r->current_file >= 0 ? r->files.paths[r->current_file] : NULL;
}

int mb_replay_count(const mb_source *src)
{
    if (!src || mb_source_ops_of(src) != &replay_ops)
        return 0;
    const replay *r = mb_source_impl(src);
    return r->files.count;
}
