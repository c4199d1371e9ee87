/* tests/fuzz/fuzz_plc_request.c - libFuzzer target for the PLC link's
   request path in server mode (io/plc_server.c framing, io/plc_map.c
   checks, libmodbus replies): each input is a byte stream sent on a fresh
   loopback connection to a live mb_plc. Must hold: no sanitizer report,
   every reply is a well-formed Modbus TCP frame (protocol id 0, length
   2..254 - Modbus Messaging on TCP/IP Implementation Guide V1.0b, section
   3.1.3), the server keeps listening, and register 3 never shows a pass
   the station did not publish (the first input byte picks the verdicts the
   fake station publishes, including invalid ones). */
#include "error.h"
#include "plc.h"

#include <arpa/inet.h>
#include <errno.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <poll.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>
#include <sys/socket.h>
#include <unistd.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static mb_plc *plc;
static int last_verdict = MB_PLC_NONE;

static void act(uint8_t pick)
{
    int slot;
    mb_plc_take_slot_request(plc, &slot);
    mb_plc_take_counter_reset(plc);
    if (mb_plc_take_trigger(plc)) {
        mb_plc_result r;
        memset(&r, 0, sizeof r);
        r.verdict = (mb_plc_verdict)(pick % 5); /* 0 and 4 are invalid */
        r.reason = pick;
        r.n_gauges = pick % 6;
        r.gauge_dev_mm[0] = pick * 3.7 - 400.0;
        int rc = mb_plc_publish(plc, &r);
        last_verdict = rc == 0 ? (int)r.verdict : MB_PLC_FAULT;
    }
}

/* Connect without blocking: libFuzzer's -timeout watchdog raises SIGALRM
   every timeout/2 + 1 s, and a blocking connect() it interrupts fails with
   EINTR (connect is not restarted). Returns 0 when connected. */
static int connect_loopback(int fd, const struct sockaddr_in *a)
{
    fcntl(fd, F_SETFL, fcntl(fd, F_GETFL) | O_NONBLOCK);
    if (connect(fd, (const struct sockaddr *)a, sizeof *a) == 0)
        return 0;
    if (errno != EINPROGRESS && errno != EINTR)
        return -1;
    struct pollfd p = {.fd = fd, .events = POLLOUT};
    int rc;
    do
        rc = poll(&p, 1, 5000);
    while (rc < 0 && errno == EINTR);
    int soerr = 0;
    socklen_t sl = sizeof soerr;
    if (rc != 1 || getsockopt(fd, SOL_SOCKET, SO_ERROR, &soerr, &sl) < 0)
        return -1;
    return soerr == 0 ? 0 : -1;
}

/* Check every complete reply in buf; returns the bytes consumed. */
static size_t replies(const uint8_t *buf, size_t n)
{
    size_t off = 0;
    while (n - off >= 7) {
        const uint8_t *f = buf + off;
        int len = f[4] << 8 | f[5];
        MB_ASSERT((f[2] | f[3]) == 0);
        MB_ASSERT(len >= 2 && len <= 254);
        if (n - off < (size_t)(6 + len))
            break;
        off += (size_t)(6 + len);
    }
    return off;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (!plc) {
        mb_plc_config cfg;
        mb_plc_config_default(&cfg);
        cfg.port = 0;
        cfg.frame_timeout_ms = 60000;
        char err[MB_ERR_LEN];
        MB_ASSERT(mb_plc_open(&cfg, mb_plc_now_ms(), &plc, err) == 0);
        mb_plc_set_status(plc, MB_PLC_ST_READY, 1);
    }
    uint8_t pick = size ? data[0] : 0;
    int fd = socket(AF_INET, SOCK_STREAM, 0);
    MB_ASSERT(fd >= 0);
    struct sockaddr_in a = {.sin_family = AF_INET,
                            .sin_port = htons((uint16_t)mb_plc_port(plc))};
    a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    MB_ASSERT(connect_loopback(fd, &a) == 0);
    static uint8_t in[1 << 16];
    size_t have = 0, sent = 0;
    int closed = 0, quiet = 0;
    for (int round = 0; round < 400 && quiet < 3; round++) {
        if (sent < size && !closed) {
            ssize_t k = send(fd, data + sent, size - sent, MSG_NOSIGNAL);
            if (k > 0)
                sent += (size_t)k;
            else if (k < 0 && errno != EAGAIN && errno != EINTR)
                closed = 1;
        }
        mb_plc_service(plc, mb_plc_now_ms());
        act(pick);
        ssize_t k = recv(fd, in + have, sizeof in - have, 0);
        if (k > 0) {
            have += (size_t)k;
            size_t used = replies(in, have);
            memmove(in, in + used, have - used);
            have -= used;
            quiet = 0;
        } else if (k == 0 || (k < 0 && errno != EAGAIN && errno != EINTR)) {
            closed = 1; /* the server dropped us: garbage framing */
            quiet++;
        } else if (sent == size || closed) {
            quiet++;
        }
    }
    mb_plc_map m;
    mb_plc_get_map(plc, &m);
    MB_ASSERT(m.block[3] != MB_PLC_PASS || last_verdict == MB_PLC_PASS);
    MB_ASSERT(!(m.block[1] & MB_PLC_ST_PASS) || m.block[3] == MB_PLC_PASS);
    /* close with a reset, not FIN: a normal close leaves this side's port
       in TIME_WAIT, and tens of thousands of inputs would use up the
       ephemeral ports (connect then fails for reasons not the server's) */
    struct linger lg = {1, 0};
    setsockopt(fd, SOL_SOCKET, SO_LINGER, &lg, sizeof lg);
    close(fd);
    /* let the server see the close so the connection slot frees */
    for (int i = 0; i < 200 && mb_plc_connected(plc) > 0; i++)
        mb_plc_service(plc, mb_plc_now_ms());
    return 0;
}
