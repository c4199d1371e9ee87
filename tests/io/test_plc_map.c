/*
 * tests/io/test_plc_map.c - the PLC register map and handshake without a
 * network (io/plc_map.h): packing of every register, status bits, the
 * 32-bit split, signed gauge clamping, the handshake state machine and
 * its fail-safe, the request check against the Modbus rules, the
 * allow-list parser and the configuration check.
 *
 * Expected exception codes follow the Modbus Application Protocol
 * Specification V1.1b3, section 6 (per-function state diagrams: function
 * code -> 01, quantity/byte count -> 03, address -> 02) and section 7
 * (exception codes).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "plc.h"
#include "plc_map.h"

#include <math.h>
#include <string.h>

static void test_init(void **state)
{
    mb_plc_map m;
    mb_plc_map_init(&m, 7);
    assert_int_equal(m.state, MB_PLC_IDLE);
    assert_int_equal(m.block[MB_PLC_REG_HEARTBEAT], 0);
    assert_int_equal(m.block[MB_PLC_REG_STATUS], 0);
    assert_int_equal(m.block[MB_PLC_REG_SEQUENCE], 0);
    assert_int_equal(m.block[MB_PLC_REG_VERDICT], MB_PLC_NONE);
    assert_int_equal(m.block[MB_PLC_REG_SLOT], 7);
    assert_int_equal(m.req_slot, 7);
    for (int i = 6; i <= 11; i++)
        assert_int_equal(m.block[i], 0);
    for (int i = 0; i < MB_PLC_N_GAUGES; i++)
        assert_int_equal(m.block[MB_PLC_REG_GAUGE0 + i], 0x8000);
    for (int i = 0; i < MB_PLC_N_COILS; i++)
        assert_int_equal(m.coil[i], 0);
}

static void test_split32(void **state)
{
    uint16_t w[2];
    mb_plc_split32(0x12345678u, w);
    assert_int_equal(w[0], 0x1234);
    assert_int_equal(w[1], 0x5678);
    mb_plc_split32(0xFFFFFFFFu, w);
    assert_int_equal(w[0], 0xFFFF);
    assert_int_equal(w[1], 0xFFFF);
    mb_plc_split32(65536u, w);
    assert_int_equal(w[0], 1);
    assert_int_equal(w[1], 0);

    mb_plc_map m;
    mb_plc_map_init(&m, 0);
    mb_plc_map_set_counters(&m, 70000u, 0x0001FFFFu);
    assert_int_equal(m.block[MB_PLC_REG_PARTS_HI], 1);      /* 70000 = 0x11170 */
    assert_int_equal(m.block[MB_PLC_REG_PARTS_LO], 0x1170);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_HI], 1);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 0xFFFF);
    /* the counters wrap at 2^32 like the registers */
    mb_plc_map_set_counters(&m, 0xFFFFFFFFu, 0);
    mb_plc_result r = {.verdict = MB_PLC_REJECT, .reason = 3};
    mb_plc_map_publish(&m, &r);
    assert_int_equal(m.block[MB_PLC_REG_PARTS_HI], 0);
    assert_int_equal(m.block[MB_PLC_REG_PARTS_LO], 0);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 1);
}

static void test_gauge_word(void **state)
{
    assert_int_equal(mb_plc_gauge_word(0.0), 0);
    assert_int_equal(mb_plc_gauge_word(0.01), 1);
    assert_int_equal(mb_plc_gauge_word(-0.01), 0xFFFF);
    assert_int_equal(mb_plc_gauge_word(1.234), 123);
    assert_int_equal(mb_plc_gauge_word(-1.236), (uint16_t)-124);
    assert_int_equal(mb_plc_gauge_word(327.67), 32767);
    assert_int_equal(mb_plc_gauge_word(327.68), 32767);
    assert_int_equal(mb_plc_gauge_word(-327.67), 0x8001);
    assert_int_equal(mb_plc_gauge_word(-327.68), 0x8001); /* never 0x8000 */
    assert_int_equal(mb_plc_gauge_word(1e9), 32767);
    assert_int_equal(mb_plc_gauge_word(-1e9), 0x8001);
    assert_int_equal(mb_plc_gauge_word(INFINITY), 32767);
    assert_int_equal(mb_plc_gauge_word(-INFINITY), 0x8001);
    assert_int_equal(mb_plc_gauge_word(NAN), MB_PLC_GAUGE_NONE);
    /* every value in range round-trips through int16 */
    for (int v = -32767; v <= 32767; v += 97)
        assert_int_equal((int16_t)mb_plc_gauge_word(v / 100.0), v);
}

static void test_cycle_word(void **state)
{
    assert_int_equal(mb_plc_cycle_word(12.34), 123);
    assert_int_equal(mb_plc_cycle_word(0.04), 0);
    assert_int_equal(mb_plc_cycle_word(0.06), 1);
    assert_int_equal(mb_plc_cycle_word(-1.0), 0);
    assert_int_equal(mb_plc_cycle_word(NAN), 0);
    assert_int_equal(mb_plc_cycle_word(6553.4), 65534);
    assert_int_equal(mb_plc_cycle_word(6553.5), 65535);
    assert_int_equal(mb_plc_cycle_word(1e6), 65535);
    assert_int_equal(mb_plc_cycle_word(INFINITY), 65535);
}

static void test_status_bits(void **state)
{
    mb_plc_map m;
    mb_plc_map_init(&m, 0);
    assert_int_equal(mb_plc_map_set_status(&m, MB_PLC_ST_READY, 1), 0);
    assert_int_equal(m.block[MB_PLC_REG_STATUS], 0x01);
    assert_int_equal(mb_plc_map_set_status(&m, MB_PLC_ST_DRIFT | MB_PLC_ST_LOGGING, 1), 0);
    assert_int_equal(m.block[MB_PLC_REG_STATUS], 0x01 | 0x40 | 0x80);
    assert_int_equal(mb_plc_map_set_status(&m, MB_PLC_ST_DRIFT, 0), 0);
    assert_int_equal(m.block[MB_PLC_REG_STATUS], 0x81);
    /* bits that follow the handshake cannot be forced */
    unsigned forbidden[] = {MB_PLC_ST_BUSY, MB_PLC_ST_VALID, MB_PLC_ST_PASS,
                            MB_PLC_ST_REJECT, MB_PLC_ST_FAULT, 0x100};
    for (size_t i = 0; i < sizeof forbidden / sizeof forbidden[0]; i++) {
        assert_int_equal(mb_plc_map_set_status(&m, forbidden[i], 1), MB_EINVAL);
        assert_int_equal(m.block[MB_PLC_REG_STATUS], 0x81);
    }
    mb_plc_map_set_fault(&m, 42);
    assert_int_equal(m.block[MB_PLC_REG_STATUS], 0x81 | 0x20);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], 42);
    mb_plc_map_set_fault(&m, 0);
    assert_int_equal(m.block[MB_PLC_REG_STATUS], 0x81);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], 0);
    mb_plc_map_set_slot(&m, 12);
    assert_int_equal(m.block[MB_PLC_REG_SLOT], 12);
}

static void test_heartbeat_wraps(void **state)
{
    mb_plc_map m;
    mb_plc_map_init(&m, 0);
    mb_plc_map_heartbeat(&m);
    assert_int_equal(m.block[MB_PLC_REG_HEARTBEAT], 1);
    m.heartbeat = 0xFFFF;
    mb_plc_map_heartbeat(&m);
    assert_int_equal(m.block[MB_PLC_REG_HEARTBEAT], 0);
}

static unsigned status(const mb_plc_map *m)
{
    return m->block[MB_PLC_REG_STATUS];
}

static void test_handshake(void **state)
{
    mb_plc_map m;
    mb_plc_map_init(&m, 0);
    mb_plc_map_set_status(&m, MB_PLC_ST_READY, 1);
    assert_int_equal(mb_plc_map_take_trigger(&m), 0); /* nothing pending */

    /* PLC sets trigger */
    m.coil[MB_PLC_COIL_TRIGGER] = 1;
    assert_int_equal(mb_plc_map_apply_writes(&m, 0), MB_PLC_EV_TRIGGER);
    /* station clears it, sets busy, clears result valid */
    assert_int_equal(mb_plc_map_take_trigger(&m), 1);
    assert_int_equal(m.coil[MB_PLC_COIL_TRIGGER], 0);
    assert_int_equal(m.state, MB_PLC_BUSY);
    assert_int_equal(status(&m), MB_PLC_ST_READY | MB_PLC_ST_BUSY);

    /* a second trigger while busy waits */
    m.coil[MB_PLC_COIL_TRIGGER] = 1;
    assert_int_equal(mb_plc_map_take_trigger(&m), 0);
    assert_int_equal(m.coil[MB_PLC_COIL_TRIGGER], 1);

    /* station publishes a pass */
    mb_plc_result r = {.verdict = MB_PLC_PASS, .reason = 55, .cycle_ms = 3.27,
                       .n_gauges = 2, .gauge_dev_mm = {0.12, -0.05, 9, 9}};
    assert_int_equal(mb_plc_map_publish(&m, &r), 0);
    assert_int_equal(m.state, MB_PLC_RESULT);
    assert_int_equal(status(&m), MB_PLC_ST_READY | MB_PLC_ST_VALID | MB_PLC_ST_PASS);
    assert_int_equal(m.block[MB_PLC_REG_SEQUENCE], 1);
    assert_int_equal(m.block[MB_PLC_REG_VERDICT], 1);
    assert_int_equal(m.block[MB_PLC_REG_REASON], 0); /* a pass has no reason */
    assert_int_equal(m.block[MB_PLC_REG_CYCLE], 33);
    assert_int_equal(m.block[MB_PLC_REG_PARTS_LO], 1);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 0);
    assert_int_equal(m.block[12], 12);
    assert_int_equal(m.block[13], (uint16_t)-5);
    assert_int_equal(m.block[14], 0x8000); /* only 2 gauges measured */
    assert_int_equal(m.block[15], 0x8000);

    /* the waiting trigger is taken now: result valid cleared */
    assert_int_equal(mb_plc_map_take_trigger(&m), 1);
    assert_int_equal(status(&m), MB_PLC_ST_READY | MB_PLC_ST_BUSY | MB_PLC_ST_PASS);
    mb_plc_result rj = {.verdict = MB_PLC_REJECT, .reason = 1234, .n_gauges = 4,
                        .gauge_dev_mm = {NAN, 400, -400, 0}};
    assert_int_equal(mb_plc_map_publish(&m, &rj), 0);
    assert_int_equal(status(&m), MB_PLC_ST_READY | MB_PLC_ST_VALID | MB_PLC_ST_REJECT);
    assert_int_equal(m.block[MB_PLC_REG_SEQUENCE], 2);
    assert_int_equal(m.block[MB_PLC_REG_VERDICT], 2);
    assert_int_equal(m.block[MB_PLC_REG_REASON], 1234);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 1);
    assert_int_equal(m.block[12], 0x8000);
    assert_int_equal(m.block[13], 32767);
    assert_int_equal(m.block[14], 0x8001);
    assert_int_equal(m.block[15], 0);

    /* PLC acknowledges: station clears result valid and the acknowledge */
    m.coil[MB_PLC_COIL_ACK] = 1;
    assert_int_equal(mb_plc_map_apply_writes(&m, 0), MB_PLC_EV_ACK);
    assert_int_equal(m.coil[MB_PLC_COIL_ACK], 0);
    assert_int_equal(m.state, MB_PLC_IDLE);
    assert_int_equal(status(&m), MB_PLC_ST_READY | MB_PLC_ST_REJECT);
    /* the last verdict stays readable */
    assert_int_equal(m.block[MB_PLC_REG_VERDICT], 2);

    /* a late acknowledge while busy does not end anything */
    m.coil[MB_PLC_COIL_TRIGGER] = 1;
    assert_int_equal(mb_plc_map_take_trigger(&m), 1);
    m.coil[MB_PLC_COIL_ACK] = 1;
    assert_int_equal(mb_plc_map_apply_writes(&m, 0), 0);
    assert_int_equal(m.coil[MB_PLC_COIL_ACK], 0);
    assert_int_equal(m.state, MB_PLC_BUSY);

    /* a fault: verdict 3, reject bit (the PLC treats it as a reject) */
    mb_plc_result f = {.verdict = MB_PLC_FAULT, .reason = 9, .fault_code = 77};
    assert_int_equal(mb_plc_map_publish(&m, &f), 0);
    assert_int_equal(m.block[MB_PLC_REG_VERDICT], 3);
    assert_int_equal(status(&m), MB_PLC_ST_READY | MB_PLC_ST_VALID | MB_PLC_ST_REJECT);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], 77);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 2);
    /* the station fault overrides the result's fault code while active */
    mb_plc_map_set_fault(&m, 5);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], 5);
    mb_plc_map_set_fault(&m, 0);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], 77);
    /* the next pass clears the result's fault code */
    r.n_gauges = 0;
    mb_plc_map_publish(&m, &r);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], 0);
    /* a fault without a code still carries one */
    f.fault_code = 0;
    mb_plc_map_publish(&m, &f);
    assert_int_equal(m.block[MB_PLC_REG_FAULT], MB_PLC_FAULT_BAD_RESULT);
}

static void test_fail_safe(void **state)
{
    mb_plc_map m;
    mb_plc_map_init(&m, 0);
    mb_plc_result r = {.verdict = MB_PLC_NONE, .reason = 1, .n_gauges = 4};
    int bad[] = {MB_PLC_NONE, 4, -1, 99};
    uint16_t seq = 0;
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        r.verdict = (mb_plc_verdict)bad[i];
        assert_int_equal(mb_plc_map_publish(&m, &r), MB_EINVAL);
        assert_int_equal(m.block[MB_PLC_REG_VERDICT], MB_PLC_FAULT);
        assert_int_equal(status(&m) & MB_PLC_ST_PASS, 0);
        assert_true(status(&m) & MB_PLC_ST_REJECT);
        assert_int_equal(m.block[MB_PLC_REG_FAULT], MB_PLC_FAULT_BAD_RESULT);
        assert_int_equal(m.block[12], 0x8000); /* no figures from junk */
        assert_int_equal(m.block[MB_PLC_REG_SEQUENCE], ++seq);
    }
    assert_int_equal(mb_plc_map_publish(&m, NULL), MB_EINVAL);
    assert_int_equal(m.block[MB_PLC_REG_VERDICT], MB_PLC_FAULT);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 5);
    /* sequence wraps */
    m.sequence = 0xFFFF;
    r.verdict = MB_PLC_PASS;
    mb_plc_map_publish(&m, &r);
    assert_int_equal(m.block[MB_PLC_REG_SEQUENCE], 0);
}

static void test_reset_and_slot(void **state)
{
    mb_plc_map m;
    mb_plc_map_init(&m, 2);
    mb_plc_map_set_counters(&m, 10, 3);
    m.coil[MB_PLC_COIL_RESET] = 1;
    assert_int_equal(mb_plc_map_apply_writes(&m, 0), MB_PLC_EV_RESET);
    assert_int_equal(m.coil[MB_PLC_COIL_RESET], 0);
    assert_int_equal(m.block[MB_PLC_REG_PARTS_LO], 0);
    assert_int_equal(m.block[MB_PLC_REG_REJECTS_LO], 0);
    assert_int_equal(m.reset_pending, 1);
    m.req_slot = 9;
    assert_int_equal(mb_plc_map_apply_writes(&m, 1), MB_PLC_EV_SLOT);
    assert_int_equal(m.slot_pending, 1);
    /* the active slot changes only when the station says so */
    assert_int_equal(m.block[MB_PLC_REG_SLOT], 2);
}

typedef struct {
    const char *what;
    uint8_t pdu[16];
    int len;
    int code;
} req_case;

static void test_check_request(void **state)
{
    static const req_case cases[] = {
        /* read holding registers (03) */
        {"read HR 0..15", {3, 0, 0, 0, 16}, 5, 0},
        {"read HR 5..7", {3, 0, 5, 0, 3}, 5, 0},
        {"read HR 32", {3, 0, 32, 0, 1}, 5, 0},
        {"read HR 0..16", {3, 0, 0, 0, 17}, 5, 2},
        {"read HR 16", {3, 0, 16, 0, 1}, 5, 2},
        {"read HR 31..32", {3, 0, 31, 0, 2}, 5, 2},
        {"read HR 32..33", {3, 0, 32, 0, 2}, 5, 2},
        {"read HR 0..32 across the gap", {3, 0, 0, 0, 33}, 5, 2},
        {"read HR 65535", {3, 0xFF, 0xFF, 0, 1}, 5, 2},
        {"read HR quantity 0", {3, 0, 0, 0, 0}, 5, 3},
        {"read HR quantity 126 (> 125)", {3, 0, 0, 0, 126}, 5, 3},
        {"read HR quantity 126 at a bad address: 03 first", {3, 0, 40, 0, 126}, 5, 3},
        {"read HR short PDU", {3, 0, 0, 0}, 4, 3},
        {"read HR long PDU", {3, 0, 0, 0, 1, 0}, 6, 3},
        /* read input registers (04) */
        {"read IR 0..15", {4, 0, 0, 0, 16}, 5, 0},
        {"read IR 15", {4, 0, 15, 0, 1}, 5, 0},
        {"read IR 16", {4, 0, 16, 0, 1}, 5, 2},
        {"read IR 32", {4, 0, 32, 0, 1}, 5, 2},
        {"read IR quantity 0", {4, 0, 0, 0, 0}, 5, 3},
        /* read coils (01) */
        {"read coils 0..2", {1, 0, 0, 0, 3}, 5, 0},
        {"read coil 2", {1, 0, 2, 0, 1}, 5, 0},
        {"read coils 0..3", {1, 0, 0, 0, 4}, 5, 2},
        {"read coil 3", {1, 0, 3, 0, 1}, 5, 2},
        {"read coils quantity 2001", {1, 0, 0, 0x07, 0xD1}, 5, 3},
        {"read coils quantity 0", {1, 0, 0, 0, 0}, 5, 3},
        /* write single coil (05) */
        {"write coil 0 on", {5, 0, 0, 0xFF, 0}, 5, 0},
        {"write coil 2 off", {5, 0, 2, 0, 0}, 5, 0},
        {"write coil 3", {5, 0, 3, 0xFF, 0}, 5, 2},
        {"write coil value 0x1234", {5, 0, 0, 0x12, 0x34}, 5, 3},
        {"write coil value 0x0001", {5, 0, 1, 0, 1}, 5, 3},
        /* write single register (06) */
        {"write HR 32", {6, 0, 32, 0, 5}, 5, 0},
        {"write HR 0 (read-only)", {6, 0, 0, 0, 5}, 5, 2},
        {"write HR 15 (read-only)", {6, 0, 15, 0, 5}, 5, 2},
        {"write HR 31", {6, 0, 31, 0, 5}, 5, 2},
        {"write HR 33", {6, 0, 33, 0, 5}, 5, 2},
        {"write HR short", {6, 0, 32, 0}, 4, 3},
        /* write multiple coils (15) */
        {"write coils 0..2", {15, 0, 0, 0, 3, 1, 0x05}, 7, 0},
        {"write coils 1..2", {15, 0, 1, 0, 2, 1, 0x03}, 7, 0},
        {"write coils 0..3", {15, 0, 0, 0, 4, 1, 0x0F}, 7, 2},
        {"write coils byte count 2 for 3 coils", {15, 0, 0, 0, 3, 2, 0x05, 0}, 8, 3},
        {"write coils byte count beyond PDU", {15, 0, 0, 0, 3, 1}, 6, 3},
        {"write coils quantity 0", {15, 0, 0, 0, 0, 0}, 6, 3},
        /* write multiple registers (16) */
        {"write HR 32 by 16", {16, 0, 32, 0, 1, 2, 0, 9}, 8, 0},
        {"write HR 31..32 by 16", {16, 0, 31, 0, 2, 4, 0, 9, 0, 9}, 10, 2},
        {"write HR 32..33 by 16", {16, 0, 32, 0, 2, 4, 0, 9, 0, 9}, 10, 2},
        {"write HR 0 by 16", {16, 0, 0, 0, 1, 2, 0, 9}, 8, 2},
        {"write HR byte count odd", {16, 0, 32, 0, 1, 3, 0, 9, 0}, 9, 3},
        {"write HR quantity 124", {16, 0, 32, 0, 124, 248}, 6, 3},
        /* functions not offered */
        {"read discrete inputs (02)", {2, 0, 0, 0, 1}, 5, 1},
        {"read exception status (07)", {7}, 1, 1},
        {"report server id (17)", {17}, 1, 1},
        {"mask write register (22)", {22, 0, 32, 0xFF, 0xFF, 0, 0}, 7, 1},
        {"read/write registers (23)", {23, 0, 0, 0, 1, 0, 32, 0, 1, 2, 0, 1}, 12, 1},
        {"device identification (43)", {43, 14, 1, 0}, 4, 1},
        {"user function 65", {65, 1, 2, 3}, 4, 1},
        {"exception code as request (0x83)", {0x83, 2}, 2, 1},
        {"function 0", {0}, 1, 1},
        {"empty PDU", {0}, 0, 1},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        int got = mb_plc_check_request(cases[i].pdu, cases[i].len);
        if (got != cases[i].code)
            fail_msg("%s: expected exception %d, got %d", cases[i].what,
                     cases[i].code, got);
    }
    assert_int_equal(mb_plc_check_request(NULL, 5), 1);
}

static void test_allow_list(void **state)
{
    int fam, pre, cfam, cpre;
    uint8_t net[16], c[16];
    assert_int_equal(mb_plc_net_parse("10.0.0.0/8", &fam, net, &pre), 0);
    assert_int_equal(fam, 4);
    assert_int_equal(pre, 8);
    assert_int_equal(mb_plc_net_parse("10.200.3.4", &cfam, c, &cpre), 0);
    assert_int_equal(cpre, 32);
    assert_true(mb_plc_net_match(cfam, c, fam, net, pre));
    assert_int_equal(mb_plc_net_parse("11.0.0.1", &cfam, c, &cpre), 0);
    assert_false(mb_plc_net_match(cfam, c, fam, net, pre));
    /* prefix not on a byte boundary: 192.168.4.0/22 = .4.0 .. .7.255 */
    assert_int_equal(mb_plc_net_parse("192.168.4.0/22", &fam, net, &pre), 0);
    const char *in[] = {"192.168.4.0", "192.168.5.17", "192.168.7.255"};
    const char *out[] = {"192.168.3.255", "192.168.8.0", "192.169.4.1"};
    for (int i = 0; i < 3; i++) {
        mb_plc_net_parse(in[i], &cfam, c, &cpre);
        assert_true(mb_plc_net_match(cfam, c, fam, net, pre));
        mb_plc_net_parse(out[i], &cfam, c, &cpre);
        assert_false(mb_plc_net_match(cfam, c, fam, net, pre));
    }
    /* an IPv4 client seen through a dual-stack listener */
    assert_int_equal(mb_plc_net_parse("::ffff:192.168.6.1", &cfam, c, &cpre), 0);
    assert_int_equal(cfam, 6);
    assert_true(mb_plc_net_match(cfam, c, fam, net, pre));
    /* IPv6 */
    assert_int_equal(mb_plc_net_parse("fd00:1::/32", &fam, net, &pre), 0);
    assert_int_equal(fam, 6);
    mb_plc_net_parse("fd00:1:ffff::5", &cfam, c, &cpre);
    assert_true(mb_plc_net_match(cfam, c, fam, net, pre));
    mb_plc_net_parse("fd00:2::5", &cfam, c, &cpre);
    assert_false(mb_plc_net_match(cfam, c, fam, net, pre));
    mb_plc_net_parse("10.0.0.1", &cfam, c, &cpre); /* other family */
    assert_false(mb_plc_net_match(cfam, c, fam, net, pre));
    /* /0 matches its whole family */
    assert_int_equal(mb_plc_net_parse("0.0.0.0/0", &fam, net, &pre), 0);
    assert_true(mb_plc_net_match(cfam, c, fam, net, pre));
    /* refused */
    const char *bad[] = {"", "10.0.0.0/33", "::/129", "10.0.0/8", "10.0.0.0/",
                         "10.0.0.0/8x", "host.example", "10.0.0.0/-1",
                         "1.2.3.4/0008"};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++)
        if (mb_plc_net_parse(bad[i], &fam, net, &pre) != MB_EINVAL)
            fail_msg("'%s' accepted as an allow-list entry", bad[i]);
}

static void expect_config(const mb_plc_config *c, int code, const char *field)
{
    char err[MB_ERR_LEN] = "";
    int rc = mb_plc_config_check(c, err);
    if (rc != code)
        fail_msg("expected %d, got %d: %s", code, rc, err);
    if (field && !strstr(err, field))
        fail_msg("sentence does not name %s: %s", field, err);
}

static void test_config(void **state)
{
    mb_plc_config c;
    mb_plc_config_default(&c);
    expect_config(&c, 0, NULL);
    assert_string_equal(c.bind_addr, "127.0.0.1");
    assert_int_equal(c.port, 502);
    assert_int_equal(c.heartbeat_ms, 100);
    strcpy(c.bind_addr, "plc.example");
    expect_config(&c, MB_EINVAL, "plc.bind_addr");
    mb_plc_config_default(&c);
    c.max_connections = 0;
    expect_config(&c, MB_ERANGE, "plc.max_connections");
    mb_plc_config_default(&c);
    c.port = 70000;
    expect_config(&c, MB_ERANGE, "plc.port");
    mb_plc_config_default(&c);
    c.n_allow = 2;
    strcpy(c.allow[0], "10.0.0.0/8");
    strcpy(c.allow[1], "10.0.0.0/33");
    expect_config(&c, MB_EINVAL, "plc.allow[1]");
    mb_plc_config_default(&c);
    c.mode = MB_PLC_CLIENT;
    expect_config(&c, MB_EINVAL, "plc.peer_addr");
    strcpy(c.peer_addr, "192.168.0.9");
    expect_config(&c, 0, NULL);
    c.unit_id = 250;
    expect_config(&c, MB_ERANGE, "plc.unit_id");
    c.unit_id = 1;
    c.backoff_max_ms = c.backoff_min_ms - 1;
    expect_config(&c, MB_ERANGE, "plc.backoff_max_ms");
    c.backoff_max_ms = 1000;
    c.block_addr = 65530;
    expect_config(&c, MB_ERANGE, "plc.block_addr");
    mb_plc *p = (mb_plc *)&c;
    char err[MB_ERR_LEN];
    assert_int_equal(mb_plc_open(&c, 0, &p, err), MB_ERANGE);
    assert_null(p);
    mb_plc_close(NULL); /* NULL-safe */
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_init),
        cmocka_unit_test(test_split32),
        cmocka_unit_test(test_gauge_word),
        cmocka_unit_test(test_cycle_word),
        cmocka_unit_test(test_status_bits),
        cmocka_unit_test(test_heartbeat_wraps),
        cmocka_unit_test(test_handshake),
        cmocka_unit_test(test_fail_safe),
        cmocka_unit_test(test_reset_and_slot),
        cmocka_unit_test(test_check_request),
        cmocka_unit_test(test_allow_list),
        cmocka_unit_test(test_config),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
