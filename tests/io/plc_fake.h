/*
 * tests/io/plc_fake.h - a fake inspection station around the PLC link, for
 * tests: the station's poll loop with deterministic verdicts instead of a
 * camera. Used by plc_station (a program the Python tests start) and by
 * test_plc_socket (in a thread).
 *
 * Part k (1-based count of triggers taken) gets, by plcfake_result:
 *   verdict  fault when k == fault_at (fault code 7, reason 900);
 *            else reject when reject_every > 0 and k % reject_every == 0
 *            (reason 100 + k % 7); else pass (reason 0)
 *   cycle    1.0 + 0.1 * (k % 50) ms, i.e. register 10 = 10 + k % 50
 *   gauges   4 for odd k, 3 for even k (register 15 then 0x8000);
 *            gauge i = ((37 k + 11 i) % 201 - 100) / 100 mm, except
 *            gauge 0 = +500 mm when k % 7 == 0 (register clamps to 32767)
 *            and gauge 1 = -400 mm when k % 11 == 0 (clamps to -32767).
 * tests/io/ref_plc_pymodbus.py computes the same independently.
 */
#ifndef MB_TEST_PLC_FAKE_H
#define MB_TEST_PLC_FAKE_H

#include <stdio.h>

#include "plc.h"

typedef struct {
    int reject_every; /* every n-th part rejected; 0 = none */
    int fault_at;     /* this part is a fault; 0 = none */
    int inspect_ms;   /* fake inspection time; the link is served meanwhile */
} plcfake_opts;

/* The deterministic result of part k. */
void plcfake_result(const plcfake_opts *o, int k, mb_plc_result *r);

/* Run the station loop until should_stop(user) returns nonzero: serve the
 * link, take triggers, publish results, follow slot requests. Events go to
 * `events` as lines when not NULL ("RESULT part=k seq=s verdict=v",
 * "SLOT n", "RESET"). Returns the number of parts published. */
int plcfake_run(mb_plc *plc, const plcfake_opts *o,
                int (*should_stop)(void *), void *user, FILE *events);

#endif
