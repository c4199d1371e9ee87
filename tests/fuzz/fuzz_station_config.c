/*
 * tests/fuzz/fuzz_station_config.c - libFuzzer target for the station
 * configuration parser (mb_station_config_parse).
 *
 * Properties checked besides "no crash, no leak, no UB": a refusal comes
 * with a negative code of the documented set and a sentence that starts
 * with the document's name; an accepted configuration passes
 * mb_station_config_check, has its slots and shifts within bounds, and
 * differs from itself in no field.
 */
#include "error.h"
#include "station_config.h"

#include <stddef.h>
#include <stdint.h>
#include <string.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static mb_station_config cfg; /* large: keep it off the stack */
    char err[MB_ERR_LEN] = "";
    int rc = mb_station_config_parse((const char *)data, size, "fuzz.json",
                                     &cfg, err);
    if (rc < 0) {
        MB_ASSERT(rc == MB_EFORMAT || rc == MB_EVERSION || rc == MB_ENUMERIC ||
                  rc == MB_EINVAL || rc == MB_ENOMEM || rc == MB_ESIZE);
        MB_ASSERT(strncmp(err, "fuzz.json: ", 11) == 0);
        return 0;
    }
    MB_ASSERT(rc == 0);
    MB_ASSERT(mb_station_config_check(&cfg, "again", err) == 0);
    MB_ASSERT(cfg.n_slots >= 1 && cfg.n_slots <= MB_STATION_MAX_SLOTS);
    MB_ASSERT(cfg.shifts.n >= 1 && cfg.shifts.n <= MB_SHIFT_MAX);
    MB_ASSERT(mb_station_config_slot(&cfg, cfg.active_slot) != NULL);
    MB_ASSERT(memchr(cfg.station, '\0', sizeof cfg.station) != NULL);
    MB_ASSERT(mb_station_config_diff(&cfg, &cfg, NULL, 0) == 0);
    return 0;
}
