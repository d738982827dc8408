/* tt_core_check.c - host-side driver of the portable firmware core (firmware/core/).
 *
 *   tt_core_check unit     run the C unit checks; prints "ok N checks" or the failures
 *   tt_core_check encode   stdin lines "NAME SEQ V1 V2 ..." (fields in catalogue order,
 *                          samples values last) -> wire bytes as hex, one line each
 *   tt_core_check decode   stdin lines of wire hex (one body + 0x00 each) -> "ok TYPE SEQ
 *                          PAYLOADHEX" or "err KIND [TYPE SEQ]", then the board's answer
 *                          "reply TYPE SEQ ERROR ACTION" (idle state) or "noreply"
 *   tt_core_check roundtrip FILE...   each file one valid wire frame: decode, re-encode with
 *                          the C encoder, require the same bytes
 *   tt_core_check reject FILE...      each file one invalid wire frame: require a rejection
 *
 * Built with -Wall -Wextra -Werror -fsanitize=address,undefined by `make -C firmware test`;
 * the pytest suite (tests/test_firmware_core.py) drives it with protocol/vectors. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "tt_adc.h"
#include "tt_blocks.h"
#include "tt_clock.h"
#include "tt_cobs.h"
#include "tt_command.h"
#include "tt_crc.h"
#include "tt_frame.h"
#include "tt_health.h"
#include "tt_messages.h"
#include "tt_protocol_defs.h"
#include "tt_rx.h"
#include "tt_tachq.h"

static int checks, failures;

#define CHECK(cond)                                                                  \
    do {                                                                             \
        checks++;                                                                    \
        if (!(cond)) {                                                               \
            failures++;                                                              \
            fprintf(stderr, "%s:%d: check failed: %s\n", __FILE__, __LINE__, #cond); \
        }                                                                            \
    } while (0)

static const struct tt_limits board_limits = {
    TT_LIMIT_BOARD_TICK_HZ_MIN, TT_LIMIT_RATE_HZ_MIN, TT_LIMIT_RATE_HZ_MAX,
    TT_LIMIT_CHANNELS_MAX, TT_LIMIT_PERIOD_TICKS_MIN};

/* ---------------- unit checks ---------------- */

static void unit_crc(void)
{
    /* CRC catalogue (Greg Cook, "Catalogue of parametrised CRC algorithms"),
     * CRC-16/IBM-3740: check = 0x29B1 for ASCII "123456789". */
    const char *s = "123456789";
    CHECK(tt_crc16((const uint8_t *)s, 9) == 0x29B1u);
    CHECK(tt_crc16((const uint8_t *)s, 9) == TT_CRC_CHECK);
    CHECK(tt_crc16((const uint8_t *)s, 0) == 0xFFFFu); /* init, empty input */
}

static void unit_cobs(void)
{
    /* Examples of Cheshire & Baker (1999) as listed for COBS: 00 -> 01 01; 11 22 00 33 ->
     * 03 11 22 02 33; 254 non-zero bytes -> FF + data (no trailing 01, as the host codec). */
    uint8_t in[300], enc[320], ring[256];
    size_t n;
    int d, i, len;
    uint8_t head, w;
    in[0] = 0;
    n = tt_cobs_encode(in, 1, enc);
    CHECK(n == 2 && enc[0] == 1 && enc[1] == 1);
    in[0] = 0x11; in[1] = 0x22; in[2] = 0; in[3] = 0x33;
    n = tt_cobs_encode(in, 4, enc);
    CHECK(n == 5 && enc[0] == 3 && enc[1] == 0x11 && enc[2] == 0x22 && enc[3] == 2 && enc[4] == 0x33);
    for (i = 0; i < 254; i++) in[i] = (uint8_t)(i + 1);
    n = tt_cobs_encode(in, 254, enc);
    CHECK(n == 255 && enc[0] == 0xFF);
    d = tt_cobs_decode(enc, n);
    CHECK(d == 254 && memcmp(enc, in, 254) == 0);
    /* round trips of pseudo-random data, linear and into the ring at every offset */
    srand(1234);
    for (len = 0; len < 200; len += 7) {
        for (i = 0; i < len; i++) in[i] = (uint8_t)((rand() % 3 == 0) ? 0 : rand());
        n = tt_cobs_encode(in, (size_t)len, enc);
        CHECK(n <= TT_COBS_MAX_ENCODED((size_t)len));
        CHECK(memchr(enc, 0, n) == NULL);
        head = (uint8_t)(len * 37);
        w = tt_cobs_encode_ring(in, (uint8_t)len, ring, head);
        CHECK(w == n + 1u);
        for (i = 0; i < (int)n; i++) CHECK(ring[(uint8_t)(head + i)] == enc[i]);
        CHECK(ring[(uint8_t)(head + n)] == 0);
        d = tt_cobs_decode(enc, n);
        CHECK(d == len && memcmp(enc, in, (size_t)len) == 0);
    }
    enc[0] = 5; enc[1] = 1; enc[2] = 2;
    CHECK(tt_cobs_decode(enc, 3) == -1); /* block past the end */
    enc[0] = 3; enc[1] = 0; enc[2] = 2;
    CHECK(tt_cobs_decode(enc, 3) == -1); /* zero inside */
}

static void unit_clock(void)
{
    CHECK(tt_extend_ticks(0, 5, 0) == 5u);
    CHECK(tt_extend_ticks(7, 0xFFF0u, 1) == 0x0007FFF0u); /* captured just before the wrap */
    CHECK(tt_extend_ticks(7, 0x0003u, 1) == 0x00080003u); /* just after, overflow not counted */
    CHECK(tt_extend_ticks(7, 0x0003u, 0) == 0x00070003u);
    CHECK(tt_extend_ticks(0xFFFFu, 0x0001u, 1) == 0x00000001u); /* 32-bit wrap */
}

static void unit_blocks(void)
{
    static struct tt_blocks r;
    const struct tt_block *b;
    uint32_t i, expect_first = 0, got = 0;
    CHECK(tt_blocks_len_for(4000, 2) == 40u);
    CHECK(tt_blocks_len_for(1000, 1) == 20u);
    CHECK(tt_blocks_len_for(100, 1) == 2u);
    CHECK(tt_blocks_len_for(100, 2) == 4u);
    CHECK(tt_blocks_len_for(150, 2) == 6u);
    CHECK(tt_blocks_len_for(5000, 2) == 40u);
    CHECK(tt_blocks_len_for(25, 2) == 2u);
    r.dropped = 0;
    tt_blocks_reset(&r, 6);
    CHECK(tt_blocks_peek(&r) == NULL);
    /* fill with no reader: TT_BLOCK_COUNT - 1 blocks wait, later ones are dropped whole */
    for (i = 0; i < 6u * (TT_BLOCK_COUNT + 3u); i++) tt_blocks_put(&r, (uint16_t)i);
    CHECK(r.dropped == 6u * 4u);
    for (i = 0; i < TT_BLOCK_COUNT - 1u; i++) {
        b = tt_blocks_peek(&r);
        CHECK(b != NULL && b->first_index == 6u * i && b->samples[5] == 6u * i + 5u);
        tt_blocks_release(&r);
    }
    CHECK(tt_blocks_peek(&r) == NULL);
    /* the block being filled restarted at the next whole block: the gap is exactly `dropped` */
    for (i = 0; i < 6u; i++) tt_blocks_put(&r, 1);
    b = tt_blocks_peek(&r);
    CHECK(b != NULL && b->first_index == 6u * (TT_BLOCK_COUNT - 1u) + r.dropped);
    tt_blocks_release(&r);
    /* steady producer/consumer: no drops, indices contiguous */
    r.dropped = 0;
    tt_blocks_reset(&r, 40);
    for (i = 0; i < 100000u; i++) {
        tt_blocks_put(&r, (uint16_t)(i & 1023u));
        if (i % 17u == 0u) {
            while ((b = tt_blocks_peek(&r)) != NULL) {
                if (b->first_index != expect_first) failures++;
                expect_first += 40u;
                got++;
                tt_blocks_release(&r);
            }
        }
    }
    while ((b = tt_blocks_peek(&r)) != NULL) {
        got++;
        tt_blocks_release(&r);
    }
    CHECK(r.dropped == 0u && got == 100000u / 40u);
}

/* The ADC trigger stepping of tt_adc.h with the sample ring, against a model of the timer:
 * conversion k is triggered when the 16-bit count reaches OCR1B; its interrupt runs after a
 * random latency (sometimes longer than a whole period) and writes OCR1B for the next one.
 * Every sample kept must sit at index (trigger - start) / period exactly, the indices in the
 * blocks must be gap-free except where `dropped` says, and each skip ends at a set start. */
static void unit_adc_step(void)
{
    static struct tt_blocks r;
    const struct tt_block *b;
    uint16_t d, skipped;
    uint32_t trig, now32, start = 60000u, idx = 0, held = 0, seen = 0, expect_first = 0;
    uint32_t gaps = 0, events = 0, period, k, late = 0;
    uint8_t channels, mask;
    /* already ahead: nothing skipped */
    d = 1000u;
    CHECK(tt_adc_step(&d, 900u, 250u, 3u, 1u, 16u) == 0u && d == 1000u);
    /* too close (inside the lead), one channel: one skipped */
    d = 1000u;
    CHECK(tt_adc_step(&d, 990u, 250u, 3u, 0u, 16u) == 1u && d == 1250u);
    /* passed, two channels, next index odd: skip to the next even index */
    d = 1000u;
    CHECK(tt_adc_step(&d, 1100u, 250u, 3u, 1u, 16u) == 1u && d == 1250u);
    /* passed, two channels, next index even: a whole set (2) */
    d = 1000u;
    CHECK(tt_adc_step(&d, 1100u, 250u, 4u, 1u, 16u) == 2u && d == 1500u);
    /* across the timer wrap */
    d = 0xFFF0u;
    CHECK(tt_adc_step(&d, 0x0010u, 0x100u, 0u, 1u, 16u) == 2u && d == 0x01F0u);
    for (channels = 1; channels <= 2; channels++) {
        mask = (uint8_t)(channels - 1u);
        period = channels == 1 ? 500u : 250u;
        r.dropped = 0;
        tt_blocks_reset(&r, (uint8_t)(20u * channels));
        srand(99u + channels);
        trig = start;        /* 32-bit trigger time of conversion idx */
        idx = 0;
        held = 0;
        expect_first = 0;
        gaps = 0;
        seen = 0;
        late = 0;
        for (k = 0; k < 200000u; k++) {
            uint32_t latency = 20u + (uint32_t)(rand() % 60);
            if (rand() % 500 == 0) latency += (uint32_t)(rand() % 2000); /* a stalled handler */
            now32 = trig + 108u + latency;  /* conversion done after 108 ticks, then the ISR */
            /* the sample of conversion idx carries its trigger time as its value (mod 2^16) */
            tt_blocks_put(&r, (uint16_t)trig);
            d = (uint16_t)(trig + period);
            skipped = tt_adc_step(&d, (uint16_t)now32, (uint16_t)period, (uint8_t)(r.next_index & mask), mask,
                                  TT_ADC_LEAD_TICKS);
            if (skipped) {
                tt_blocks_skip(&r, skipped);
                late++;
                if ((r.next_index & mask) != 0u) failures++;
            }
            idx = r.next_index;
            trig = trig + period * (1u + skipped);
            if ((uint16_t)(d) != (uint16_t)trig || (int32_t)(trig - now32) < (int32_t)TT_ADC_LEAD_TICKS)
                failures++;
            while ((b = tt_blocks_peek(&r)) != NULL) {
                uint8_t j;
                if (b->first_index != expect_first) gaps += b->first_index - expect_first;
                for (j = 0; j < r.block_len; j++) {
                    /* SPEC 4.4: tick = start_tick + index * period_ticks */
                    if (b->samples[j] != (uint16_t)(start + (b->first_index + j) * period)) failures++;
                    seen++;
                }
                if (b->first_index % channels) failures++;
                expect_first = b->first_index + r.block_len;
                tt_blocks_release(&r);
            }
            held = r.fill;
        }
        events += late;
        /* every index not delivered is counted as dropped (the filling block is in flight) */
        CHECK(gaps == r.dropped); /* (the last skip came before the last block sent) */
        CHECK(seen + r.dropped + held == idx);
        CHECK(late > 0u);
    }
    CHECK(events > 100u);
}

static void unit_tachq(void)
{
    static struct tt_tachq q;
    const struct tt_tach_event *e;
    uint32_t i;
    memset(&q, 0, sizeof q);
    for (i = 0; i < TT_TACHQ_LEN + 2u; i++) tt_tachq_put(&q, 1000u * i);
    CHECK(q.edges_total == TT_TACHQ_LEN + 2u && q.dropped == 3u); /* one slot stays empty */
    e = tt_tachq_peek(&q);
    CHECK(e != NULL && e->tick == 0u && e->edge_count == 1u);
    for (i = 0; i < TT_TACHQ_LEN - 1u; i++) tt_tachq_release(&q);
    CHECK(tt_tachq_peek(&q) == NULL);
    tt_tachq_put(&q, 5);
    e = tt_tachq_peek(&q);
    CHECK(e != NULL && e->edge_count == TT_TACHQ_LEN + 3u); /* the gap shows in edge_count */
    /* hold-off: 1/16 of the last period, within 100 us .. 15 ms at 2 MHz */
    CHECK(tt_tach_holdoff_ticks(33898u) == 2118u);     /* 3540 rpm: 16.9 ms -> 1.06 ms */
    CHECK(tt_tach_holdoff_ticks(1000u) == 200u);       /* 120000 rpm: floor 100 us */
    CHECK(tt_tach_holdoff_ticks(4000000u) == 30000u);  /* 30 rpm: cap 15 ms */
    CHECK(tt_tach_holdoff_ticks(0xFFFFFFFFu) == 30000u); /* first edge after reset */
}

static void unit_rx(void)
{
    uint8_t buf[8];
    struct tt_rx rx;
    int i;
    tt_rx_init(&rx, buf, sizeof buf);
    CHECK(tt_rx_byte(&rx, 0) == TT_RX_MORE); /* empty body ignored */
    CHECK(tt_rx_byte(&rx, 5) == TT_RX_MORE);
    CHECK(tt_rx_byte(&rx, 0) == TT_RX_BODY && rx.len == 1 && buf[0] == 5);
    tt_rx_done(&rx);
    for (i = 0; i < 8; i++) CHECK(tt_rx_byte(&rx, 1) == TT_RX_MORE);
    CHECK(tt_rx_byte(&rx, 1) == TT_RX_TOO_LONG);
    CHECK(tt_rx_byte(&rx, 1) == TT_RX_MORE);
    CHECK(tt_rx_byte(&rx, 0) == TT_RX_MORE); /* end of the skipped body */
    CHECK(tt_rx_byte(&rx, 7) == TT_RX_MORE);
    CHECK(tt_rx_byte(&rx, 0) == TT_RX_BODY && rx.len == 1 && buf[0] == 7);
}

/* Encode a host command, decode it as the board would, and parse it in a state. */
static struct tt_command board_answer(size_t raw_len, uint8_t *raw, uint8_t state, uint8_t *replied)
{
    uint8_t wire[300];
    struct tt_frame f;
    struct tt_command cmd;
    size_t n = tt_frame_wire(raw, raw_len, wire);
    enum tt_frame_status st = tt_frame_decode(wire, n - 1u, &f);
    memset(&cmd, 0, sizeof cmd);
    *replied = tt_command_parse(st, &f, state, &board_limits, &cmd);
    return cmd;
}

static void unit_commands(void)
{
    uint8_t raw[300], replied;
    struct tt_command c;
    struct tt_configure cfg;
    struct tt_setup s;
    /* state rules */
    c = board_answer(tt_msg_empty(raw, TT_MSG_START, 1), raw, TT_STATE_IDLE, &replied);
    CHECK(replied && c.error == TT_ERR_OK && c.action == TT_ACT_START && c.seq == 1);
    c = board_answer(tt_msg_empty(raw, TT_MSG_START, 2), raw, TT_STATE_STREAMING, &replied);
    CHECK(replied && c.error == TT_ERR_BUSY && c.action == TT_ACT_NONE);
    c = board_answer(tt_msg_empty(raw, TT_MSG_STOP, 3), raw, TT_STATE_IDLE, &replied);
    CHECK(replied && c.error == TT_ERR_NOT_STREAMING);
    c = board_answer(tt_msg_empty(raw, TT_MSG_STOP, 3), raw, TT_STATE_ERROR, &replied);
    CHECK(replied && c.error == TT_ERR_OK && c.action == TT_ACT_STOP);
    c = board_answer(tt_msg_ping(raw, 4, 0xDEADBEEFu), raw, TT_STATE_STREAMING, &replied);
    CHECK(replied && c.action == TT_ACT_PING && c.token == 0xDEADBEEFu);
    c = board_answer(tt_msg_empty(raw, TT_MSG_IDENTIFY, 5), raw, TT_STATE_STREAMING, &replied);
    CHECK(replied && c.action == TT_ACT_IDENTIFY);
    /* a device message sent to the board, and an unknown type */
    c = board_answer(tt_msg_tach(raw, 6, 1, 1), raw, TT_STATE_IDLE, &replied);
    CHECK(replied && c.error == TT_ERR_UNKNOWN_COMMAND && c.type == TT_MSG_TACH);
    c = board_answer(tt_msg_empty(raw, 0x7E, 7), raw, TT_STATE_IDLE, &replied);
    CHECK(replied && c.error == TT_ERR_UNKNOWN_COMMAND && c.type == 0x7E && c.seq == 7);
    /* a start carrying a payload */
    raw[0] = TT_MSG_START; raw[1] = 8; raw[2] = 1;
    c = board_answer(tt_frame_seal(raw, 1), raw, TT_STATE_IDLE, &replied);
    CHECK(replied && c.error == TT_ERR_BAD_LENGTH && c.seq == 8);
    /* configure: values */
    cfg.rate_hz = 4000; cfg.channels = 2; cfg.tach_edge = 1;
    c = board_answer(tt_msg_configure(raw, 9, &cfg), raw, TT_STATE_IDLE, &replied);
    CHECK(replied && c.error == TT_ERR_OK && c.action == TT_ACT_CONFIGURE
          && c.setup.period_ticks == 250u && c.setup.tach_edge == 1u);
    c = board_answer(tt_msg_configure(raw, 9, &cfg), raw, TT_STATE_STREAMING, &replied);
    CHECK(replied && c.error == TT_ERR_BUSY);
    cfg.rate_hz = 3000; /* 2e6 / 6000 is not whole */
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_BAD_VALUE);
    cfg.rate_hz = 5000; cfg.channels = 2;
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_OK && s.period_ticks == 200u);
    cfg.rate_hz = 5000; cfg.channels = 3;
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_BAD_VALUE);
    cfg.rate_hz = 100; cfg.channels = 1;
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_OK && s.period_ticks == 20000u);
    cfg.rate_hz = 99;
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_BAD_VALUE);
    cfg.rate_hz = 1000; cfg.tach_edge = 2;
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_BAD_VALUE);
    cfg.tach_edge = 0; cfg.channels = 0;
    CHECK(tt_setup_check(&cfg, &board_limits, &s) == TT_ERR_BAD_VALUE);
    /* a corrupted frame gets no reply */
    {
        uint8_t wire[32];
        struct tt_frame f;
        struct tt_command cmd;
        size_t n = tt_frame_wire(raw, tt_msg_empty(raw, TT_MSG_START, 1), wire);
        wire[1] ^= 0x40u;
        CHECK(tt_command_parse(tt_frame_decode(wire, n - 1u, &f), &f, TT_STATE_IDLE,
                               &board_limits, &cmd) == 0);
    }
}

/* Reset causes, the restart marker, the AVCC arithmetic and the wait bound (core/tt_health.h). */
static void unit_health(void)
{
    struct tt_restart_marker m;
    uint8_t site = 99;
    /* MCUSR bit positions (ATmega328P datasheet, "MCUSR"): PORF 0, EXTRF 1, BORF 2, WDRF 3 */
    CHECK(tt_reset_flags(0x01u, 0u, 0u, 0u) == TT_RF_POWER_ON);
    CHECK(tt_reset_flags(0x02u, 0x5Au, 0u, 0u) == TT_RF_EXTERNAL);
    CHECK(tt_reset_flags(0x05u, 0u, 1u, TT_STALL_LOOP) == (TT_RF_POWER_ON | TT_RF_BROWN_OUT));
    CHECK(tt_reset_flags(0x08u, 0u, 0u, 0u) == TT_RF_WATCHDOG);
    /* a stall restart: MCUSR was cleared at the last start, the marker says so */
    CHECK(tt_reset_flags(0u, 0u, 1u, TT_STALL_LOOP) == TT_RF_STALL_RESTART);
    CHECK(tt_reset_flags(0u, 0u, 1u, TT_STALL_TRANSMIT)
          == (TT_RF_STALL_RESTART | TT_RF_STALL_IN_TRANSMIT));
    /* optiboot cleared MCUSR and passed it in r2 */
    CHECK(tt_reset_flags(0u, 0x02u, 0u, 0u) == (TT_RF_EXTERNAL | TT_RF_FROM_BOOTLOADER));
    CHECK(tt_reset_flags(0u, 0x08u, 0u, 0u) == (TT_RF_WATCHDOG | TT_RF_FROM_BOOTLOADER));
    /* nothing usable: r2 left with other bits, or empty */
    CHECK(tt_reset_flags(0u, 0x5Au, 0u, 0u) == TT_RF_UNKNOWN);
    CHECK(tt_reset_flags(0u, 0u, 0u, 0u) == TT_RF_UNKNOWN);
    CHECK(tt_restart_error_flags(TT_RF_STALL_RESTART | TT_RF_STALL_IN_TRANSMIT)
          == (TT_EF_RESTARTED | TT_EF_TX_OVERRUN));
    CHECK(tt_restart_error_flags(TT_RF_POWER_ON) == 0u);
    /* the marker: valid once, then gone; random RAM is not a marker */
    tt_marker_set(&m, TT_STALL_TRANSMIT);
    CHECK(tt_marker_take(&m, &site) == 1u && site == TT_STALL_TRANSMIT);
    CHECK(tt_marker_take(&m, &site) == 0u);
    m.magic = TT_RESTART_MAGIC; m.site = 1u; m.site_check = 1u;
    CHECK(tt_marker_take(&m, &site) == 0u);
    /* ADC = floor(1100 mV * 1024 / AVCC) (datasheet "ADC Conversion Result", bandgap input),
     * taken at the middle of its count: 5.0 V gives 225.28 -> 225, 8 x 225 = 1800 ->
     * 1100 * 1024 / 225.5 = 4995 mV; 4.6 V gives 244.87 -> 244 -> 1100 * 1024 / 244.5 = 4607 */
    CHECK(tt_avcc_mv(225u * 8u, 8u) == 4995u);
    CHECK(tt_avcc_mv(244u * 8u, 8u) == 4607u);
    CHECK(tt_avcc_mv(0u, 8u) == 0u);
    CHECK(tt_avcc_mv(1u, 1u) == 0xFFFFu);
    /* the wait bound across the 32-bit wrap */
    CHECK(tt_deadline_passed(100u, 100u) == 1u);
    CHECK(tt_deadline_passed(99u, 100u) == 0u);
    CHECK(tt_deadline_passed(5u, 0xFFFFFFF0u) == 1u);
    CHECK(tt_deadline_passed(0xFFFFFFF0u, 5u) == 0u);
}

static int run_unit(void)
{
    unit_crc();
    unit_cobs();
    unit_clock();
    unit_blocks();
    unit_adc_step();
    unit_tachq();
    unit_rx();
    unit_commands();
    unit_health();
    if (failures) {
        printf("FAILED %d of %d checks\n", failures, checks);
        return 1;
    }
    printf("ok %d checks\n", checks);
    return 0;
}

/* ---------------- encode / decode drivers ---------------- */

static void print_hex(const uint8_t *p, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++) printf("%02x", p[i]);
}

#define MAX_VALUES 300

static int run_encode(void)
{
    char line[8192];
    while (fgets(line, sizeof line, stdin)) {
        char *tok = strtok(line, " \t\r\n");
        unsigned long v[MAX_VALUES];
        int nv = 0, i;
        uint8_t raw[TT_MAX_FRAME_BYTES + 8u], wire[TT_COBS_MAX_ENCODED(TT_MAX_FRAME_BYTES + 8u) + 1u];
        size_t raw_len = 0;
        char name[64];
        if (!tok) continue;
        snprintf(name, sizeof name, "%s", tok);
        while ((tok = strtok(NULL, " \t\r\n")) && nv < MAX_VALUES) v[nv++] = strtoul(tok, NULL, 0);
        if (nv < 1) { printf("error missing seq\n"); continue; }
#define NEED(k) if (nv < 1 + (k)) { printf("error %s needs %d values\n", name, k); continue; }
        if (!strcmp(name, "identity")) {
            struct tt_identity m;
            NEED(16);
            m.protocol_version = (uint8_t)v[1]; m.definition_hash = (uint32_t)v[2];
            m.firmware_major = (uint8_t)v[3]; m.firmware_minor = (uint8_t)v[4];
            m.firmware_patch = (uint8_t)v[5]; m.board_id = (uint8_t)v[6];
            m.tick_hz = (uint32_t)v[7]; m.adc_bits = (uint8_t)v[8];
            m.adc_reference_mv = (uint16_t)v[9]; m.adc_reference_kind = (uint8_t)v[10];
            m.aperture_delay_ticks = (uint16_t)v[11];
            m.max_channels = (uint8_t)v[12]; m.channel0_pin = (uint8_t)v[13];
            m.channel1_pin = (uint8_t)v[14]; m.tach_pin = (uint8_t)v[15];
            m.reset_flags = (uint8_t)v[16];
            raw_len = tt_msg_identity(raw, (uint8_t)v[0], &m);
        } else if (!strcmp(name, "reply")) {
            NEED(3);
            raw_len = tt_msg_reply(raw, (uint8_t)v[0], (uint8_t)v[1], (uint8_t)v[2], (uint8_t)v[3]);
        } else if (!strcmp(name, "stream_config")) {
            struct tt_stream_config m;
            NEED(6);
            m.rate_hz = (uint16_t)v[1]; m.channels = (uint8_t)v[2]; m.period_ticks = (uint16_t)v[3];
            m.tach_edge = (uint8_t)v[4]; m.start_tick = (uint32_t)v[5];
            m.adc_reference_mv = (uint16_t)v[6];
            raw_len = tt_msg_stream_config(raw, (uint8_t)v[0], &m);
        } else if (!strcmp(name, "samples")) {
            uint16_t s[TT_SAMPLES_MAX_PER_MESSAGE];
            int count = nv - 5;
            NEED(4);
            if (count < 0 || count > (int)TT_SAMPLES_MAX_PER_MESSAGE) { printf("error count\n"); continue; }
            for (i = 0; i < count; i++) s[i] = (uint16_t)v[5 + i];
            raw_len = tt_msg_samples(raw, (uint8_t)v[0], (uint32_t)v[1], (uint8_t)v[2], (uint32_t)v[3],
                                     (uint16_t)v[4], s, (uint8_t)count);
        } else if (!strcmp(name, "tach")) {
            NEED(2);
            raw_len = tt_msg_tach(raw, (uint8_t)v[0], (uint32_t)v[1], (uint16_t)v[2]);
        } else if (!strcmp(name, "status")) {
            struct tt_status m;
            NEED(10);
            m.uptime_ms = (uint32_t)v[1]; m.state = (uint8_t)v[2]; m.samples_dropped = (uint32_t)v[3];
            m.frames_dropped = (uint16_t)v[4]; m.adc_overruns = (uint16_t)v[5];
            m.tach_edges = (uint32_t)v[6]; m.rx_bad_frames = (uint16_t)v[7];
            m.tach_suppressed = (uint16_t)v[8]; m.capture_overwrites = (uint16_t)v[9];
            m.error_flags = (uint8_t)v[10];
            raw_len = tt_msg_status(raw, (uint8_t)v[0], &m);
        } else if (!strcmp(name, "pong")) {
            NEED(2);
            raw_len = tt_msg_pong(raw, (uint8_t)v[0], (uint32_t)v[1], (uint32_t)v[2]);
        } else if (!strcmp(name, "identify")) {
            raw_len = tt_msg_empty(raw, TT_MSG_IDENTIFY, (uint8_t)v[0]);
        } else if (!strcmp(name, "start")) {
            raw_len = tt_msg_empty(raw, TT_MSG_START, (uint8_t)v[0]);
        } else if (!strcmp(name, "stop")) {
            raw_len = tt_msg_empty(raw, TT_MSG_STOP, (uint8_t)v[0]);
        } else if (!strcmp(name, "configure")) {
            struct tt_configure m;
            NEED(3);
            m.rate_hz = (uint16_t)v[1]; m.channels = (uint8_t)v[2]; m.tach_edge = (uint8_t)v[3];
            raw_len = tt_msg_configure(raw, (uint8_t)v[0], &m);
        } else if (!strcmp(name, "ping")) {
            NEED(1);
            raw_len = tt_msg_ping(raw, (uint8_t)v[0], (uint32_t)v[1]);
        } else {
            printf("error unknown message %s\n", name);
            continue;
        }
#undef NEED
        print_hex(wire, tt_frame_wire(raw, raw_len, wire));
        printf("\n");
    }
    return 0;
}

static int hexval(int c)
{
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    return -1;
}

static int run_decode(void)
{
    static char line[4096];
    static uint8_t bytes[2048];
    while (fgets(line, sizeof line, stdin)) {
        size_t n = 0, i, len = strcspn(line, "\r\n");
        struct tt_frame f;
        struct tt_command cmd;
        enum tt_frame_status st;
        for (i = 0; i + 1u < len + 1u && i + 1u < len; i += 2u) {
            int hi = hexval(line[i]), lo = hexval(line[i + 1u]);
            if (hi < 0 || lo < 0) break;
            bytes[n++] = (uint8_t)(hi * 16 + lo);
        }
        /* the line is one wire frame: the body, then its 0x00 delimiter */
        if (n > 0u && bytes[n - 1u] == 0u) n--;
        memset(&f, 0, sizeof f);
        st = tt_frame_decode(bytes, n, &f);
        if (st == TT_FRAME_OK) {
            printf("ok %u %u ", f.type, f.seq);
            print_hex(f.payload, f.payload_len);
        } else if (st == TT_FRAME_UNKNOWN_TYPE || st == TT_FRAME_BAD_LENGTH) {
            printf("err %s %u %u", tt_frame_status_name(st), f.type, f.seq);
        } else {
            printf("err %s", tt_frame_status_name(st));
        }
        memset(&cmd, 0, sizeof cmd);
        if (tt_command_parse(st, &f, TT_STATE_IDLE, &board_limits, &cmd)) {
            printf(" | reply %u %u %u %u\n", cmd.type, cmd.seq, cmd.error, cmd.action);
        } else {
            printf(" | noreply\n");
        }
    }
    return 0;
}

static size_t read_file(const char *path, uint8_t *buf, size_t cap)
{
    FILE *f = fopen(path, "rb");
    size_t n;
    if (!f) {
        fprintf(stderr, "%s: cannot open\n", path);
        return 0;
    }
    n = fread(buf, 1, cap, f);
    fclose(f);
    return n;
}

static int run_files(int argc, char **argv, int want_valid)
{
    static uint8_t wire[1024], body[1024], raw[512], again[1024];
    int i, bad = 0;
    for (i = 0; i < argc; i++) {
        size_t n = read_file(argv[i], wire, sizeof wire), m;
        struct tt_frame f;
        enum tt_frame_status st;
        if (n == 0u || wire[n - 1u] != 0u) {
            /* no delimiter at the end: the whole file is one unterminated body */
            if (want_valid) { printf("FAIL %s: no 0x00 delimiter\n", argv[i]); bad++; continue; }
        } else {
            n--;
        }
        memcpy(body, wire, n);
        st = tt_frame_decode(body, n, &f);
        if (!want_valid) {
            printf("%s %s: %s\n", st == TT_FRAME_OK ? "FAIL" : "ok", argv[i], tt_frame_status_name(st));
            bad += st == TT_FRAME_OK;
            continue;
        }
        if (st != TT_FRAME_OK) {
            printf("FAIL %s: %s\n", argv[i], tt_frame_status_name(st));
            bad++;
            continue;
        }
        raw[0] = f.type;
        raw[1] = f.seq;
        memcpy(raw + 2, f.payload, f.payload_len);
        m = tt_frame_wire(raw, tt_frame_seal(raw, f.payload_len), again);
        if (m != n + 1u || memcmp(again, wire, m) != 0) {
            printf("FAIL %s: re-encoded bytes differ\n", argv[i]);
            bad++;
        } else {
            printf("ok %s\n", argv[i]);
        }
    }
    return bad ? 1 : 0;
}

int main(int argc, char **argv)
{
    if (argc >= 2 && !strcmp(argv[1], "roundtrip")) return run_files(argc - 2, argv + 2, 1);
    if (argc >= 2 && !strcmp(argv[1], "reject")) return run_files(argc - 2, argv + 2, 0);
    if (argc == 2 && !strcmp(argv[1], "unit")) return run_unit();
    if (argc == 2 && !strcmp(argv[1], "encode")) return run_encode();
    if (argc == 2 && !strcmp(argv[1], "decode")) return run_decode();
    fprintf(stderr, "usage: %s unit|encode|decode\n", argv[0]);
    return 2;
}
