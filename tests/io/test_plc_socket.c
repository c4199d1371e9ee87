/*
 * tests/io/test_plc_socket.c - the PLC link in server mode over real
 * loopback sockets, driven by libmodbus's own client: the map as read
 * through holding and input registers, the handshake, exact exception
 * codes for crafted bad requests, garbage and random frames on one
 * connection while another keeps being served, a client stalled
 * mid-frame, the connection bound and the allow-list.
 *
 * The station (io/plc.h + the fake inspection of plc_fake.h) runs its poll
 * loop in a second thread that owns the handle; this thread only talks
 * Modbus to it, and reads its counters after joining it.
 *
 * References: Modbus Application Protocol Specification V1.1b3 (section 6
 * request/response formats and check order, section 7 exception codes
 * 01 ILLEGAL FUNCTION, 02 ILLEGAL DATA ADDRESS, 03 ILLEGAL DATA VALUE);
 * Modbus Messaging on TCP/IP Implementation Guide V1.0b (section 3.1.3
 * MBAP header: transaction id, protocol id 0, length, unit id).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "error.h"
#include "plc.h"
#include "plc_fake.h"

#include <arpa/inet.h>
#include <errno.h>
#include <modbus/modbus.h>
#include <netinet/in.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <sys/time.h>
#include <time.h>
#include <unistd.h>

/* ---- the station in a thread ---- */

typedef struct {
    mb_plc_config cfg;
    plcfake_opts fo;
    mb_plc *plc;
    pthread_t th;
    atomic_int stop;
    int port;
    mb_plc_stats st; /* valid after station_stop */
} station;

static int stop_requested(void *user)
{
    return atomic_load(&((station *)user)->stop);
}

static void *station_main(void *arg)
{
    station *s = arg;
    plcfake_run(s->plc, &s->fo, stop_requested, s, NULL);
    return NULL;
}

static void station_init(station *s)
{
    memset(s, 0, sizeof *s);
    mb_plc_config_default(&s->cfg);
    s->cfg.port = 0;
    s->fo.reject_every = 5;
}

static void station_start(station *s)
{
    char err[MB_ERR_LEN];
    if (mb_plc_open(&s->cfg, mb_plc_now_ms(), &s->plc, err) < 0)
        fail_msg("mb_plc_open: %s", err);
    mb_plc_set_status(s->plc, MB_PLC_ST_READY, 1);
    s->port = mb_plc_port(s->plc);
    assert_true(s->port > 0);
    atomic_store(&s->stop, 0);
    assert_int_equal(pthread_create(&s->th, NULL, station_main, s), 0);
}

static void station_stop(station *s)
{
    atomic_store(&s->stop, 1);
    pthread_join(s->th, NULL);
    mb_plc_get_stats(s->plc, &s->st);
    mb_plc_close(s->plc);
    s->plc = NULL;
}

/* ---- clients ---- */

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + ts.tv_nsec * 1e-9;
}

static modbus_t *client_at(const char *host, int port)
{
    char ps[16];
    snprintf(ps, sizeof ps, "%d", port);
    modbus_t *ctx = modbus_new_tcp_pi(host, ps);
    assert_non_null(ctx);
    modbus_set_response_timeout(ctx, 2, 0);
    if (modbus_connect(ctx) < 0)
        fail_msg("connect to %s port %d: %s", host, port, modbus_strerror(errno));
    return ctx;
}

static modbus_t *client(int port)
{
    return client_at("127.0.0.1", port);
}

static void client_free(modbus_t *ctx)
{
    modbus_close(ctx);
    modbus_free(ctx);
}

/* A plain socket with a 2 s receive timeout. */
static int raw_connect(int port)
{
    int fd = socket(AF_INET, SOCK_STREAM, 0);
    assert_true(fd >= 0);
    struct timeval tv = {2, 0};
    setsockopt(fd, SOL_SOCKET, SO_RCVTIMEO, &tv, sizeof tv);
    struct sockaddr_in a = {.sin_family = AF_INET, .sin_port = htons((uint16_t)port)};
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    if (connect(fd, (struct sockaddr *)&a, sizeof a) < 0)
        fail_msg("raw connect: %s", strerror(errno));
    return fd;
}

/* Wait for the server to close fd: 1 when EOF (or reset) came within 2 s. */
static int closed_by_server(int fd)
{
    uint8_t b[512];
    double t0 = now_s();
    while (now_s() - t0 < 2.5) {
        ssize_t n = recv(fd, b, sizeof b, 0);
        if (n == 0 || (n < 0 && errno == ECONNRESET))
            return 1;
        if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK))
            return 0; /* receive timeout: still open */
    }
    return 0;
}

static void read_block(modbus_t *ctx, uint16_t *hr)
{
    if (modbus_read_registers(ctx, 0, MB_PLC_BLOCK_LEN, hr) != MB_PLC_BLOCK_LEN)
        fail_msg("read HR 0..15: %s", modbus_strerror(errno));
}

/* ---- tests ---- */

static void test_read_map(void **state)
{
    station s;
    station_init(&s);
    s.cfg.active_slot = 4;
    station_start(&s);
    modbus_t *c = client(s.port);
    uint16_t hr[16], ir[16], r32;
    uint8_t coils[3];
    read_block(c, hr);
    assert_int_equal(modbus_read_input_registers(c, 0, 16, ir), 16);
    /* identical mirror; the heartbeat may tick between the two reads */
    for (int i = 1; i < 16; i++)
        assert_int_equal(hr[i], ir[i]);
    assert_true((uint16_t)(ir[0] - hr[0]) <= 1);
    assert_int_equal(hr[MB_PLC_REG_STATUS], MB_PLC_ST_READY);
    assert_int_equal(hr[MB_PLC_REG_SLOT], 4);
    assert_int_equal(hr[MB_PLC_REG_VERDICT], 0);
    for (int i = 12; i < 16; i++)
        assert_int_equal(hr[i], 0x8000);
    assert_int_equal(modbus_read_registers(c, 32, 1, &r32), 1);
    assert_int_equal(r32, 4);
    assert_int_equal(modbus_read_bits(c, 0, 3, coils), 3);
    assert_int_equal(coils[0] | coils[1] | coils[2], 0);
    /* single registers inside the block are readable one by one */
    for (int i = 1; i < 16; i++) {
        uint16_t v;
        assert_int_equal(modbus_read_registers(c, i, 1, &v), 1);
        assert_int_equal(v, hr[i]);
    }
    client_free(c);
    station_stop(&s);
    assert_int_equal(s.st.exceptions, 0);
}

static int16_t expect_gauge(int k, int i)
{
    if (i == 0 && k % 7 == 0)
        return 32767; /* +500 mm clamped */
    if (i == 1 && k % 11 == 0)
        return -32767; /* -400 mm clamped */
    if (i == 3 && k % 2 == 0)
        return (int16_t)0x8000; /* only 3 gauges on even parts */
    return (int16_t)((37 * k + 11 * i) % 201 - 100);
}

static void test_handshake(void **state)
{
    station s;
    station_init(&s);
    s.fo.reject_every = 3;
    s.fo.fault_at = 5;
    s.fo.inspect_ms = 50;
    station_start(&s);
    modbus_t *c = client(s.port);
    uint16_t hr[16];
    read_block(c, hr);
    uint16_t seq0 = hr[MB_PLC_REG_SEQUENCE];
    int rejects = 0;
    for (int k = 1; k <= 8; k++) {
        assert_int_equal(modbus_write_bit(c, 0, 1), 1); /* trigger */
        int busy_seen = 0, valid = 0;
        double t0 = now_s();
        while (now_s() - t0 < 2.0 && !valid) {
            read_block(c, hr);
            if (hr[1] & MB_PLC_ST_BUSY) {
                busy_seen = 1;
                assert_int_equal(hr[1] & MB_PLC_ST_VALID, 0);
            }
            valid = (hr[1] & MB_PLC_ST_VALID) && hr[2] == (uint16_t)(seq0 + k);
        }
        if (!valid)
            fail_msg("part %d: no result within 2 s (status 0x%x)", k, hr[1]);
        /* 50 ms of inspection, read back to back: busy must show */
        assert_true(busy_seen);
        assert_int_equal(hr[1] & MB_PLC_ST_BUSY, 0);
        uint8_t coils[3];
        assert_int_equal(modbus_read_bits(c, 0, 3, coils), 3);
        assert_int_equal(coils[0], 0); /* station cleared the trigger */
        int verdict = k == 5 ? 3 : (k % 3 == 0 ? 2 : 1);
        rejects += verdict != 1;
        assert_int_equal(hr[MB_PLC_REG_VERDICT], verdict);
        assert_int_equal(!!(hr[1] & MB_PLC_ST_PASS), verdict == 1);
        assert_int_equal(!!(hr[1] & MB_PLC_ST_REJECT), verdict != 1);
        assert_int_equal(hr[MB_PLC_REG_REASON],
                         verdict == 1 ? 0 : verdict == 3 ? 900 : 100 + k % 7);
        assert_int_equal(hr[MB_PLC_REG_FAULT], verdict == 3 ? 7 : 0);
        assert_int_equal(hr[MB_PLC_REG_PARTS_HI], 0);
        assert_int_equal(hr[MB_PLC_REG_PARTS_LO], k);
        assert_int_equal(hr[MB_PLC_REG_REJECTS_LO], rejects);
        assert_int_equal(hr[MB_PLC_REG_CYCLE], 10 + k % 50);
        for (int i = 0; i < 4; i++)
            assert_int_equal((int16_t)hr[12 + i], expect_gauge(k, i));
        /* acknowledge: result valid and the acknowledge coil clear */
        assert_int_equal(modbus_write_bit(c, 1, 1), 1);
        t0 = now_s();
        do
            read_block(c, hr);
        while ((hr[1] & MB_PLC_ST_VALID) && now_s() - t0 < 2.0);
        assert_int_equal(hr[1] & MB_PLC_ST_VALID, 0);
        assert_int_equal(modbus_read_bits(c, 0, 3, coils), 3);
        assert_int_equal(coils[1], 0);
    }
    /* requested slot -> the station changes over and shows it in 5 */
    assert_int_equal(modbus_write_register(c, 32, 6), 1);
    double t0 = now_s();
    do
        read_block(c, hr);
    while (hr[MB_PLC_REG_SLOT] != 6 && now_s() - t0 < 2.0);
    assert_int_equal(hr[MB_PLC_REG_SLOT], 6);
    /* reset the shift counters through coil 2, with write multiple coils */
    uint8_t bits[3] = {0, 0, 1};
    assert_int_equal(modbus_write_bits(c, 0, 3, bits), 3);
    read_block(c, hr);
    for (int i = 6; i <= 9; i++)
        assert_int_equal(hr[i], 0);
    uint8_t coils[3];
    assert_int_equal(modbus_read_bits(c, 0, 3, coils), 3);
    assert_int_equal(coils[2], 0);
    client_free(c);
    station_stop(&s);
}

static int n_expected_exceptions;

/* Send a raw PDU (unit 0xFF) and return the exception code of the answer,
 * 0 for a normal answer. */
static int raw_exception(modbus_t *c, const uint8_t *pdu, int len)
{
    uint8_t req[260], rsp[MODBUS_TCP_MAX_ADU_LENGTH];
    req[0] = 0xFF;
    memcpy(req + 1, pdu, (size_t)len);
    if (modbus_send_raw_request(c, req, len + 1) < 0)
        fail_msg("send raw: %s", modbus_strerror(errno));
    int n = modbus_receive_confirmation(c, rsp);
    if (n < 0)
        fail_msg("no answer to raw function %d: %s", pdu[0], modbus_strerror(errno));
    /* MBAP: protocol id 0, length = bytes after it */
    assert_int_equal(rsp[2] | rsp[3], 0);
    assert_int_equal((rsp[4] << 8 | rsp[5]), n - 6);
    assert_int_equal(rsp[6], 0xFF); /* unit id echoed */
    if (rsp[7] == (pdu[0] | 0x80)) {
        assert_int_equal(n, 9);
        n_expected_exceptions++;
        return rsp[8];
    }
    assert_int_equal(rsp[7], pdu[0]);
    return 0;
}

static void expect_errno(int rc, int code, const char *what)
{
    n_expected_exceptions++;
    if (rc != -1 || errno != code)
        fail_msg("%s: expected -1 with '%s', got %d with '%s'", what,
                 modbus_strerror(code), rc, modbus_strerror(errno));
}

static void test_exceptions(void **state)
{
    station s;
    station_init(&s);
    station_start(&s);
    n_expected_exceptions = 0;
    modbus_t *c = client(s.port);
    uint16_t hr0[16], hr1[16], v[40];
    uint8_t b[8];
    read_block(c, hr0);
    /* 02 ILLEGAL DATA ADDRESS */
    expect_errno(modbus_read_registers(c, 16, 1, v), EMBXILADD, "read HR 16");
    expect_errno(modbus_read_registers(c, 0, 17, v), EMBXILADD, "read HR 0..16");
    expect_errno(modbus_read_registers(c, 0, 33, v), EMBXILADD, "read HR 0..32");
    expect_errno(modbus_read_registers(c, 33, 1, v), EMBXILADD, "read HR 33");
    expect_errno(modbus_read_input_registers(c, 16, 1, v), EMBXILADD, "read IR 16");
    expect_errno(modbus_read_input_registers(c, 32, 1, v), EMBXILADD, "read IR 32");
    expect_errno(modbus_read_bits(c, 3, 1, b), EMBXILADD, "read coil 3");
    expect_errno(modbus_read_bits(c, 0, 4, b), EMBXILADD, "read coils 0..3");
    expect_errno(modbus_write_bit(c, 3, 1), EMBXILADD, "write coil 3");
    for (int a = 0; a < 34; a++) {
        if (a == 32)
            continue;
        char what[32];
        snprintf(what, sizeof what, "write HR %d", a);
        expect_errno(modbus_write_register(c, a, 0x5A5A), EMBXILADD, what);
    }
    uint16_t w[2] = {1, 2};
    expect_errno(modbus_write_registers(c, 31, 2, w), EMBXILADD, "write HR 31..32");
    expect_errno(modbus_write_registers(c, 32, 2, w), EMBXILADD, "write HR 32..33");
    expect_errno(modbus_write_registers(c, 0, 2, w), EMBXILADD, "write HR 0..1");
    uint8_t bits[4] = {1, 1, 1, 1};
    expect_errno(modbus_write_bits(c, 1, 3, bits), EMBXILADD, "write coils 1..3");
    /* 01 ILLEGAL FUNCTION */
    expect_errno(modbus_read_input_bits(c, 0, 1, b), EMBXILFUN, "read discrete inputs");
    uint8_t id[64];
    expect_errno(modbus_report_slave_id(c, sizeof id, id), EMBXILFUN, "report server id");
    expect_errno(modbus_mask_write_register(c, 32, 0xFFFF, 0), EMBXILFUN, "mask write");
    expect_errno(modbus_write_and_read_registers(c, 32, 1, w, 0, 1, v), EMBXILFUN,
                 "read/write multiple registers");
    static const uint8_t user_fc[] = {0x41, 1, 2, 3};
    assert_int_equal(raw_exception(c, user_fc, 4), 1);
    static const uint8_t fc8[] = {0x08, 0, 0, 0x12, 0x34}; /* diagnostics */
    assert_int_equal(raw_exception(c, fc8, 5), 1);
    /* 03 ILLEGAL DATA VALUE (libmodbus checks these client-side, so raw) */
    static const uint8_t q0[] = {0x03, 0, 0, 0, 0};
    assert_int_equal(raw_exception(c, q0, 5), 3);
    static const uint8_t q126[] = {0x03, 0, 0, 0, 126};
    assert_int_equal(raw_exception(c, q126, 5), 3);
    static const uint8_t coilval[] = {0x05, 0, 0, 0x12, 0x34};
    assert_int_equal(raw_exception(c, coilval, 5), 3);
    static const uint8_t badcount[] = {0x10, 0, 32, 0, 1, 3, 0, 1, 0};
    assert_int_equal(raw_exception(c, badcount, 9), 3);
    /* and a good raw one */
    static const uint8_t good[] = {0x04, 0, 0, 0, 16};
    assert_int_equal(raw_exception(c, good, 5), 0);
    /* nothing read-only changed, the connection still serves */
    read_block(c, hr1);
    for (int i = 1; i < 16; i++)
        assert_int_equal(hr1[i], hr0[i]);
    /* the writable ones work */
    assert_int_equal(modbus_write_register(c, 32, 0xBEEF), 1);
    assert_int_equal(modbus_read_registers(c, 32, 1, v), 1);
    assert_int_equal(v[0], 0xBEEF);
    assert_int_equal(modbus_write_registers(c, 32, 1, w), 1);
    assert_int_equal(modbus_read_registers(c, 32, 1, v), 1);
    assert_int_equal(v[0], 1);
    client_free(c);
    station_stop(&s);
    assert_int_equal(s.st.exceptions, (uint64_t)n_expected_exceptions);
    assert_int_equal(n_expected_exceptions, 56);
    assert_int_equal(s.st.dropped_framing + s.st.dropped_error, 0);
}

static void send_all(int fd, const uint8_t *p, size_t n)
{
    while (n > 0) {
        ssize_t k = send(fd, p, n, MSG_NOSIGNAL);
        if (k <= 0)
            return; /* the server may already have closed it: fine */
        p += k;
        n -= (size_t)k;
    }
}

static void test_garbage(void **state)
{
    station s;
    station_init(&s);
    s.cfg.frame_timeout_ms = 300;
    s.cfg.max_connections = 4;
    station_start(&s);
    modbus_t *b = client(s.port);
    uint16_t hr[16];
    unsigned seed = 12345;
    int framing_drops = 0;
    /* 1. bytes that are not Modbus TCP: each connection dropped, the
     *    other client served in between */
    for (int round = 0; round < 40; round++) {
        int a = raw_connect(s.port);
        uint8_t junk[300];
        size_t n = 7 + (size_t)(rand_r(&seed) % 290);
        for (size_t i = 0; i < n; i++)
            junk[i] = (uint8_t)rand_r(&seed);
        if (round == 39) {               /* a "request" with code 0x83 */
            static const uint8_t x83[] = {0, 9, 0, 0, 0, 3, 1, 0x83, 2};
            memcpy(junk, x83, sizeof x83);
            n = sizeof x83;
        } else if (round % 3 == 0) {     /* bad protocol id */
            junk[2] = (uint8_t)(1 + rand_r(&seed) % 255);
        } else if (round % 3 == 1) {     /* absurd length */
            junk[2] = junk[3] = 0;
            int len = round % 2 ? 255 + rand_r(&seed) % 60000 : rand_r(&seed) % 2;
            junk[4] = (uint8_t)(len >> 8);
            junk[5] = (uint8_t)len;
        } else {                         /* an HTTP request */
            static const char http[] = "GET / HTTP/1.1\r\nHost: plc\r\n\r\n";
            memcpy(junk, http, sizeof http - 1);
            n = sizeof http - 1;
        }
        send_all(a, junk, n);
        if (!closed_by_server(a))
            fail_msg("round %d: garbage connection left open", round);
        close(a);
        framing_drops++;
        read_block(b, hr);
    }
    /* 2. random well-framed requests: one well-formed answer each, with
     *    the transaction id echoed */
    static const uint8_t fcs[] = {0, 1, 2, 3, 4, 5, 6, 7, 8, 15, 16, 17, 22, 23, 43, 65, 99, 127};
    int a = raw_connect(s.port);
    for (int i = 0; i < 300; i++) {
        uint8_t f[260], r[260];
        int plen = 1 + rand_r(&seed) % 12;
        f[0] = (uint8_t)(i >> 8);
        f[1] = (uint8_t)i;
        f[2] = f[3] = 0;
        f[4] = 0;
        f[5] = (uint8_t)(plen + 1);
        f[6] = (uint8_t)rand_r(&seed);
        for (int j = 0; j < plen; j++)
            f[7 + j] = (uint8_t)rand_r(&seed);
        f[7] = fcs[rand_r(&seed) % sizeof fcs];
        if (plen >= 3) { /* keep addresses near the map half the time */
            f[8] = 0;
            if (rand_r(&seed) % 2)
                f[9] = (uint8_t)(rand_r(&seed) % 40);
        }
        if (f[7] == 5 || f[7] == 15) /* never fire the trigger by chance */
            f[9] = (uint8_t)(3 + rand_r(&seed) % 30);
        send_all(a, f, (size_t)(7 + plen));
        ssize_t got = 0, want = 9;
        while (got < want) {
            ssize_t k = recv(a, r + got, sizeof r - (size_t)got, 0);
            if (k <= 0)
                fail_msg("random frame %d (function %d): no answer", i, f[7]);
            got += k;
            if (got >= 6)
                want = 6 + (r[4] << 8 | r[5]);
        }
        assert_int_equal(got, want);
        assert_int_equal(r[0] << 8 | r[1], i);
        assert_int_equal(r[2] | r[3], 0);
        assert_int_equal(r[6], f[6]);
        assert_true(r[7] == f[7] || r[7] == (f[7] | 0x80));
        if (i % 25 == 0)
            read_block(b, hr);
    }
    close(a);
    /* 3. two requests in one segment, and one split across segments */
    a = raw_connect(s.port);
    uint8_t two[24] = {0, 1, 0, 0, 0, 6, 1, 3, 0, 0, 0, 1,
                       0, 2, 0, 0, 0, 6, 1, 4, 0, 1, 0, 1};
    send_all(a, two, sizeof two);
    uint8_t r2[22];
    ssize_t got = 0;
    while (got < 22) {
        ssize_t k = recv(a, r2 + got, sizeof r2 - (size_t)got, 0);
        if (k <= 0)
            fail_msg("pipelined requests: answers missing");
        got += k;
    }
    assert_int_equal(r2[1], 1);
    assert_int_equal(r2[7], 3);
    assert_int_equal(r2[12], 2);
    assert_int_equal(r2[18], 4);
    /* 4. a client stalled mid-frame holds up nobody and is dropped */
    send_all(a, two, 3);
    double t0 = now_s();
    for (int i = 0; i < 20; i++) {
        double t1 = now_s();
        read_block(b, hr);
        assert_true(now_s() - t1 < 0.25);
    }
    assert_true(closed_by_server(a));
    assert_true(now_s() - t0 > 0.25); /* not before the frame timeout */
    close(a);
    read_block(b, hr);
    client_free(b);
    station_stop(&s);
    assert_int_equal(s.st.dropped_framing, (uint64_t)framing_drops);
    assert_int_equal(s.st.dropped_timeout, 1);
    assert_true(s.st.requests + s.st.exceptions >= 300);
}

static void test_max_connections(void **state)
{
    station s;
    station_init(&s);
    s.cfg.max_connections = 2;
    station_start(&s);
    uint16_t hr[16];
    modbus_t *c1 = client(s.port), *c2 = client(s.port);
    read_block(c1, hr);
    read_block(c2, hr);
    int c3 = raw_connect(s.port); /* the kernel accepts; the station refuses */
    assert_true(closed_by_server(c3));
    close(c3);
    read_block(c1, hr); /* the two keep working */
    read_block(c2, hr);
    client_free(c1);
    /* a slot frees up once the station has seen c1 go */
    int served = 0;
    double t0 = now_s();
    while (!served && now_s() - t0 < 2.0) {
        modbus_t *c4 = client(s.port);
        modbus_set_response_timeout(c4, 0, 300000);
        served = modbus_read_registers(c4, 0, 16, hr) == 16;
        client_free(c4);
    }
    assert_true(served);
    client_free(c2);
    station_stop(&s);
    assert_true(s.st.refused_full >= 1);
    assert_true(s.st.accepted >= 3);
}

static void test_idle_timeout(void **state)
{
    station s;
    station_init(&s);
    s.cfg.idle_timeout_ms = 200;
    station_start(&s);
    int a = raw_connect(s.port);
    double t0 = now_s();
    assert_true(closed_by_server(a)); /* silent: closed after ~200 ms */
    double dt = now_s() - t0;
    assert_true(dt > 0.15 && dt < 2.0);
    close(a);
    /* a client that keeps talking stays */
    modbus_t *c = client(s.port);
    uint16_t hr[16];
    for (int i = 0; i < 8; i++) {
        read_block(c, hr);
        struct timespec ts = {0, 50 * 1000000L};
        nanosleep(&ts, NULL);
    }
    client_free(c);
    station_stop(&s);
    assert_int_equal(s.st.dropped_timeout, 1);
}

static int ipv6_loopback(void)
{
    int fd = socket(AF_INET6, SOCK_STREAM, 0);
    if (fd < 0)
        return 0;
    struct sockaddr_in6 a = {.sin6_family = AF_INET6, .sin6_addr = IN6ADDR_LOOPBACK_INIT};
    int ok = bind(fd, (struct sockaddr *)&a, sizeof a) == 0;
    close(fd);
    return ok;
}

static void test_allow_list(void **state)
{
    station s;
    uint16_t hr[16];
    /* not on the list: refused at once */
    station_init(&s);
    s.cfg.n_allow = 2;
    strcpy(s.cfg.allow[0], "10.9.8.0/24");
    strcpy(s.cfg.allow[1], "fd00::/8");
    station_start(&s);
    int a = raw_connect(s.port);
    assert_true(closed_by_server(a));
    close(a);
    station_stop(&s);
    assert_int_equal(s.st.refused_allow, 1);
    assert_int_equal(s.st.accepted, 0);
    /* on the list: served */
    station_init(&s);
    s.cfg.n_allow = 2;
    strcpy(s.cfg.allow[0], "192.0.2.1");
    strcpy(s.cfg.allow[1], "127.0.0.0/8");
    station_start(&s);
    modbus_t *c = client(s.port);
    read_block(c, hr);
    client_free(c);
    station_stop(&s);
    assert_int_equal(s.st.refused_allow, 0);
    if (!ipv6_loopback()) {
        print_message("no IPv6 loopback here: IPv6 allow-list cases skipped\n");
        return;
    }
    /* IPv6 listener and client */
    station_init(&s);
    strcpy(s.cfg.bind_addr, "::1");
    s.cfg.n_allow = 1;
    strcpy(s.cfg.allow[0], "::1");
    station_start(&s);
    c = client_at("::1", s.port);
    read_block(c, hr);
    client_free(c);
    station_stop(&s);
    assert_int_equal(s.st.refused_allow, 0);
    /* dual-stack listener: an IPv4 client matches an IPv4 entry */
    station_init(&s);
    strcpy(s.cfg.bind_addr, "::");
    s.cfg.n_allow = 1;
    strcpy(s.cfg.allow[0], "127.0.0.1");
    station_start(&s);
    c = client(s.port);
    read_block(c, hr);
    client_free(c);
    c = client_at("::1", s.port); /* ::1 is not 127.0.0.1 */
    modbus_set_response_timeout(c, 0, 500000);
    assert_int_equal(modbus_read_registers(c, 0, 16, hr), -1);
    client_free(c);
    station_stop(&s);
    assert_int_equal(s.st.refused_allow, 1);
}

static void test_port_in_use(void **state)
{
    station s;
    station_init(&s);
    station_start(&s);
    mb_plc_config cfg;
    mb_plc_config_default(&cfg);
    cfg.port = s.port;
    mb_plc *p = NULL;
    char err[MB_ERR_LEN] = "";
    assert_int_equal(mb_plc_open(&cfg, 0, &p, err), MB_EIO);
    assert_null(p);
    char port[16];
    snprintf(port, sizeof port, "%d", s.port);
    assert_non_null(strstr(err, "127.0.0.1"));
    assert_non_null(strstr(err, port));
    station_stop(&s);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_read_map),
        cmocka_unit_test(test_handshake),
        cmocka_unit_test(test_exceptions),
        cmocka_unit_test(test_garbage),
        cmocka_unit_test(test_max_connections),
        cmocka_unit_test(test_idle_timeout),
        cmocka_unit_test(test_allow_list),
        cmocka_unit_test(test_port_in_use),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
