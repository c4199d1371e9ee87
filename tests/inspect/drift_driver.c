/*
 * tests/inspect/drift_driver.c - runs one EWMA chart (inspect/drift.h) over
 * the numbers on stdin and prints, per value, "t z lcl ucl event since"
 * (event 0 none, 1 signal, 2 cleared), for synth_drift_e2e.py to check
 * against numpy and against the inspection verdicts.
 *   drift_driver LAMBDA L CLEAR_AFTER TARGET SIGMA < values
 */
#include "drift.h"

#include <stdio.h>
#include <stdlib.h>

int main(int argc, char **argv)
{
    if (argc != 6) {
        fprintf(stderr, "usage: drift_driver LAMBDA L CLEAR_AFTER TARGET SIGMA\n");
        return 2;
    }
    mb_drift_config cfg = {atof(argv[1]), atof(argv[2]), atoi(argv[3])};
    mb_drift_chart c;
    if (mb_drift_init(&c, &cfg, atof(argv[4]), atof(argv[5]))) {
        fprintf(stderr, "drift_driver: bad chart parameters\n");
        return 1;
    }
    double x;
    uint32_t seq = 0;
    while (scanf("%lf", &x) == 1) {
        mb_drift_event ev = mb_drift_add(&c, x, ++seq);
        printf("%ld %.17g %.17g %.17g %d %ld\n", c.t, c.z, c.lcl, c.ucl, (int)ev,
               c.signalling ? c.since : 0L);
    }
    return 0;
}
