/*
 * io/plc_map.c - the PLC register map, the handshake state machine and the
 * request check. Pure: no sockets, no clock (the caller ticks the
 * heartbeat), so every rule here is unit-tested without a network.
 *
 * Request rules follow the Modbus Application Protocol Specification
 * V1.1b3: section 6 gives for each function the order of checks
 * (function code -> 01, quantity -> 03, address -> 02) and the quantity
 * limits (read coils 1..2000, read registers 1..125, write multiple coils
 * 1..1968 with byte count N = ceil(quantity / 8), write multiple registers
 * 1..123 with byte count 2 x quantity, write single coil value 0x0000 or
 * 0xFF00).
 */
#include "plc_map.h"

#include "error.h"

#include <math.h>
#include <string.h>

static uint16_t clamp16(int v)
{
    if (v < 0)
        return 0;
    if (v > 0xFFFF)
        return 0xFFFF;
    return (uint16_t)v;
}

uint16_t mb_plc_gauge_word(double mm)
{
    if (isnan(mm))
        return MB_PLC_GAUGE_NONE;
    double v = nearbyint(mm * 100.0);
    if (v > 32767.0)
        v = 32767.0;
    if (v < -32767.0)
        v = -32767.0;
    /* two's complement of a value in -32767..32767 */
    return (uint16_t)(int16_t)v;
}

uint16_t mb_plc_cycle_word(double ms)
{
    if (!(ms > 0.0)) /* also NaN */
        return 0;
    double v = nearbyint(ms * 10.0);
    return v >= 65535.0 ? 0xFFFF : (uint16_t)v;
}

void mb_plc_split32(uint32_t v, uint16_t out[2])
{
    out[0] = (uint16_t)(v >> 16);
    out[1] = (uint16_t)(v & 0xFFFFu);
}

void mb_plc_map_pack(mb_plc_map *m)
{
    unsigned st = m->flags & MB_PLC_ST_STATION;
    if (m->state == MB_PLC_BUSY)
        st |= MB_PLC_ST_BUSY;
    if (m->state == MB_PLC_RESULT)
        st |= MB_PLC_ST_VALID;
    if (m->verdict == MB_PLC_PASS)
        st |= MB_PLC_ST_PASS;
    if (m->verdict == MB_PLC_REJECT || m->verdict == MB_PLC_FAULT)
        st |= MB_PLC_ST_REJECT;
    if (m->station_fault)
        st |= MB_PLC_ST_FAULT;
    uint16_t *b = m->block;
    b[MB_PLC_REG_HEARTBEAT] = m->heartbeat;
    b[MB_PLC_REG_STATUS] = (uint16_t)st;
    b[MB_PLC_REG_SEQUENCE] = m->sequence;
    b[MB_PLC_REG_VERDICT] = (uint16_t)m->verdict;
    b[MB_PLC_REG_REASON] = m->reason;
    b[MB_PLC_REG_SLOT] = m->slot;
    mb_plc_split32(m->parts, &b[MB_PLC_REG_PARTS_HI]);
    mb_plc_split32(m->rejects, &b[MB_PLC_REG_REJECTS_HI]);
    b[MB_PLC_REG_CYCLE] = m->cycle;
    b[MB_PLC_REG_FAULT] = m->station_fault ? m->station_fault : m->result_fault;
    for (int i = 0; i < MB_PLC_N_GAUGES; i++)
        b[MB_PLC_REG_GAUGE0 + i] = m->gauge[i];
}

void mb_plc_map_init(mb_plc_map *m, int slot)
{
    memset(m, 0, sizeof *m);
    m->state = MB_PLC_IDLE;
    m->verdict = MB_PLC_NONE;
    m->slot = clamp16(slot);
    m->req_slot = m->slot;
    for (int i = 0; i < MB_PLC_N_GAUGES; i++)
        m->gauge[i] = MB_PLC_GAUGE_NONE;
    mb_plc_map_pack(m);
}

void mb_plc_map_heartbeat(mb_plc_map *m)
{
    m->heartbeat = (uint16_t)(m->heartbeat + 1u);
    mb_plc_map_pack(m);
}

int mb_plc_map_take_trigger(mb_plc_map *m)
{
    if (!m->coil[MB_PLC_COIL_TRIGGER] || m->state == MB_PLC_BUSY)
        return 0;
    m->coil[MB_PLC_COIL_TRIGGER] = 0;
    m->state = MB_PLC_BUSY;
    mb_plc_map_pack(m);
    return 1;
}

int mb_plc_map_publish(mb_plc_map *m, const mb_plc_result *r)
{
    int rc = MB_OK;
    mb_plc_verdict v = r ? r->verdict : MB_PLC_NONE;
    if (v != MB_PLC_PASS && v != MB_PLC_REJECT && v != MB_PLC_FAULT) {
        /* Fail-safe: whatever this was, it is not a pass. */
        v = MB_PLC_FAULT;
        rc = MB_EINVAL;
    }
    m->verdict = v;
    if (rc == MB_OK) {
        m->reason = v == MB_PLC_PASS ? 0 : clamp16(r->reason);
        m->cycle = mb_plc_cycle_word(r->cycle_ms);
        int ng = r->n_gauges < 0 ? 0 : r->n_gauges;
        for (int i = 0; i < MB_PLC_N_GAUGES; i++)
            m->gauge[i] = i < ng ? mb_plc_gauge_word(r->gauge_dev_mm[i])
                                 : MB_PLC_GAUGE_NONE;
        m->result_fault = 0;
        if (v == MB_PLC_FAULT)
            m->result_fault = r->fault_code > 0 ? clamp16(r->fault_code)
                                                : MB_PLC_FAULT_BAD_RESULT;
    } else {
        m->reason = 0;
        m->cycle = r ? mb_plc_cycle_word(r->cycle_ms) : 0;
        for (int i = 0; i < MB_PLC_N_GAUGES; i++)
            m->gauge[i] = MB_PLC_GAUGE_NONE;
        m->result_fault = MB_PLC_FAULT_BAD_RESULT;
    }
    m->sequence = (uint16_t)(m->sequence + 1u);
    m->parts++;
    if (v != MB_PLC_PASS)
        m->rejects++;
    m->state = MB_PLC_RESULT;
    mb_plc_map_pack(m);
    return rc;
}

unsigned mb_plc_map_apply_writes(mb_plc_map *m, int slot_written)
{
    unsigned ev = 0;
    if (m->coil[MB_PLC_COIL_ACK]) {
        m->coil[MB_PLC_COIL_ACK] = 0;
        /* An acknowledge only ends a result that is valid; one that comes
         * late (after the next trigger) must not hide the next result. */
        if (m->state == MB_PLC_RESULT) {
            m->state = MB_PLC_IDLE;
            ev |= MB_PLC_EV_ACK;
        }
    }
    if (m->coil[MB_PLC_COIL_RESET]) {
        m->coil[MB_PLC_COIL_RESET] = 0;
        m->parts = 0;
        m->rejects = 0;
        m->reset_pending = 1;
        ev |= MB_PLC_EV_RESET;
    }
    if (slot_written) {
        m->slot_pending = 1;
        ev |= MB_PLC_EV_SLOT;
    }
    if (m->coil[MB_PLC_COIL_TRIGGER])
        ev |= MB_PLC_EV_TRIGGER;
    mb_plc_map_pack(m);
    return ev;
}

int mb_plc_map_set_status(mb_plc_map *m, unsigned bits, int on)
{
    if (bits & ~(unsigned)MB_PLC_ST_STATION)
        return MB_EINVAL;
    if (on)
        m->flags |= bits;
    else
        m->flags &= ~bits;
    mb_plc_map_pack(m);
    return MB_OK;
}

void mb_plc_map_set_fault(mb_plc_map *m, int code)
{
    m->station_fault = clamp16(code);
    mb_plc_map_pack(m);
}

void mb_plc_map_set_slot(mb_plc_map *m, int slot)
{
    m->slot = clamp16(slot);
    mb_plc_map_pack(m);
}

void mb_plc_map_set_counters(mb_plc_map *m, uint32_t parts, uint32_t rejects)
{
    m->parts = parts;
    m->rejects = rejects;
    mb_plc_map_pack(m);
}

/* ---- request check ---- */

static int be16(const uint8_t *p)
{
    return (p[0] << 8) | p[1];
}

/* Is [addr, addr + n) inside the readable holding registers: the block
 * (0-15) or register 32? A range across the gap is refused: 16-31 are not
 * in the map. */
static int holding_readable(int addr, int n)
{
    return (addr + n <= MB_PLC_BLOCK_LEN) ||
           (addr == MB_PLC_REG_REQ_SLOT && n == 1);
}

int mb_plc_check_request(const uint8_t *pdu, int len)
{
    if (!pdu || len < 1)
        return 1;
    int fc = pdu[0];
    int addr = len >= 3 ? be16(pdu + 1) : 0;
    int n = len >= 5 ? be16(pdu + 3) : 0;
    switch (fc) {
    case 0x01: /* read coils */
        if (len != 5 || n < 1 || n > 2000)
            return 3;
        return addr + n <= MB_PLC_N_COILS ? 0 : 2;
    case 0x03: /* read holding registers */
        if (len != 5 || n < 1 || n > 125)
            return 3;
        return holding_readable(addr, n) ? 0 : 2;
    case 0x04: /* read input registers */
        if (len != 5 || n < 1 || n > 125)
            return 3;
        return addr + n <= MB_PLC_BLOCK_LEN ? 0 : 2;
    case 0x05: /* write single coil: value 0x0000 or 0xFF00 */
        if (len != 5 || (n != 0x0000 && n != 0xFF00))
            return 3;
        return addr < MB_PLC_N_COILS ? 0 : 2;
    case 0x06: /* write single register: any value */
        if (len != 5)
            return 3;
        return addr == MB_PLC_REG_REQ_SLOT ? 0 : 2;
    case 0x0F: { /* write multiple coils */
        if (len < 6 || n < 1 || n > 0x07B0)
            return 3;
        int bc = pdu[5];
        if (bc != (n + 7) / 8 || len != 6 + bc)
            return 3;
        return addr + n <= MB_PLC_N_COILS ? 0 : 2;
    }
    case 0x10: { /* write multiple registers */
        if (len < 6 || n < 1 || n > 0x007B)
            return 3;
        int bc = pdu[5];
        if (bc != 2 * n || len != 6 + bc)
            return 3;
        return addr == MB_PLC_REG_REQ_SLOT && n == 1 ? 0 : 2;
    }
    default:
        return 1;
    }
}
