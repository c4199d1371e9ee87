/*
 * inspect/drift.h - drift warnings: EWMA control charts on gauges, shape
 * modes, size and T^2.
 *
 * The exponentially weighted moving average of Roberts (Technometrics 1959),
 * in the form of the NIST/SEMATECH e-Handbook of Statistical Methods,
 * section 6.3.2.4:
 *     z_0 = target,  z_t = lambda x_t + (1 - lambda) z_{t-1}
 *     limits  target +- L sigma sqrt(lambda / (2 - lambda)
 *                                    [1 - (1 - lambda)^(2t)])
 * with t = 1, 2, ... the parts seen since the chart started; the limits
 * widen from L sigma sqrt(lambda) at the first part to the asymptotic
 * L sigma sqrt(lambda / (2 - lambda)).
 *
 * A chart signals when z_t leaves its limits (direction up or down) and
 * remembers when the excursion began: the first part of the current run
 * of z on that side of the target (so a slow creep is dated from where it
 * started to show, not from where it crossed). It clears after `clear_after`
 * consecutive parts back inside the limits.
 *
 * Target and sigma come from the taught model, passed in by the caller:
 * for a gauge its nominal and the sd of the good set, for a mode 0 and 1
 * (modes are in sd units), for size 1 and its sd.
 *
 * Pure computation: no allocation after mb_drift_init, no printing.
 */
#ifndef MB_DRIFT_H
#define MB_DRIFT_H

#include <stdint.h>

typedef struct {
    double lambda;    /**< weight of the newest part, 0 < lambda <= 1;
                           default 0.2 */
    double L;         /**< width of the limits in sigmas of z; default 3 */
    int clear_after;  /**< parts back inside before a signal clears;
                           default 10 */
} mb_drift_config;

/** The defaults above. */
void mb_drift_config_default(mb_drift_config *cfg);

typedef enum {
    MB_DRIFT_NONE = 0, /**< nothing new */
    MB_DRIFT_SIGNAL,   /**< this part started a signal */
    MB_DRIFT_CLEARED   /**< this part cleared one */
} mb_drift_event;

/** One chart. Plain data; read the members, change them only through the
    functions. */
typedef struct {
    mb_drift_config cfg;
    double target, sigma;
    double z;           /**< current EWMA */
    double lcl, ucl;    /**< limits at the current part */
    long t;             /**< parts seen */
    double decay2;      /**< (1 - lambda)^(2t) */
    int signalling;     /**< 1 while a signal is on */
    int direction;      /**< +1 up, -1 down, 0 none (of the signal) */
    int side;           /**< side of the target z is on now: +1, -1, 0 */
    long run_start;     /**< part number (1-based t) where z last went to
                             its current side */
    uint32_t run_start_seq;
    long since;         /**< part number where the current signal's
                             excursion began */
    uint32_t since_seq;
    int inside_run;     /**< consecutive parts inside while signalling */
} mb_drift_chart;

/**
 * Start a chart. Return value: 0; MB_EINVAL (sigma not > 0 or not finite,
 * target not finite, lambda outside (0, 1], L not > 0, clear_after < 1).
 */
int mb_drift_init(mb_drift_chart *c, const mb_drift_config *cfg, double target,
                  double sigma);

/**
 * Add part x (seq is the part's result sequence, kept to date a signal).
 * A non-finite x is ignored (MB_DRIFT_NONE, chart unchanged).
 * Return value: the event this part caused.
 */
mb_drift_event mb_drift_add(mb_drift_chart *c, double x, uint32_t seq);

/** The half width of the limits after t parts (t >= 1), in units of x. */
double mb_drift_halfwidth(const mb_drift_config *cfg, double sigma, long t);

#endif
