/* tests/io/plc_fake.c - see plc_fake.h. */
#include "plc_fake.h"

#include <errno.h>
#include <poll.h>
#include <string.h>

void plcfake_result(const plcfake_opts *o, int k, mb_plc_result *r)
{
    memset(r, 0, sizeof *r);
    if (o->fault_at > 0 && k == o->fault_at) {
        r->verdict = MB_PLC_FAULT;
        r->fault_code = 7;
        r->reason = 900;
    } else if (o->reject_every > 0 && k % o->reject_every == 0) {
        r->verdict = MB_PLC_REJECT;
        r->reason = 100 + k % 7;
    } else {
        r->verdict = MB_PLC_PASS;
    }
    r->cycle_ms = 1.0 + 0.1 * (k % 50);
    r->n_gauges = k % 2 ? 4 : 3;
    for (int i = 0; i < MB_PLC_N_GAUGES; i++)
        r->gauge_dev_mm[i] = ((37 * k + 11 * i) % 201 - 100) / 100.0;
    if (k % 7 == 0)
        r->gauge_dev_mm[0] = 500.0;
    if (k % 11 == 0)
        r->gauge_dev_mm[1] = -400.0;
}

static const char *verdict_name(int v)
{
    switch (v) {
    case MB_PLC_PASS: return "pass";
    case MB_PLC_REJECT: return "reject";
    case MB_PLC_FAULT: return "fault";
    default: return "none";
    }
}

int plcfake_run(mb_plc *plc, const plcfake_opts *o,
                int (*should_stop)(void *), void *user, FILE *events)
{
    int part = 0, pending = 0;
    int64_t due = 0;
    struct pollfd fds[1 + MB_PLC_MAX_CONN];
    while (!should_stop(user)) {
        int64_t now = mb_plc_now_ms();
        int n = mb_plc_pollfds(plc, fds, 1 + MB_PLC_MAX_CONN);
        int t = mb_plc_timeout_ms(plc, now);
        if (pending && due - now < t)
            t = due > now ? (int)(due - now) : 0;
        if (t > 50) /* notice the stop request soon */
            t = 50;
        if (poll(fds, (nfds_t)n, t) < 0 && errno != EINTR)
            break;
        now = mb_plc_now_ms();
        mb_plc_service(plc, now);
        int slot;
        if (mb_plc_take_slot_request(plc, &slot)) {
            mb_plc_set_active_slot(plc, slot);
            if (events)
                fprintf(events, "SLOT %d\n", slot);
        }
        if (mb_plc_take_counter_reset(plc) && events)
            fprintf(events, "RESET\n");
        if (!pending && mb_plc_take_trigger(plc)) {
            pending = 1;
            part++;
            due = now + o->inspect_ms;
        }
        if (pending && now >= due) {
            mb_plc_result r;
            plcfake_result(o, part, &r);
            mb_plc_publish(plc, &r);
            pending = 0;
            if (events) {
                mb_plc_map m;
                mb_plc_get_map(plc, &m);
                fprintf(events, "RESULT part=%d seq=%u verdict=%s\n", part,
                        (unsigned)m.sequence, verdict_name(r.verdict));
            }
        }
        if (events)
            fflush(events);
    }
    return part;
}
