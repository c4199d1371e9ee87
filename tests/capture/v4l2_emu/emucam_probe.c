/*
 * tests/capture/v4l2_emu/emucam_probe.c - the LD_PRELOAD way of loading the
 * emulated camera, as a program the tests start would use it (the station
 * daemon): this program has no glob() of its own, so it reaches the camera
 * only when libmb_v4l2_redirect.so is preloaded and MB_V4L2_PLUGIN_DIR
 * names the plugin folder. It opens the camera through capture/v4l2.h,
 * takes a few frames and checks them against the camera's pattern.
 * Exit status 0 when all is well; otherwise a sentence on stderr.
 */
#define _GNU_SOURCE
#include "emucam.h"
#include "error.h"
#include "v4l2.h"

#include <stdio.h>
#include <sys/mman.h>
#include <unistd.h>

int main(void)
{
    int fd = memfd_create(EMUCAM_NAME, MFD_CLOEXEC);
    if (fd < 0) {
        perror("emucam_probe: memfd_create");
        return 1;
    }
    char path[64], err[MB_ERR_LEN] = "";
    snprintf(path, sizeof path, "/proc/self/fd/%d", fd);
    mb_v4l2_config c;
    mb_v4l2_config_default(&c);
    c.path = path;
    c.width = 96;
    c.height = 64;
    mb_source *src = NULL;
    int rc = mb_v4l2_open(&c, &src, err);
    if (rc < 0) {
        fprintf(stderr, "emucam_probe: %s\n", err);
        return 1;
    }
    int status = 0;
    for (int i = 0; i < 3 && !status; i++) {
        mb_frame f;
        rc = mb_source_next(src, 2000, &f, err);
        if (rc < 0) {
            fprintf(stderr, "emucam_probe: frame %d: %s\n", i, err);
            status = 1;
            break;
        }
        for (int y = 0; y < f.view.height && !status; y++)
            for (int x = 0; x < f.view.width && !status; x++)
                if (f.view.pixels[y * f.view.stride + x] !=
                    emucam_luma(x, y, (uint32_t)f.seq)) {
                    fprintf(stderr,
                            "emucam_probe: frame %d differs at "
                            "(%d, %d)\n",
                            i, x, y);
                    status = 1;
                }
    }
    mb_source_close(src);
    close(fd);
    return status;
}
