/* main.c - trueturn firmware for the ATmega328P at 16 MHz (Uno/Nano class), avr-libc only.
 *
 * One clock: Timer1 runs free at clk/8 = 2 MHz (the tick), extended to 32 bits in software.
 *  - The tach enters on ICP1 (D8) with the noise canceller on; the capture register holds
 *    the tick of the edge, so no interrupt latency enters the tach time.
 *  - The ADC is auto-triggered by Timer1 compare-match B; the ADC interrupt steps OCR1B by
 *    period_ticks, so conversion i is triggered at exactly start_tick + i * period_ticks.
 *    A0 and A1 alternate when two channels are on.
 *  - The main loop turns queued samples and tach edges into protocol frames, answers
 *    host commands, sends status once a second and blinks the LED.
 *  - The watchdog runs in interrupt mode only: a main loop stalled for 250 ms (or a transmit
 *    wait past its bound) makes its interrupt restart the firmware through the reset vector
 *    with a marker in .noinit RAM, reported in identity.reset_flags. It never resets the chip
 *    itself, so no bootloader ever sees a watchdog reset (the old Nano bootloader would loop).
 * See firmware/README.md for the design notes and the cycle budget of each handler. */
#include <avr/interrupt.h>
#include <avr/io.h>
#include <avr/wdt.h>
#include <stdint.h>
#include <util/atomic.h>

#include "tt_adc.h"
#include "tt_blocks.h"
#include "tt_clock.h"
#include "tt_cobs.h"
#include "tt_command.h"
#include "tt_frame.h"
#include "tt_health.h"
#include "tt_messages.h"
#include "tt_pins.h"
#include "tt_protocol_defs.h"
#include "tt_rx.h"
#include "tt_tachq.h"

#define TT_FIRMWARE_MAJOR 1u
#define TT_FIRMWARE_MINOR 1u
#define TT_FIRMWARE_PATCH 0u
#ifndef TT_BOARD_ID
#define TT_BOARD_ID TT_BOARD_ATMEGA328P
#endif

#define TT_TICK_HZ (F_CPU / 8UL)          /* Timer1 prescaler 8 */
/* every board of ours ticks at the catalogue's board_tick_hz (the host relies on it) */
typedef char tt_tick_hz_is_the_catalogues[(TT_TICK_HZ == TT_LIMIT_BOARD_TICK_HZ_MIN) ? 1 : -1];
#define TT_ADC_BITS 10u
/* ADC reference, measured against the 1.1 V bandgap. The standard build: AVCC (the USB rail,
 * 4.6-5.1 V; ADMUX REFS1:0 = 01). Built with TT_ADC_REF_AREF=1 (`make ADC_REF=aref`): the
 * external AREF pin (REFS1:0 = 00, internal reference off), e.g. the pickups' 3.3 V rail. Such
 * an image never selects AVCC: with a voltage on AREF that would short it to AVCC (ATmega328P
 * datasheet, "ADC Voltage Reference"; from memory). The bandgap is an input of the multiplexer
 * whatever the reference, so AREF is measured as AVCC is: 1100 mV * 1024 / ADC(bandgap). */
#ifndef TT_ADC_REF_AREF
#define TT_ADC_REF_AREF 0
#endif
#if TT_ADC_REF_AREF
#define TT_ADMUX_REF 0u                   /* REFS1:0 = 00: AREF */
#define TT_REF_KIND TT_REF_AREF_VS_BANDGAP
#else
#define TT_ADMUX_REF _BV(REFS0)           /* REFS1:0 = 01: AVCC */
#define TT_REF_KIND TT_REF_AVCC_VS_BANDGAP
#endif
#define TT_ADMUX_BANDGAP 0x0Eu            /* MUX3..0 = 1110: the internal 1.1 V (VBG) */
#define TT_BANDGAP_SETTLE_TICKS 2000u     /* 1 ms after switching to the bandgap */
#define TT_AVCC_DISCARD 2u                /* conversions thrown away after the switch */
#define TT_AVCC_SAMPLES 8u                /* conversions averaged */
/* A transmit wait gives up after 20 ms (four times what the 256-byte ring takes to drain at
 * 50 kB/s): the transmitter is stuck, and the watchdog restarts the firmware. */
#define TT_TX_WAIT_TICKS (TT_TICK_HZ / 50u)
/* Auto-triggered conversion: sample-and-hold 2 ADC clocks after the trigger plus 3 CPU
 * clocks of synchronisation (ATmega328P datasheet, "ADC Conversion Time"): 2 * 64 + 3 = 131
 * CPU clocks = 16.4 ticks, reported as 16. */
#define TT_APERTURE_DELAY_TICKS 16u
#define TT_MAX_CHANNELS TT_LIMIT_CHANNELS_MAX
/* A conversion takes 13.5 ADC clocks = 864 CPU clocks = 108 ticks; the next trigger must be
 * due after the ADC interrupt has stepped OCR1B, hence limits.period_ticks.min = 200 ticks
 * (100 us, 2 x 5 kSps). */
#define TT_START_LEAD_TICKS 400u          /* first trigger 200 us after start */
#define TT_STATUS_PERIOD_TICKS TT_TICK_HZ /* status once a second */

#define TT_RX_RING 32u                    /* power of two */

/* ---- shared with interrupt handlers ---- */
static struct tt_blocks g_blocks;
static struct tt_tachq g_tach;
static volatile uint16_t g_t1_overflows;
static uint32_t g_tach_last_tick;          /* capture ISR only */
static volatile uint16_t g_adc_period_ticks;
static volatile uint8_t g_adc_two_channels;
static volatile uint8_t g_adc_armed;
static volatile uint16_t g_adc_overruns;
static volatile uint16_t g_capture_overwrites;
static volatile uint8_t g_error_flags;    /* status.error_flags, cleared at start */
static volatile uint8_t g_stream_fault;
static volatile uint8_t g_stall_site;     /* enum tt_stall_site: what the main loop waits on */

static uint8_t g_tx[256];                 /* indices wrap at 256 for free */
static volatile uint8_t g_tx_head, g_tx_tail;
static uint8_t g_rx_ring[TT_RX_RING];
static volatile uint8_t g_rx_head, g_rx_tail;

/* ---- main loop only ---- */
static uint8_t g_rx_body[24];             /* host commands are at most 10 encoded bytes */
static struct tt_rx g_rx;
static uint8_t g_raw[TT_OVERHEAD_BYTES + TT_MSG_SAMPLES_FIXED_BYTES
                     + TT_BLOCK_MAX_SAMPLES * TT_MSG_SAMPLES_REST_ITEM_BYTES];
static uint8_t g_seq;
static uint8_t g_state = TT_STATE_IDLE;
static struct tt_setup g_setup = {4000u, 2u, 1u, 250u}; /* SPEC 4.8 defaults: 2 x 4 kSps, rising */
static uint32_t g_start_tick;
static uint16_t g_rx_bad_frames;
static uint32_t g_uptime_ms;
static uint32_t g_next_status_tick;

static const struct tt_limits g_limits = {
    TT_TICK_HZ, TT_LIMIT_RATE_HZ_MIN, TT_LIMIT_RATE_HZ_MAX, TT_MAX_CHANNELS,
    TT_LIMIT_PERIOD_TICKS_MIN};
static uint16_t g_avcc_mv;                /* the ADC reference, last measured */
static uint8_t g_reset_flags;             /* identity.reset_flags */

/* Kept across a stall restart and read before the C runtime clears RAM (.noinit is never
 * cleared): the restart marker, MCUSR and r2 as the firmware found them. */
static struct tt_restart_marker g_marker __attribute__((section(".noinit")));
static uint8_t g_boot_mcusr __attribute__((section(".noinit")));
static uint8_t g_boot_r2 __attribute__((section(".noinit")));

/* The very first instructions after the reset vector: optiboot (Uno, newer Nano) clears MCUSR
 * and passes its old value in r2 (from memory: optiboot 5 and later); nothing has touched r2
 * yet here. */
void tt_save_r2(void) __attribute__((naked, used, section(".init0")));
void tt_save_r2(void)
{
    __asm__ __volatile__("sts %0, r2" : "=m"(g_boot_r2));
}

/* Runs before main: keep MCUSR and stop a watchdog left running (a watchdog reset leaves it
 * on at 16 ms, and a bootloader may jump here without stopping it; avr-libc <avr/wdt.h>
 * documentation). WDRF must be cleared before WDE can be. */
void tt_early_init(void) __attribute__((naked, used, section(".init3")));
void tt_early_init(void)
{
    g_boot_mcusr = MCUSR;
    MCUSR = 0;
    wdt_disable();
}

/* The watchdog in interrupt mode only (WDIE, never WDE), 250 ms: a stall is caught by its
 * interrupt, never by a chip reset (ATmega328P datasheet, "Watchdog Timer": interrupt mode). */
static void watchdog_interrupt_mode(void)
{
    ATOMIC_BLOCK(ATOMIC_RESTORESTATE) {
        wdt_reset();
        WDTCSR = _BV(WDCE) | _BV(WDE);
        WDTCSR = _BV(WDIE) | _BV(WDP2); /* 32K cycles of the 128 kHz oscillator = 0.25 s */
    }
}

/* ---------------- interrupt handlers ---------------- */

/* The main loop has not fed the watchdog for 250 ms (or gave up a transmit wait): leave a
 * marker, put every peripheral this firmware uses back to its reset state and start again at
 * the reset vector. The firmware starts afresh (RAM initialised, identity with reset_flags
 * stall_restart), but no chip reset happens, so no bootloader runs. */
ISR(WDT_vect)
{
    tt_marker_set(&g_marker, g_stall_site);
    wdt_disable();
    UCSR0B = 0;
    ADCSRA = _BV(ADIF);
    ADCSRB = 0;
    ADMUX = 0;
    DIDR0 = 0;
    TIMSK1 = 0;
    TCCR1B = 0;
    TCCR1A = 0;
    TCNT1 = 0;
    OCR1A = 0;
    OCR1B = 0;
    TIFR1 = _BV(ICF1) | _BV(OCF1B) | _BV(OCF1A) | _BV(TOV1);
    PORTB = 0;
    DDRB = 0;
    __asm__ __volatile__("jmp 0");
    for (;;) {
    }
}

ISR(TIMER1_OVF_vect)
{
    g_t1_overflows++;
}

/* Tach edge. Hold-off: the capture interrupt is switched off after an accepted edge and
 * back on by compare match A a fraction of the last period later (core/tt_tachq.h), so a
 * chattering input (a comparator without hysteresis on a slow mark edge, a noisy cable)
 * costs one interrupt per revolution instead of a storm that starves the ADC handler. */
ISR(TIMER1_CAPT_vect)
{
    /* ICF1 was cleared as this vector was taken: set again means a second edge came since and
     * overwrote ICR1 before it is read here (the first edge's time is lost) */
    uint8_t overwritten = (TIFR1 & _BV(ICF1)) != 0;
    uint16_t icr = ICR1;
    uint8_t pending = (TIFR1 & _BV(TOV1)) != 0;
    uint32_t tick = tt_extend_ticks(g_t1_overflows, icr, pending);
    OCR1A = (uint16_t)(icr + tt_tach_holdoff_ticks(tick - g_tach_last_tick));
    TIFR1 = overwritten ? (uint8_t)(_BV(OCF1A) | _BV(ICF1)) : (uint8_t)_BV(OCF1A);
    TIMSK1 = _BV(TOIE1) | _BV(OCIE1A);
    g_tach_last_tick = tick;
    if (overwritten) {
        g_capture_overwrites++;
        g_error_flags |= TT_EF_CAPTURE_OVERWRITE;
        g_stream_fault = 1;
    }
    if (tt_tachq_put(&g_tach, tick)) {
        g_error_flags |= TT_EF_TACH_OVERRUN;
        g_stream_fault = 1;
    }
}

/* End of the tach hold-off: edges that came during it (ICF1 set) were chatter; count the
 * window, clear the flag and take the next edge. */
ISR(TIMER1_COMPA_vect)
{
    if (TIFR1 & _BV(ICF1)) {
        g_tach.suppressed++;
    }
    TIFR1 = _BV(ICF1);
    TIMSK1 = _BV(TOIE1) | _BV(ICIE1);
}

ISR(ADC_vect)
{
    uint16_t sample = ADC; /* read before the multiplexer moves on */
    uint16_t due, skipped;
    if (!g_adc_armed) {
        return;
    }
    if (tt_blocks_put(&g_blocks, sample)) {
        g_error_flags |= TT_EF_SAMPLE_OVERRUN;
        g_stream_fault = 1;
    }
    /* Next trigger: one period on, or, if that time is already past (this handler ran
     * late), the next channel-set start safely ahead; the conversions in between are
     * skipped and counted as dropped, so no sample time ever shifts (core/tt_adc.h). */
    due = (uint16_t)(OCR1B + g_adc_period_ticks);
    skipped = tt_adc_step(&due, TCNT1, g_adc_period_ticks, (uint8_t)g_blocks.next_index,
                          g_adc_two_channels, TT_ADC_LEAD_TICKS);
    /* The channel for the next conversion, before the trigger flag is cleared (datasheet,
     * "Changing Channel or Reference Selection": safe after a conversion, before the flag
     * used as trigger source is cleared); a skip always resumes at channel 0. */
    if (skipped != 0u) {
        ADMUX = TT_ADMUX_REF | TT_PICKUP_1_ADC_CHANNEL;
    } else if (g_adc_two_channels) {
        ADMUX ^= 1u;    /* A0 <-> A1 */
    }
    OCR1B = due;
    TIFR1 = _BV(OCF1B); /* the trigger is the flag's rising edge: clear it for the next one */
    if (skipped != 0u) {
        tt_blocks_skip(&g_blocks, skipped);
        g_adc_overruns++;
        g_error_flags |= TT_EF_ADC_LATE;
        g_stream_fault = 1;
    }
}

ISR(USART_RX_vect)
{
    uint8_t byte = UDR0;
    uint8_t next = (uint8_t)((g_rx_head + 1u) & (TT_RX_RING - 1u));
    if (next != g_rx_tail) { /* a full ring drops the byte; the frame then fails its CRC */
        g_rx_ring[g_rx_head] = byte;
        g_rx_head = next;
    }
}

ISR(USART_UDRE_vect)
{
    uint8_t tail = g_tx_tail;
    if (tail != g_tx_head) {
        UDR0 = g_tx[tail];
        g_tx_tail = (uint8_t)(tail + 1u);
    } else {
        UCSR0B &= (uint8_t)~_BV(UDRIE0);
    }
}

/* ---------------- clock ---------------- */

static uint32_t now_ticks(void)
{
    uint16_t low, overflows;
    uint8_t pending;
    ATOMIC_BLOCK(ATOMIC_RESTORESTATE) {
        low = TCNT1;
        pending = (TIFR1 & _BV(TOV1)) != 0;
        overflows = g_t1_overflows;
    }
    return tt_extend_ticks(overflows, low, pending);
}

/* ---------------- transmit ---------------- */

/* Queue the raw frame in g_raw if the ring has room; the sequence number moves on. */
static uint8_t tx_try(uint8_t raw_len)
{
    uint8_t head = g_tx_head;
    uint8_t room = (uint8_t)(g_tx_tail - head - 1u);
    if (room < (uint8_t)(raw_len + 2u)) { /* COBS adds 1 byte (frames < 254), plus 0x00 */
        return 0;
    }
    g_tx_head = (uint8_t)(head + tt_cobs_encode_ring(g_raw, raw_len, g_tx, head));
    UCSR0B |= _BV(UDRIE0);
    g_seq++;
    return 1;
}

/* A wait bounded by TT_TX_WAIT_TICKS from `since` has run out: the transmitter is stuck.
 * Stop feeding the watchdog: its interrupt restarts the firmware, the marker saying where. */
static void tx_stuck_if_late(uint32_t deadline)
{
    if (tt_deadline_passed(now_ticks(), deadline)) {
        g_stall_site = TT_STALL_TRANSMIT;
        for (;;) {
        }
    }
}

/* Queue a frame, waiting for the UART to make room (normally at most ~5 ms; bounded). */
static void tx_wait(uint8_t raw_len)
{
    uint32_t deadline = now_ticks() + TT_TX_WAIT_TICKS;
    while (!tx_try(raw_len)) {
        tx_stuck_if_late(deadline);
    }
}

static void send_identity(void)
{
    struct tt_identity v;
    v.protocol_version = TT_PROTOCOL_VERSION;
    v.definition_hash = TT_DEFINITION_HASH;
    v.firmware_major = TT_FIRMWARE_MAJOR;
    v.firmware_minor = TT_FIRMWARE_MINOR;
    v.firmware_patch = TT_FIRMWARE_PATCH;
    v.board_id = TT_BOARD_ID;
    v.tick_hz = TT_TICK_HZ;
    v.adc_bits = TT_ADC_BITS;
    v.adc_reference_mv = g_avcc_mv;
    v.adc_reference_kind = TT_REF_KIND;
    v.reset_flags = g_reset_flags;
    v.aperture_delay_ticks = TT_APERTURE_DELAY_TICKS;
    v.max_channels = TT_MAX_CHANNELS;
    v.channel0_pin = TT_PICKUP_1_ADC_CHANNEL;
    v.channel1_pin = TT_PICKUP_2_ADC_CHANNEL;
    v.tach_pin = TT_TACH_ARDUINO_PIN;
    tx_wait((uint8_t)tt_msg_identity(g_raw, g_seq, &v));
}

static void send_stream_config(void)
{
    struct tt_stream_config v;
    v.rate_hz = g_setup.rate_hz;
    v.channels = g_setup.channels;
    v.period_ticks = g_setup.period_ticks;
    v.tach_edge = g_setup.tach_edge;
    v.start_tick = g_state == TT_STATE_IDLE ? 0u : g_start_tick;
    v.adc_reference_mv = g_avcc_mv;
    tx_wait((uint8_t)tt_msg_stream_config(g_raw, g_seq, &v));
}

/* ---------------- sampling ---------------- */

/* The ADC reference (AVCC, or AREF in an AREF build) against the internal 1.1 V bandgap (core/tt_health.h): polled
 * conversions with the ADC interrupt off, only while no stream runs. About 2 ms. */
static void measure_avcc(void)
{
    uint32_t sum = 0, until;
    uint8_t i;
    while (ADCSRA & _BV(ADSC)) {
        /* a conversion still running (at most 25 ADC clocks = 100 us) */
    }
    ADCSRA = _BV(ADEN) | _BV(ADIF) | _BV(ADPS2) | _BV(ADPS1); /* no trigger, no interrupt */
    ADMUX = TT_ADMUX_REF | TT_ADMUX_BANDGAP;
    until = now_ticks() + TT_BANDGAP_SETTLE_TICKS;
    while (!tt_deadline_passed(now_ticks(), until)) {
        /* the bandgap input settles (common practice, no source: 1 ms and two conversions) */
    }
    for (i = 0; i < TT_AVCC_DISCARD + TT_AVCC_SAMPLES; i++) {
        ADCSRA |= _BV(ADSC);
        while (ADCSRA & _BV(ADSC)) {
        }
        if (i >= TT_AVCC_DISCARD) {
            sum += ADC;
        }
    }
    ADMUX = TT_ADMUX_REF | TT_PICKUP_1_ADC_CHANNEL;
    ADCSRA = _BV(ADEN) | _BV(ADIF) | _BV(ADIE) | _BV(ADPS2) | _BV(ADPS1);
    g_avcc_mv = tt_avcc_mv(sum, TT_AVCC_SAMPLES);
}

static void set_tach_edge(uint8_t rising)
{
    ATOMIC_BLOCK(ATOMIC_RESTORESTATE) {
        if (rising) {
            TCCR1B |= _BV(ICES1);
        } else {
            TCCR1B &= (uint8_t)~_BV(ICES1);
        }
        TIFR1 = _BV(ICF1); /* a change of edge can set the flag (datasheet, "Input Capture") */
    }
}

static void start_stream(void)
{
    uint8_t block_len = tt_blocks_len_for(g_setup.rate_hz, g_setup.channels);
    measure_avcc(); /* also lets a conversion still running from the last stream finish */
    ATOMIC_BLOCK(ATOMIC_RESTORESTATE) {
        tt_blocks_reset(&g_blocks, block_len);
        g_adc_period_ticks = g_setup.period_ticks;
        g_adc_two_channels = g_setup.channels == 2u;
        g_stream_fault = 0;
        g_error_flags = 0; /* SPEC 4.6: the flags describe this stream */
        ADMUX = TT_ADMUX_REF | TT_PICKUP_1_ADC_CHANNEL;
        g_start_tick = now_ticks() + TT_START_LEAD_TICKS;
        if (g_start_tick == 0u) {
            g_start_tick = 1u; /* SPEC 4.3: start_tick 0 means "no stream" */
        }
        OCR1B = (uint16_t)g_start_tick;
        TIFR1 = _BV(OCF1B);
        g_adc_armed = 1;
        ADCSRA = _BV(ADEN) | _BV(ADATE) | _BV(ADIE) | _BV(ADPS2) | _BV(ADPS1);
    }
    g_state = TT_STATE_STREAMING;
}

static uint8_t send_one_block(void)
{
    const struct tt_block *b = tt_blocks_peek(&g_blocks);
    if (b == 0) {
        return 0;
    }
    if (!tx_try((uint8_t)tt_msg_samples(g_raw, g_seq, b->first_index, g_setup.channels,
                                        g_start_tick, g_setup.period_ticks, b->samples,
                                        g_blocks.block_len))) {
        return 0;
    }
    tt_blocks_release(&g_blocks);
    return 1;
}

static void stop_stream(void)
{
    uint32_t deadline;
    ATOMIC_BLOCK(ATOMIC_RESTORESTATE) {
        ADCSRA = _BV(ADEN) | _BV(ADIE) | _BV(ADPS2) | _BV(ADPS1); /* no more triggers */
        g_adc_armed = 0;
    }
    deadline = now_ticks() + (uint32_t)TT_TX_WAIT_TICKS * TT_BLOCK_COUNT;
    while (tt_blocks_peek(&g_blocks) != 0) { /* complete blocks still go out (bounded) */
        if (!send_one_block()) {
            tx_stuck_if_late(deadline);
        }
    }
    g_state = TT_STATE_IDLE;
}

/* ---------------- host commands ---------------- */

static void bad_frame(void)
{
    g_rx_bad_frames++;
    g_error_flags |= TT_EF_RX_BAD_FRAME;
}

static void handle_body(void)
{
    struct tt_frame f;
    struct tt_command cmd;
    enum tt_frame_status st = tt_frame_decode(g_rx.buf, g_rx.len, &f);
    if (!tt_command_parse(st, &f, g_state, &g_limits, &cmd)) {
        bad_frame();
        return;
    }
    if (cmd.action == TT_ACT_STOP) {
        stop_stream();
    } else if (cmd.action == TT_ACT_CONFIGURE) {
        g_setup = cmd.setup;
        set_tach_edge(g_setup.tach_edge);
    }
    tx_wait((uint8_t)tt_msg_reply(g_raw, g_seq, cmd.type, cmd.seq, cmd.error));
    switch (cmd.action) {
    case TT_ACT_IDENTIFY:
        if (g_state == TT_STATE_IDLE) {
            measure_avcc(); /* while streaming the ADC is busy: the last value is sent */
        }
        send_identity();
        break;
    case TT_ACT_START:
        start_stream();
        send_stream_config();
        break;
    case TT_ACT_CONFIGURE:
        measure_avcc();
        send_stream_config();
        break;
    case TT_ACT_PING:
        tx_wait((uint8_t)tt_msg_pong(g_raw, g_seq, cmd.token, now_ticks()));
        break;
    default:
        break;
    }
}

static void service_rx(void)
{
    while (g_rx_tail != g_rx_head) {
        uint8_t tail = g_rx_tail;
        enum tt_rx_result r = tt_rx_byte(&g_rx, g_rx_ring[tail]);
        g_rx_tail = (uint8_t)((tail + 1u) & (TT_RX_RING - 1u));
        if (r == TT_RX_TOO_LONG) {
            bad_frame();
        } else if (r == TT_RX_BODY) {
            handle_body();
            tt_rx_done(&g_rx);
        }
    }
}

/* ---------------- transmitter watch ---------------- */

/* Samples, tach and status never wait for the transmitter (their loss is counted), so a stuck
 * transmitter would go unnoticed while streaming: bytes waiting in the ring that have not
 * moved for TT_TX_WAIT_TICKS mean it is stuck, and the watchdog restarts the firmware. */
static void service_tx_watch(uint32_t now)
{
    static uint8_t last_tail;
    static uint32_t moved_at;
    uint8_t tail = g_tx_tail;
    if (tail != last_tail || tail == g_tx_head) {
        last_tail = tail;
        moved_at = now;
    } else {
        tx_stuck_if_late(moved_at + TT_TX_WAIT_TICKS);
    }
}

/* ---------------- tach, status, LED ---------------- */

static void service_tach(void)
{
    const struct tt_tach_event *e = tt_tachq_peek(&g_tach);
    if (e != 0 && tx_try((uint8_t)tt_msg_tach(g_raw, g_seq, e->tick, e->edge_count))) {
        tt_tachq_release(&g_tach);
    }
}

static void service_status(uint32_t now)
{
    struct tt_status v;
    if ((int32_t)(now - g_next_status_tick) < 0) {
        return;
    }
    ATOMIC_BLOCK(ATOMIC_RESTORESTATE) {
        v.samples_dropped = g_blocks.dropped;
        v.frames_dropped = g_tach.dropped; /* tach messages lost to a full edge queue */
        v.adc_overruns = g_adc_overruns;
        v.tach_edges = g_tach.edges_total;
        v.tach_suppressed = g_tach.suppressed;
        v.capture_overwrites = g_capture_overwrites;
        v.error_flags = g_error_flags;
    }
    v.uptime_ms = g_uptime_ms + 1000u;
    v.state = g_state;
    v.rx_bad_frames = g_rx_bad_frames;
    if (tx_try((uint8_t)tt_msg_status(g_raw, g_seq, &v))) {
        g_uptime_ms += 1000u;
        g_next_status_tick += TT_STATUS_PERIOD_TICKS;
    }
}

/* LED patterns (documented in firmware/README.md), in units of 2^17 ticks = 65.5 ms:
 * idle = one 65 ms flash every 1.05 s; streaming = 0.26 s on / 0.26 s off;
 * error = 65 ms on / 65 ms off. */
static void service_led(uint32_t now)
{
    uint8_t unit = (uint8_t)(now >> 17);
    uint8_t on;
    if (g_state == TT_STATE_STREAMING) {
        on = (unit & 4u) == 0u;
    } else if (g_state == TT_STATE_ERROR) {
        on = (unit & 1u) == 0u;
    } else {
        on = (unit & 15u) == 0u;
    }
    if (on) {
        TT_LED_PORT |= _BV(TT_LED_BIT);
    } else {
        TT_LED_PORT &= (uint8_t)~_BV(TT_LED_BIT);
    }
}

/* ---------------- set-up ---------------- */

static void board_init(void)
{
    TT_LED_DDR |= _BV(TT_LED_BIT);
    TT_TACH_DDR &= (uint8_t)~_BV(TT_TACH_BIT);
    TT_TACH_PORT |= _BV(TT_TACH_BIT); /* pull-up: open-collector tach modules need one */

    /* ADC: this build's reference (TT_ADMUX_REF), right-aligned, A0, 250 kHz ADC clock
     * (prescaler 64), interrupt on. The first conversion after enabling takes 25 ADC clocks; do it now (its result is
     * ignored while disarmed) so every stream conversion takes the normal 13.5. */
    DIDR0 = TT_PICKUP_DIDR_BITS;
    ADMUX = TT_ADMUX_REF | TT_PICKUP_1_ADC_CHANNEL;
    ADCSRB = _BV(ADTS2) | _BV(ADTS0); /* auto-trigger source: Timer1 compare match B */
    ADCSRA = _BV(ADEN) | _BV(ADIE) | _BV(ADPS2) | _BV(ADPS1) | _BV(ADSC);

    /* Timer1: normal mode, clk/8, input-capture noise canceller, edge from the set-up. */
    TCCR1A = 0;
    TIFR1 = _BV(ICF1) | _BV(OCF1B) | _BV(OCF1A) | _BV(TOV1);
    TIMSK1 = _BV(ICIE1) | _BV(TOIE1);
    TCCR1B = _BV(ICNC1) | (g_setup.tach_edge ? _BV(ICES1) : 0u) | _BV(CS11);

    /* UART 500000 baud 8N1: U2X, UBRR = 16 MHz / (8 * 500000) - 1 = 3, exact. */
    UCSR0A = _BV(U2X0);
    UBRR0 = 3u;
    UCSR0C = _BV(UCSZ01) | _BV(UCSZ00);
    UCSR0B = _BV(RXEN0) | _BV(TXEN0) | _BV(RXCIE0);

    tt_rx_init(&g_rx, g_rx_body, sizeof g_rx_body);
    {
        uint8_t site = 0;
        uint8_t marker_ok = tt_marker_take(&g_marker, &site);
        g_reset_flags = tt_reset_flags(g_boot_mcusr, g_boot_r2, marker_ok, site);
    }
    g_error_flags = tt_restart_error_flags(g_reset_flags);
    watchdog_interrupt_mode();
}

int main(void)
{
    board_init();
    sei();
    measure_avcc();
    send_identity(); /* at boot, seq 0 */
    g_next_status_tick = now_ticks() + TT_STATUS_PERIOD_TICKS;
    for (;;) {
        uint32_t now;
        wdt_reset();
        service_rx();
        service_tach();
        send_one_block();
        if (g_state == TT_STATE_STREAMING && g_stream_fault) {
            g_state = TT_STATE_ERROR; /* streaming goes on; losses are in the status */
        }
        now = now_ticks();
        service_status(now);
        service_led(now);
        service_tx_watch(now);
    }
}
