/* tt_emu.c - runs the trueturn firmware ELF in simavr (ATmega328P, 16 MHz) against a
 * synthetic rotor: pickups on ADC0/ADC1 and the once-per-rev tach on ICP1 (PB0), the UART
 * joined to stdin/stdout, and the CPU cycles spent in each interrupt handler counted.
 *
 *   tt_emu [options] FIRMWARE.elf
 *     --speed-rpm X         shaft speed (default 1800)
 *     --first-edge-s X      time of the first tach edge after the timer starts (0.001)
 *     --jitter-rms-s X      gaussian jitter of the tach edges (0)
 *     --ref-v X             AVCC, the ADC reference of the standard build, volts (5.0)
 *     --aref-v X            a voltage on the AREF pin (the AREF build's reference), volts
 *                           (default: none; AREF then follows AVCC as on a board without it)
 *     --seed N              noise seed (1)
 *     --channel OFF,NOISE   add a pickup channel: offset and noise rms, volts (up to 2)
 *     --order CH,K,AMP,PH   order-K component on channel CH: amplitude V, phase lag deg
 *     --tone CH,HZ,AMP,PH   fixed-frequency component on channel CH
 *     --seconds X           stop after X simulated seconds (default: run until stdin ends)
 *     --realtime            do not run ahead of the wall clock
 *     --report PATH         write a JSON report (cycles per handler, counts) at the end
 *     --script BYTESHEX@S   send these bytes to the UART at simulated time S (repeatable;
 *                           for runs without a host program)
 *     --irq-off S,US        fault injection: hold the CPU's interrupts off for US
 *                           microseconds from simulated time S (a handler or critical
 *                           section far over its budget; repeatable, up to 8)
 *     --tach-chatter N,GAP  after every tach edge, N more edges of the same polarity GAP
 *                           CPU cycles apart (a comparator without hysteresis on a slow
 *                           mark edge, or a noisy cable)
 *     --mcusr HEX           MCUSR as a reset left it (bits PORF 1, EXTRF 2, BORF 4, WDRF 8;
 *                           default 1, a power-on without a bootloader)
 *     --r2 HEX              register r2 at the firmware's start, as a bootloader left it
 *                           (optiboot passes the MCUSR it cleared there)
 *     --wdt-running         the watchdog already on at 16 ms in reset mode when the firmware
 *                           starts (as a watchdog reset leaves it; with --mcusr 8)
 *     --stall S             fault injection: the main loop stalls at simulated time S (it
 *                           jumps into an endless loop with interrupts on; repeatable, up to 4)
 *     --tx-stuck S,MS       fault injection: the transmitter is stuck from S for MS ms (the
 *                           data-register-empty interrupt never comes)
 *
 * The signal follows the steady-signal spec of trueturn.sim.signal_spec: shaft angle
 * theta(t) = 2 pi (rpm/60)(t - first_edge_s); a rising tach edge at every multiple of 2 pi
 * (pulse 1/36 rev wide); v(t) = offset + sum amp cos(k theta - ph) + sum amp cos(2 pi f t - ph)
 * + gaussian noise; 10-bit counts of the reference, clamped. t = 0 is the instant Timer1
 * starts counting (tick 0).
 * The noise and the tach jitter are keyed by the sample's instant and the edge's number (see
 * gauss_at), so the signal is one function of simulated time for a given seed: how fast the
 * host runs moves when its commands arrive, never what the board sees at a given cycle.
 *
 * simavr 1.6 leaves out what the firmware relies on, so the harness supplies it:
 *  - ADC auto-trigger from Timer1 compare-match B (simavr implements only free running):
 *    the harness keeps OCR1B writes away from simavr's timer (which would restart its count
 *    on every write), sets OCF1B when the count reaches OCR1B and raises the ADC trigger;
 *  - an exact TCNT1 (count = elapsed cycles / 8), and TIFR1 writes that clear only the
 *    flags written as 1 (simavr 1.6 could drop a pending overflow flag there);
 *  - the input capture itself: simavr's capture path follows the port's pin model (with the
 *    pull-up on, it captured the opposite edge), so at each tach edge of the selected
 *    polarity the harness loads ICR1 with the exact count and raises the capture interrupt,
 *    and it mirrors the tach level in PINB0.
 * The analog value is set when simavr starts the conversion, for the instant of the
 * sample-and-hold (trigger + 131 CPU cycles, ATmega328P datasheet). UART output goes to the
 * original stdout; simavr's own messages go to stderr.
 *
 * Time: the signal's t = 0 is the instant Timer1 first starts; if the firmware stops and
 * restarts Timer1 (a stall restart through the reset vector), the count starts again from 0
 * while the rotor turns on. The report counts entries at the reset vector (restarts). */
#define _GNU_SOURCE
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "avr_adc.h"
#include "avr_ioport.h"
#include "avr_timer.h"
#include "avr_uart.h"
#include "sim_avr.h"
#include "sim_core.h"
#include "sim_elf.h"
#include "sim_interrupts.h"
#include "sim_irq.h"
#include "sim_time.h"

/* ATmega328P data-space addresses (datasheet, "Register Summary") */
#define R_PINB 0x23
#define R_TIFR1 0x36
#define R_MCUSR 0x54
#define R_WDTCSR 0x60
#define R_UCSR0B 0xC1
#define BIT_UDRIE0 5
#define BIT_WDCE 4
#define BIT_WDE 3
#define R_ADCSRA 0x7A
#define R_ADCSRB 0x7B
#define R_TCCR1B 0x81
#define R_TCNT1L 0x84
#define R_TCNT1H 0x85
#define R_ICR1L 0x86
#define R_ICR1H 0x87
#define R_OCR1AL 0x88
#define R_OCR1AH 0x89
#define R_OCR1BL 0x8A
#define R_OCR1BH 0x8B
#define BIT_OCF1B 2
#define BIT_ICES1 6
#define BIT_ADATE 5
#define CS1_MASK 0x07
#define ADTS_T1_COMPB 5
#define F_CPU_HZ 16000000u
#define CYCLES_PER_TICK 8u
#define APERTURE_CYCLES 131u /* 2 ADC clocks x 64 + 3 CPU clocks */
#define N_VECTORS 26
#define VECTOR_BYTES 4u
#define OPCODE_RETI 0x9518u

static const char *vector_names[N_VECTORS] = {
    "RESET", "INT0", "INT1", "PCINT0", "PCINT1", "PCINT2", "WDT", "TIMER2_COMPA",
    "TIMER2_COMPB", "TIMER2_OVF", "TIMER1_CAPT", "TIMER1_COMPA", "TIMER1_COMPB",
    "TIMER1_OVF", "TIMER0_COMPA", "TIMER0_COMPB", "TIMER0_OVF", "SPI_STC", "USART_RX",
    "USART_UDRE", "USART_TX", "ADC", "EE_READY", "ANALOG_COMP", "TWI", "SPM_READY"};

#define MAX_CH 2
#define MAX_TERMS 16

struct term {
    double key; /* order or hz */
    double amplitude_v;
    double phase_rad;
};

struct channel {
    double offset_v, noise_rms_v;
    int n_orders, n_tones;
    struct term orders[MAX_TERMS], tones[MAX_TERMS];
};

struct script_item {
    double at_s;
    uint8_t bytes[64];
    int n;
};

static struct {
    avr_t *avr;
    double speed_rpm, first_edge_s, jitter_rms_s, ref_v, aref_v, seconds;
    int realtime, n_channels;
    uint64_t seed;
    struct channel ch[MAX_CH];
    const char *report_path;
    struct script_item script[32];
    int n_script, next_script;
    double irq_off_at_s[8], irq_off_us[8];
    int n_irq_off;
    avr_cycle_count_t irq_off_until;
    int chatter_n;
    double chatter_gap_cycles;
    int chatter_left;
    double chatter_cycle;
    uint64_t chatter_edges;
    int preset_mcusr, preset_r2, wdt_running;
    double stall_at_s[4];
    int n_stall, stall_pending;
    uint64_t stalls;
    avr_flashaddr_t stall_pc;
    double tx_stuck_at_s, tx_stuck_ms;
    int tx_stuck;
    avr_io_write_t ucsr0b_orig;
    void *ucsr0b_param;
    uint64_t reset_vector_entries;

    int uart_fd;
    uint8_t out_buf[8192];
    size_t out_len;
    uint8_t in_buf[4096];
    size_t in_len, in_pos;
    int stdin_open;

    int timer_started, timer_ever_started;
    avr_cycle_count_t t1_start;     /* cycle at which Timer1 (last) started: tick 0 */
    avr_cycle_count_t t0_cycle;     /* cycle at which Timer1 first started: t = 0 */
    avr_timer_t *timer1;
    avr_io_write_t tccr1b_orig;
    void *tccr1b_param;

    avr_irq_t *adc_irq, *uart_irq;
    long tach_n;                    /* index of the next edge */
    int tach_high;
    double tach_edge_cycle;         /* exact cycle of the current/next edge */

    /* interrupt accounting */
    int in_isr, isr_vector;
    avr_cycle_count_t isr_enter;
    uint64_t isr_cycles[N_VECTORS], isr_count[N_VECTORS], isr_max[N_VECTORS];
    avr_cycle_count_t window_start;
    int window_open;
    uint64_t triggers, conversions_started;
    uint64_t uart_bytes_out, uart_bytes_in;
    struct timespec wall_start;
} E;

static volatile sig_atomic_t g_stop_requested;

static void on_sigterm(int sig)
{
    (void)sig;
    g_stop_requested = 1; /* finish the instruction, flush, write the report, exit */
}

/* ---------------- small helpers ---------------- */

/* Random numbers as a function of what they belong to, never of the order they are drawn in:
 * each is a hash of (seed, stream, counter), the counter being the tach edge's number or the
 * pickup sample's CPU cycle. A host's commands reach the board at a simulated time that follows
 * its wall clock (stdin is read every POLL_CYCLES, even without --realtime), so when the stream
 * starts depends on how loaded the host machine is; drawn from one sequence, the ADC noise of
 * the conversions before an edge would then change that edge's jitter (a loaded host moved the
 * median tach period by more than a tick). Keyed like this, every tach edge lands at the same
 * cycle and every sample instant gets the same noise whatever the host's speed. */
enum { STREAM_TACH_JITTER = 0, STREAM_NOISE_CH0 = 1 /* + channel */ };

#define GOLDEN_GAMMA 0x9E3779B97F4A7C15ULL

static uint64_t mix64(uint64_t z)
{
    /* the SplitMix64 output function (Steele, Lea, Flood, "Fast splittable pseudorandom number
     * generators", OOPSLA 2014), a bijective 64-bit mixer */
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

static double gauss_at(unsigned stream, uint64_t counter)
{
    /* Box-Muller on two uniforms from the counter's two SplitMix64 outputs of the stream's key */
    uint64_t key = mix64(E.seed + GOLDEN_GAMMA * (uint64_t)(stream + 1u));
    uint64_t a = mix64(key + GOLDEN_GAMMA * (2u * counter + 1u));
    uint64_t b = mix64(key + GOLDEN_GAMMA * (2u * counter + 2u));
    double u1 = ((double)(a >> 11) + 1.0) / 9007199254740993.0;
    double u2 = (double)(b >> 11) / 9007199254740992.0;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

static double wall_seconds(void)
{
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return (double)(now.tv_sec - E.wall_start.tv_sec) + 1e-9 * (double)(now.tv_nsec - E.wall_start.tv_nsec);
}

static double sim_seconds(void)
{
    return E.timer_ever_started ? (double)(E.avr->cycle - E.t0_cycle) / F_CPU_HZ : 0.0;
}

static uint32_t current_ticks(void)
{
    return (uint32_t)((E.avr->cycle - E.t1_start) / CYCLES_PER_TICK);
}

static void flush_out(void)
{
    size_t done = 0;
    while (done < E.out_len) {
        ssize_t w = write(E.uart_fd, E.out_buf + done, E.out_len - done);
        if (w < 0) {
            if (errno == EINTR) continue;
            E.avr->state = cpu_Done; /* the host went away */
            E.out_len = 0;
            return;
        }
        done += (size_t)w;
    }
    E.out_len = 0;
}

/* ---------------- signal model ---------------- */

static double theta_at(double t)
{
    return 2.0 * M_PI * (E.speed_rpm / 60.0) * (t - E.first_edge_s);
}

/* The reference the firmware selected (ADMUX REFS1:0 at data address 0x7C; ATmega328P
 * datasheet, "ADMUX"): 00 AREF, 01 AVCC, 11 the internal 1.1 V. */
static double reference_v(void)
{
    switch (E.avr->data[0x7C] >> 6) {
    case 0: return E.aref_v > 0.0 ? E.aref_v : E.ref_v;
    case 3: return 1.1;
    default: return E.ref_v;
    }
}

/* The pickup voltage of channel c at t seconds (sample_cycle: the same instant in CPU cycles
 * since t = 0, the key of its noise) as the 10-bit count it converts to. */
static uint32_t channel_millivolts(int c, double t, uint64_t sample_cycle)
{
    const struct channel *ch = &E.ch[c];
    double v = ch->offset_v, theta = theta_at(t), counts, ref_v = reference_v();
    uint32_t n;
    int i;
    for (i = 0; i < ch->n_orders; i++)
        v += ch->orders[i].amplitude_v * cos(ch->orders[i].key * theta - ch->orders[i].phase_rad);
    for (i = 0; i < ch->n_tones; i++)
        v += ch->tones[i].amplitude_v * cos(2.0 * M_PI * ch->tones[i].key * t - ch->tones[i].phase_rad);
    if (ch->noise_rms_v > 0.0) v += ch->noise_rms_v * gauss_at(STREAM_NOISE_CH0 + (unsigned)c, sample_cycle);
    /* ADC = Vin * 1024 / Vref (ATmega328P datasheet, "ADC Conversion Result"), clamped */
    counts = floor(v * 1024.0 / ref_v);
    if (counts < 0.0) counts = 0.0;
    if (counts > 1023.0) counts = 1023.0;
    n = (uint32_t)counts;
    /* simavr scales millivolts as mV * 1023 / Vref: pick the mV that gives exactly n */
    return (uint32_t)((n * (uint32_t)lround(ref_v * 1000.0) + 1022u) / 1023u);
}

/* ---------------- Timer1 pieces simavr lacks ---------------- */

static uint8_t tcnt1_read(struct avr_t *avr, avr_io_addr_t addr, void *param)
{
    uint16_t t = E.timer_started ? (uint16_t)current_ticks() : 0u;
    (void)param;
    avr->data[R_TCNT1L] = (uint8_t)t;
    avr->data[R_TCNT1H] = (uint8_t)(t >> 8);
    return avr->data[addr];
}

static avr_cycle_count_t compb_fire(struct avr_t *avr, avr_cycle_count_t when, void *param);

static void schedule_compb(void)
{
    uint16_t ocr = (uint16_t)(E.avr->data[R_OCR1BL] | (E.avr->data[R_OCR1BH] << 8));
    uint64_t now_tick = (E.avr->cycle - E.t1_start) / CYCLES_PER_TICK;
    uint64_t delta = (uint16_t)(ocr - (uint16_t)now_tick);
    avr_cycle_count_t at;
    if (delta == 0) delta = 65536u; /* a write equal to the count does not match now */
    at = E.t1_start + (now_tick + delta) * CYCLES_PER_TICK;
    avr_cycle_timer_cancel(E.avr, compb_fire, NULL);
    avr_cycle_timer_register(E.avr, at - E.avr->cycle, compb_fire, NULL);
}

static avr_cycle_count_t compb_fire(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    uint8_t tifr = avr->data[R_TIFR1];
    (void)param;
    if (!(tifr & (1u << BIT_OCF1B))) {
        avr->data[R_TIFR1] = (uint8_t)(tifr | (1u << BIT_OCF1B));
        if ((avr->data[R_ADCSRA] & (1u << BIT_ADATE)) && (avr->data[R_ADCSRB] & 7u) == ADTS_T1_COMPB) {
            if (!E.window_open) {
                E.window_open = 1;
                E.window_start = avr->cycle;
                memset(E.isr_cycles, 0, sizeof E.isr_cycles);
                memset(E.isr_count, 0, sizeof E.isr_count);
                memset(E.isr_max, 0, sizeof E.isr_max);
            }
            E.triggers++;
            avr_raise_irq(E.adc_irq + ADC_IRQ_IN_TRIGGER, 1);
        }
    }
    return when + 65536u * CYCLES_PER_TICK; /* the count comes round again */
}

/* TIFR1: a 1 clears that flag, a 0 leaves it alone (datasheet, "TIFR1"). simavr 1.6 could
 * lose a pending overflow or capture flag when the firmware cleared OCF1B. */
static void tifr1_write(struct avr_t *avr, avr_io_addr_t addr, uint8_t v, void *param)
{
    (void)param;
    if (v & (1u << 0)) avr_clear_interrupt(avr, &E.timer1->overflow);
    if (v & (1u << 1)) avr_clear_interrupt(avr, &E.timer1->comp[0].interrupt);
    if (v & (1u << 2)) avr_clear_interrupt(avr, &E.timer1->comp[1].interrupt);
    if (v & (1u << 5)) avr_clear_interrupt(avr, &E.timer1->icr);
    avr->data[addr] &= (uint8_t)~(v & 0x27u);
}

static void ocr1bl_write(struct avr_t *avr, avr_io_addr_t addr, uint8_t v, void *param)
{
    (void)param;
    avr->data[addr] = v; /* the high byte was written first, straight into data[] */
    if (E.timer_started) schedule_compb();
}

/* Compare match A (the firmware's tach hold-off): like OCR1B, OCR1A writes are kept from
 * simavr's timer (which would restart its count); at the match the harness sets OCF1A and
 * raises the interrupt, which simavr delivers if OCIE1A is set. */
static avr_cycle_count_t compa_fire(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)param;
    avr_raise_interrupt(avr, &E.timer1->comp[0].interrupt);
    return when + 65536u * CYCLES_PER_TICK;
}

static void ocr1al_write(struct avr_t *avr, avr_io_addr_t addr, uint8_t v, void *param)
{
    uint16_t ocr;
    uint64_t now_tick, delta;
    (void)param;
    avr->data[addr] = v;
    if (!E.timer_started) return;
    ocr = (uint16_t)(avr->data[R_OCR1AL] | (avr->data[R_OCR1AH] << 8));
    now_tick = (avr->cycle - E.t1_start) / CYCLES_PER_TICK;
    delta = (uint16_t)(ocr - (uint16_t)now_tick);
    if (delta == 0) delta = 65536u;
    avr_cycle_timer_cancel(avr, compa_fire, NULL);
    avr_cycle_timer_register(avr, E.t1_start + (now_tick + delta) * CYCLES_PER_TICK - avr->cycle,
                             compa_fire, NULL);
}

static avr_cycle_count_t tach_fire(struct avr_t *avr, avr_cycle_count_t when, void *param);
static avr_cycle_count_t irq_off_start(struct avr_t *avr, avr_cycle_count_t when, void *param);
static avr_cycle_count_t stall_start(struct avr_t *avr, avr_cycle_count_t when, void *param);
static avr_cycle_count_t tx_stuck_edge(struct avr_t *avr, avr_cycle_count_t when, void *param);

static void schedule_tach(void)
{
    double period_s = 60.0 / E.speed_rpm;
    double edge_s = E.first_edge_s + (double)E.tach_n * period_s;
    if (E.jitter_rms_s > 0.0)
        edge_s += E.jitter_rms_s * gauss_at(STREAM_TACH_JITTER, (uint64_t)E.tach_n);
    if (edge_s < 0.0) edge_s = 0.0;
    E.tach_edge_cycle = (double)E.t0_cycle + edge_s * F_CPU_HZ;
    if (E.tach_edge_cycle < (double)E.avr->cycle + 1.0) E.tach_edge_cycle = (double)E.avr->cycle + 1.0;
    avr_cycle_timer_register(E.avr, (avr_cycle_count_t)ceil(E.tach_edge_cycle) - E.avr->cycle, tach_fire, NULL);
}

static void tach_capture(double edge_cycle)
{
    /* Input capture: ICR1 takes the count at the edge and ICF1 is raised. */
    uint16_t t = (uint16_t)(uint64_t)((edge_cycle - (double)E.t1_start) / CYCLES_PER_TICK);
    E.avr->data[R_ICR1L] = (uint8_t)t;
    E.avr->data[R_ICR1H] = (uint8_t)(t >> 8);
    avr_raise_interrupt(E.avr, &E.timer1->icr);
}

/* Chatter: the edges that follow a real one. The pin bounces back and forth, so each is an
 * edge of the captured polarity: ICR1 takes its count and ICF1 is set, as the hardware does
 * whether or not the capture interrupt is enabled (datasheet, "Input Capture Unit"). */
static avr_cycle_count_t chatter_fire(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)avr;
    (void)param;
    tach_capture(E.chatter_cycle);
    E.chatter_edges++;
    if (--E.chatter_left <= 0) return 0;
    E.chatter_cycle += E.chatter_gap_cycles;
    return when + (avr_cycle_count_t)E.chatter_gap_cycles;
}

static void start_chatter(double edge_cycle)
{
    if (E.chatter_n <= 0) return;
    E.chatter_left = E.chatter_n;
    E.chatter_cycle = edge_cycle + E.chatter_gap_cycles;
    avr_cycle_timer_cancel(E.avr, chatter_fire, NULL);
    avr_cycle_timer_register(E.avr, (avr_cycle_count_t)ceil(E.chatter_cycle) - E.avr->cycle,
                             chatter_fire, NULL);
}

static avr_cycle_count_t tach_fire(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    int rising_capture = (avr->data[R_TCCR1B] >> BIT_ICES1) & 1;
    double width_cycles = (60.0 / E.speed_rpm) / 36.0 * F_CPU_HZ;
    (void)when;
    (void)param;
    if (!E.tach_high) {
        E.tach_high = 1;
        avr->data[R_PINB] |= 1u; /* PB0 high */
        if (rising_capture) {
            tach_capture(E.tach_edge_cycle);
            start_chatter(E.tach_edge_cycle);
        }
        E.tach_edge_cycle += width_cycles;
        return (avr_cycle_count_t)ceil(E.tach_edge_cycle);
    }
    E.tach_high = 0;
    avr->data[R_PINB] &= (uint8_t)~1u; /* PB0 low */
    if (!rising_capture) {
        tach_capture(E.tach_edge_cycle);
        start_chatter(E.tach_edge_cycle);
    }
    E.tach_n++;
    schedule_tach();
    return 0;
}

static void tccr1b_write(struct avr_t *avr, avr_io_addr_t addr, uint8_t v, void *param)
{
    uint8_t old = avr->data[addr];
    (void)param;
    if ((old & CS1_MASK) != (v & CS1_MASK)) {
        E.tccr1b_orig(avr, addr, v, E.tccr1b_param); /* clock change: simavr reconfigures */
        /* simavr also schedules its own compare matches from the OCR values of this moment
         * (OCR1B = 0 matches 8 cycles after every overflow); compare B is ours alone. */
        E.timer1->comp[0].comp_cycles = 0;
        E.timer1->comp[1].comp_cycles = 0;
        if (E.timer_started && !(v & CS1_MASK)) {
            /* stopped (a restart of the firmware): the count starts again from 0 */
            E.timer_started = 0;
            avr_cycle_timer_cancel(avr, compb_fire, NULL);
            avr_cycle_timer_cancel(avr, compa_fire, NULL);
        } else if (!E.timer_started && (v & CS1_MASK)) {
            E.timer_started = 1;
            E.t1_start = avr->cycle;
            if (!E.timer_ever_started) {
                E.timer_ever_started = 1;
                E.t0_cycle = avr->cycle;
                schedule_tach();
                for (int k = 0; k < E.n_irq_off; k++) {
                    avr_cycle_timer_register(avr, (avr_cycle_count_t)(E.irq_off_at_s[k] * F_CPU_HZ) + 1u,
                                             irq_off_start, (void *)(intptr_t)k);
                }
                for (int k = 0; k < E.n_stall; k++) {
                    avr_cycle_timer_register(avr, (avr_cycle_count_t)(E.stall_at_s[k] * F_CPU_HZ) + 1u,
                                             stall_start, NULL);
                }
                if (E.tx_stuck_ms > 0.0) {
                    avr_cycle_timer_register(avr, (avr_cycle_count_t)(E.tx_stuck_at_s * F_CPU_HZ) + 1u,
                                             tx_stuck_edge, (void *)(intptr_t)1);
                    avr_cycle_timer_register(avr, (avr_cycle_count_t)((E.tx_stuck_at_s + E.tx_stuck_ms / 1e3)
                                                                      * F_CPU_HZ) + 1u,
                                             tx_stuck_edge, (void *)(intptr_t)0);
                }
            }
        }
    } else {
        avr->data[addr] = v; /* edge select only: keep simavr's count running */
    }
}

/* ---------------- ADC ---------------- */

static void adc_conversion_started(struct avr_irq_t *irq, uint32_t value, void *param)
{
    union {
        avr_adc_mux_t mux;
        uint32_t v;
    } e;
    double t;
    uint64_t sample_cycle;
    int src;
    (void)irq;
    (void)param;
    memset(&e, 0, sizeof e);
    e.v = value;
    src = (int)e.mux.src;
    E.conversions_started++;
    if (e.mux.kind != ADC_MUX_SINGLE) return; /* the bandgap: simavr's own 1100 mV */
    if (src < 0 || src >= E.n_channels) return;
    sample_cycle = E.avr->cycle - E.t0_cycle + APERTURE_CYCLES;
    t = (double)sample_cycle / F_CPU_HZ;
    avr_raise_irq(E.adc_irq + ADC_IRQ_ADC0 + src, channel_millivolts(src, t, sample_cycle));
}

/* ---------------- fault injection: interrupts held off ---------------- */

#define IRQ_OFF_RECHECK_CYCLES 8u

/* While the window lasts, keep SREG.I clear every few cycles (a reti or an SREG restore in
 * the firmware would set it again); at its end set it, as the code that held it would. */
static avr_cycle_count_t irq_off_tick(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)param;
    if (avr->cycle >= E.irq_off_until) {
        avr_sreg_set(avr, S_I, 1);
        return 0;
    }
    avr_sreg_set(avr, S_I, 0);
    return when + IRQ_OFF_RECHECK_CYCLES;
}

static avr_cycle_count_t irq_off_start(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    int i = (int)(intptr_t)param;
    (void)when;
    E.irq_off_until = avr->cycle + (avr_cycle_count_t)(E.irq_off_us[i] * (F_CPU_HZ / 1e6));
    avr_sreg_set(avr, S_I, 0);
    avr_cycle_timer_register(avr, IRQ_OFF_RECHECK_CYCLES, irq_off_tick, NULL);
    return 0;
}

/* ---------------- fault injection: a stalled main loop, a stuck transmitter ---------------- */

/* The endless loop avr-libc's exit() ends in (`cli` then `rjmp .-2`, opcodes F8 94 FF CF): the
 * stall jumps to its `rjmp`, so interrupts stay on and only the main loop is stuck. */
static avr_flashaddr_t find_stall_loop(void)
{
    for (avr_flashaddr_t a = 0; a + 3u < E.avr->codeend && a + 3u <= E.avr->flashend; a += 2u) {
        if (E.avr->flash[a] == 0xF8 && E.avr->flash[a + 1u] == 0x94 && E.avr->flash[a + 2u] == 0xFF
            && E.avr->flash[a + 3u] == 0xCF) {
            return a + 2u;
        }
    }
    return 0;
}

static avr_cycle_count_t stall_start(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)avr;
    (void)when;
    (void)param;
    E.stall_pending = 1; /* done between instructions, outside handlers, by the main loop */
    return 0;
}

/* UCSR0B writes while the transmitter is stuck lose UDRIE0: the interrupt never comes. */
static void ucsr0b_write(struct avr_t *avr, avr_io_addr_t addr, uint8_t v, void *param)
{
    (void)param;
    if (E.tx_stuck) v &= (uint8_t)~(1u << BIT_UDRIE0);
    if (E.ucsr0b_orig) E.ucsr0b_orig(avr, addr, v, E.ucsr0b_param);
    else avr->data[addr] = v;
}

static avr_cycle_count_t tx_stuck_edge(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)when;
    E.tx_stuck = (int)(intptr_t)param;
    if (E.tx_stuck) avr->data[R_UCSR0B] &= (uint8_t)~(1u << BIT_UDRIE0);
    return 0;
}

/* ---------------- UART ---------------- */

static void uart_output(struct avr_irq_t *irq, uint32_t value, void *param)
{
    (void)irq;
    (void)param;
    E.out_buf[E.out_len++] = (uint8_t)value;
    E.uart_bytes_out++;
    if (E.out_len == sizeof E.out_buf) flush_out();
}

#define BYTE_CYCLES 320u /* 10 bits at 500000 baud */

static avr_cycle_count_t uart_feed(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)param;
    if (E.in_pos < E.in_len) {
        avr_raise_irq(E.uart_irq + UART_IRQ_INPUT, E.in_buf[E.in_pos++]);
        E.uart_bytes_in++;
    }
    (void)avr;
    return when + BYTE_CYCLES;
}

#define POLL_CYCLES 8000u /* 0.5 ms */

static avr_cycle_count_t poll_host(struct avr_t *avr, avr_cycle_count_t when, void *param)
{
    (void)param;
    flush_out();
    if (E.in_pos == E.in_len) {
        E.in_pos = E.in_len = 0;
    }
    if (E.stdin_open && E.in_len < sizeof E.in_buf) {
        ssize_t r = read(0, E.in_buf + E.in_len, sizeof E.in_buf - E.in_len);
        if (r > 0) {
            E.in_len += (size_t)r;
        } else if (r == 0) {
            E.stdin_open = 0;
            if (E.seconds <= 0.0) avr->state = cpu_Done; /* the host closed the link */
        }
    }
    while (E.next_script < E.n_script && sim_seconds() >= E.script[E.next_script].at_s) {
        struct script_item *s = &E.script[E.next_script++];
        if (E.in_len + (size_t)s->n <= sizeof E.in_buf) {
            memcpy(E.in_buf + E.in_len, s->bytes, (size_t)s->n);
            E.in_len += (size_t)s->n;
        }
    }
    if (E.realtime) {
        double ahead = sim_seconds() - wall_seconds();
        if (ahead > 0.002) usleep((useconds_t)(ahead * 1e6));
    }
    if (E.seconds > 0.0 && sim_seconds() >= E.seconds) avr->state = cpu_Done;
    return when + POLL_CYCLES;
}

/* ---------------- report ---------------- */

static void write_report(void)
{
    FILE *f;
    int i, first = 1;
    avr_cycle_count_t window = E.window_open ? E.avr->cycle - E.window_start : 0;
    uint64_t isr_total = 0;
    if (!E.report_path) return;
    f = fopen(E.report_path, "w");
    if (!f) {
        perror(E.report_path);
        return;
    }
    for (i = 0; i < N_VECTORS; i++) isr_total += E.isr_cycles[i];
    fprintf(f, "{\n  \"sim_seconds\": %.6f,\n  \"wall_seconds\": %.3f,\n", sim_seconds(), wall_seconds());
    fprintf(f, "  \"cpu_hz\": %u,\n  \"window_cycles\": %llu,\n  \"isr_cycles\": %llu,\n", F_CPU_HZ,
            (unsigned long long)window, (unsigned long long)isr_total);
    fprintf(f, "  \"isr_load\": %.6f,\n", window ? (double)isr_total / (double)window : 0.0);
    fprintf(f, "  \"adc_triggers\": %llu,\n  \"conversions_started\": %llu,\n",
            (unsigned long long)E.triggers, (unsigned long long)E.conversions_started);
    fprintf(f, "  \"chatter_edges\": %llu,\n", (unsigned long long)E.chatter_edges);
    fprintf(f, "  \"stalls\": %llu,\n  \"reset_vector_entries\": %llu,\n",
            (unsigned long long)E.stalls, (unsigned long long)E.reset_vector_entries);
    fprintf(f, "  \"wdtcsr\": %u,\n  \"mcusr\": %u,\n", E.avr->data[R_WDTCSR], E.avr->data[R_MCUSR]);
    fprintf(f, "  \"tach_edges\": %ld,\n  \"uart_bytes_out\": %llu,\n  \"uart_bytes_in\": %llu,\n",
            E.tach_n, (unsigned long long)E.uart_bytes_out, (unsigned long long)E.uart_bytes_in);
    fprintf(f, "  \"cpu_state\": %d,\n  \"handlers\": {", E.avr->state);
    for (i = 0; i < N_VECTORS; i++) {
        if (!E.isr_count[i]) continue;
        fprintf(f, "%s\n    \"%s\": {\"count\": %llu, \"cycles\": %llu, \"max_cycles\": %llu, \"mean_cycles\": %.1f}",
                first ? "" : ",", vector_names[i], (unsigned long long)E.isr_count[i],
                (unsigned long long)E.isr_cycles[i], (unsigned long long)E.isr_max[i],
                (double)E.isr_cycles[i] / (double)E.isr_count[i]);
        first = 0;
    }
    fprintf(f, "\n  }\n}\n");
    fclose(f);
}

/* ---------------- arguments ---------------- */

static void usage(void)
{
    fprintf(stderr, "usage: tt_emu [--speed-rpm X] [--first-edge-s X] [--jitter-rms-s X] [--ref-v X] [--aref-v X] "
                    "[--seed N] [--channel OFF,NOISE]... [--order CH,K,AMP,PH]... [--tone CH,HZ,AMP,PH]... "
                    "[--seconds X] [--realtime] [--report PATH] [--script HEX@S]... [--irq-off S,US]... "
                    "[--tach-chatter N,GAP] [--mcusr HEX] [--r2 HEX] [--wdt-running] [--stall S]... "
                    "[--tx-stuck S,MS] FIRMWARE.elf\n");
    exit(2);
}

static void add_term(const char *arg, int is_order)
{
    int c;
    double key, amp, ph;
    if (sscanf(arg, "%d,%lf,%lf,%lf", &c, &key, &amp, &ph) != 4 || c < 0 || c >= MAX_CH) usage();
    if (c >= E.n_channels) E.n_channels = c + 1;
    if (is_order) {
        if (E.ch[c].n_orders == MAX_TERMS) usage();
        E.ch[c].orders[E.ch[c].n_orders++] = (struct term){key, amp, ph * M_PI / 180.0};
    } else {
        if (E.ch[c].n_tones == MAX_TERMS) usage();
        E.ch[c].tones[E.ch[c].n_tones++] = (struct term){key, amp, ph * M_PI / 180.0};
    }
}

static void add_script(const char *arg)
{
    const char *at = strchr(arg, '@');
    struct script_item *s;
    size_t i, n;
    if (!at || E.n_script == 32) usage();
    s = &E.script[E.n_script++];
    n = (size_t)(at - arg) / 2u;
    if (n > sizeof s->bytes) usage();
    for (i = 0; i < n; i++) {
        unsigned b;
        if (sscanf(arg + 2 * i, "%2x", &b) != 1) usage();
        s->bytes[i] = (uint8_t)b;
    }
    s->n = (int)n;
    s->at_s = atof(at + 1);
}

static void quiet_logger(avr_t *avr, const int level, const char *format, va_list ap)
{
    (void)avr;
    if (level <= LOG_ERROR) vfprintf(stderr, format, ap);
}

int main(int argc, char **argv)
{
    elf_firmware_t fw;
    const char *elf = NULL;
    int i, channels_declared = 0;
    memset(&E, 0, sizeof E);
    memset(&fw, 0, sizeof fw);
    E.speed_rpm = 1800.0;
    E.first_edge_s = 0.001;
    E.ref_v = 5.0;
    E.seed = 1;
    E.preset_mcusr = 0x01; /* a board just powered, no bootloader: PORF */
    for (i = 1; i < argc; i++) {
        const char *a = argv[i];
        const char *v = i + 1 < argc ? argv[i + 1] : NULL;
        if (!strcmp(a, "--realtime")) { E.realtime = 1; continue; }
        if (!strcmp(a, "--wdt-running")) { E.wdt_running = 1; continue; }
        if (a[0] != '-') { elf = a; continue; }
        if (!v) usage();
        i++;
        if (!strcmp(a, "--speed-rpm")) E.speed_rpm = atof(v);
        else if (!strcmp(a, "--first-edge-s")) E.first_edge_s = atof(v);
        else if (!strcmp(a, "--jitter-rms-s")) E.jitter_rms_s = atof(v);
        else if (!strcmp(a, "--ref-v")) E.ref_v = atof(v);
        else if (!strcmp(a, "--aref-v")) E.aref_v = atof(v);
        else if (!strcmp(a, "--seed")) E.seed = strtoull(v, NULL, 0) * 2654435761ULL + 1u;
        else if (!strcmp(a, "--seconds")) E.seconds = atof(v);
        else if (!strcmp(a, "--report")) E.report_path = v;
        else if (!strcmp(a, "--script")) add_script(v);
        else if (!strcmp(a, "--irq-off")) {
            if (E.n_irq_off == 8 || sscanf(v, "%lf,%lf", &E.irq_off_at_s[E.n_irq_off],
                                           &E.irq_off_us[E.n_irq_off]) != 2) usage();
            E.n_irq_off++;
        } else if (!strcmp(a, "--tach-chatter")) {
            if (sscanf(v, "%d,%lf", &E.chatter_n, &E.chatter_gap_cycles) != 2 || E.chatter_n < 0
                || E.chatter_gap_cycles < 1.0) usage();
        }
        else if (!strcmp(a, "--mcusr")) E.preset_mcusr = (int)strtol(v, NULL, 16);
        else if (!strcmp(a, "--r2")) E.preset_r2 = (int)strtol(v, NULL, 16);
        else if (!strcmp(a, "--stall")) {
            if (E.n_stall == 4) usage();
            E.stall_at_s[E.n_stall++] = atof(v);
        } else if (!strcmp(a, "--tx-stuck")) {
            if (sscanf(v, "%lf,%lf", &E.tx_stuck_at_s, &E.tx_stuck_ms) != 2 || E.tx_stuck_ms <= 0.0) usage();
        }
        else if (!strcmp(a, "--order")) add_term(v, 1);
        else if (!strcmp(a, "--tone")) add_term(v, 0);
        else if (!strcmp(a, "--channel")) {
            if (channels_declared == MAX_CH) usage();
            if (sscanf(v, "%lf,%lf", &E.ch[channels_declared].offset_v,
                       &E.ch[channels_declared].noise_rms_v) != 2) usage();
            channels_declared++;
            if (channels_declared > E.n_channels) E.n_channels = channels_declared;
        } else usage();
    }
    if (!elf || E.speed_rpm <= 0.0 || E.ref_v <= 0.0) usage();

    /* UART bytes go to the real stdout; everything simavr prints goes to stderr */
    E.uart_fd = dup(1);
    dup2(2, 1);
    signal(SIGPIPE, SIG_IGN);
    signal(SIGTERM, on_sigterm);
    signal(SIGINT, on_sigterm);
    fcntl(0, F_SETFL, fcntl(0, F_GETFL) | O_NONBLOCK);
    E.stdin_open = 1;
    clock_gettime(CLOCK_MONOTONIC, &E.wall_start);

    avr_global_logger_set(quiet_logger);
    if (elf_read_firmware(elf, &fw) != 0) {
        fprintf(stderr, "tt_emu: cannot read %s\n", elf);
        return 2;
    }
    E.avr = avr_make_mcu_by_name("atmega328p");
    if (!E.avr) {
        fprintf(stderr, "tt_emu: simavr has no atmega328p\n");
        return 2;
    }
    avr_init(E.avr);
    E.avr->log = LOG_ERROR;
    fw.frequency = F_CPU_HZ;
    avr_load_firmware(E.avr, &fw);
    E.avr->frequency = F_CPU_HZ;
    E.avr->vcc = E.avr->avcc = E.avr->aref = (uint32_t)lround(E.ref_v * 1000.0);
    if (E.aref_v > 0.0) E.avr->aref = (uint32_t)lround(E.aref_v * 1000.0);

    /* UART 0 <-> host, without simavr's console echo */
    {
        uint32_t flags = 0;
        avr_ioctl(E.avr, AVR_IOCTL_UART_GET_FLAGS('0'), &flags);
        flags &= ~(uint32_t)(AVR_UART_FLAG_STDIO | AVR_UART_FLAG_POLL_SLEEP);
        avr_ioctl(E.avr, AVR_IOCTL_UART_SET_FLAGS('0'), &flags);
    }
    E.uart_irq = avr_io_getirq(E.avr, AVR_IOCTL_UART_GETIRQ('0'), 0);
    avr_irq_register_notify(E.uart_irq + UART_IRQ_OUTPUT, uart_output, NULL);
    E.adc_irq = avr_io_getirq(E.avr, AVR_IOCTL_ADC_GETIRQ, 0);
    avr_irq_register_notify(E.adc_irq + ADC_IRQ_OUT_TRIGGER, adc_conversion_started, NULL);

    /* Timer1 pieces: exact TCNT1, OCR1B kept from simavr's timer, TCCR1B edge changes */
    E.avr->io[AVR_DATA_TO_IO(R_TCNT1L)].r.c = tcnt1_read;
    E.avr->io[AVR_DATA_TO_IO(R_TCNT1L)].r.param = NULL;
    E.avr->io[AVR_DATA_TO_IO(R_OCR1BL)].w.c = ocr1bl_write;
    E.avr->io[AVR_DATA_TO_IO(R_OCR1BL)].w.param = NULL;
    E.avr->io[AVR_DATA_TO_IO(R_OCR1AL)].w.c = ocr1al_write;
    E.avr->io[AVR_DATA_TO_IO(R_OCR1AL)].w.param = NULL;
    for (avr_io_t *port = E.avr->io_port; port; port = port->next) {
        if (!strcmp(port->kind, "timer") && ((avr_timer_t *)port)->name == '1') {
            E.timer1 = (avr_timer_t *)port;
        }
    }
    if (!E.timer1) {
        fprintf(stderr, "tt_emu: simavr has no Timer1\n");
        return 2;
    }
    E.avr->io[AVR_DATA_TO_IO(R_TIFR1)].w.c = tifr1_write;
    E.avr->io[AVR_DATA_TO_IO(R_TIFR1)].w.param = NULL;
    E.tccr1b_orig = E.avr->io[AVR_DATA_TO_IO(R_TCCR1B)].w.c;
    E.tccr1b_param = E.avr->io[AVR_DATA_TO_IO(R_TCCR1B)].w.param;
    if (!E.tccr1b_orig) {
        fprintf(stderr, "tt_emu: simavr has no TCCR1B handler\n");
        return 2;
    }
    E.avr->io[AVR_DATA_TO_IO(R_TCCR1B)].w.c = tccr1b_write;
    E.avr->io[AVR_DATA_TO_IO(R_TCCR1B)].w.param = NULL;
    E.ucsr0b_orig = E.avr->io[AVR_DATA_TO_IO(R_UCSR0B)].w.c;
    E.ucsr0b_param = E.avr->io[AVR_DATA_TO_IO(R_UCSR0B)].w.param;
    E.avr->io[AVR_DATA_TO_IO(R_UCSR0B)].w.c = ucsr0b_write;
    E.avr->io[AVR_DATA_TO_IO(R_UCSR0B)].w.param = NULL;

    /* what a reset and a bootloader leave behind, before the first instruction */
    E.avr->data[R_MCUSR] = (uint8_t)E.preset_mcusr;
    E.avr->data[2] = (uint8_t)E.preset_r2;
    if (E.wdt_running) {
        /* the watchdog's change sequence, through simavr's own handler: on, 16 ms, reset mode */
        avr_io_write_t w = E.avr->io[AVR_DATA_TO_IO(R_WDTCSR)].w.c;
        void *wp = E.avr->io[AVR_DATA_TO_IO(R_WDTCSR)].w.param;
        if (!w) {
            fprintf(stderr, "tt_emu: simavr has no watchdog handler\n");
            return 2;
        }
        w(E.avr, R_WDTCSR, (uint8_t)((1u << BIT_WDCE) | (1u << BIT_WDE)), wp);
        w(E.avr, R_WDTCSR, (uint8_t)(1u << BIT_WDE), wp);
    }
    if (E.n_stall) {
        E.stall_pc = find_stall_loop();
        if (!E.stall_pc) {
            fprintf(stderr, "tt_emu: no endless loop (cli; rjmp .-2) in the firmware to stall in\n");
            return 2;
        }
    }

    avr_cycle_timer_register(E.avr, POLL_CYCLES, poll_host, NULL);
    avr_cycle_timer_register(E.avr, BYTE_CYCLES, uart_feed, NULL);

    for (;;) {
        avr_flashaddr_t pc = E.avr->pc;
        int reti = E.in_isr && pc + 1u < E.avr->flashend
                   && (uint16_t)(E.avr->flash[pc] | (E.avr->flash[pc + 1u] << 8)) == OPCODE_RETI;
        int state = avr_run(E.avr);
        if (state == cpu_Done || state == cpu_Crashed || g_stop_requested) break;
        if (E.avr->pc == 0 && pc != 0) {
            E.reset_vector_entries++; /* a restart: a handler that jumped here never returns */
            E.in_isr = 0;
            continue;
        }
        if (reti) {
            uint64_t spent = E.avr->cycle - E.isr_enter;
            E.in_isr = 0;
            E.isr_cycles[E.isr_vector] += spent;
            E.isr_count[E.isr_vector]++;
            if (spent > E.isr_max[E.isr_vector]) E.isr_max[E.isr_vector] = spent;
        }
        if (!E.in_isr && E.avr->pc != pc && E.avr->pc > 0
            && E.avr->pc < N_VECTORS * VECTOR_BYTES && E.avr->pc % VECTOR_BYTES == 0) {
            /* the core just took an interrupt: the 4-cycle response is already counted
             * in avr->cycle, so count it here too */
            E.in_isr = 1;
            E.isr_vector = (int)(E.avr->pc / VECTOR_BYTES);
            E.isr_enter = E.avr->cycle - 4u;
        }
        if (E.stall_pending && !E.in_isr && E.avr->sreg[S_I]) {
            E.stall_pending = 0; /* in the main loop, interrupts on: stall it there */
            E.stalls++;
            E.avr->pc = E.stall_pc;
        }
    }
    flush_out();
    write_report();
    if (E.avr->state == cpu_Crashed) {
        fprintf(stderr, "tt_emu: the firmware crashed at pc 0x%x\n", (unsigned)E.avr->pc);
        return 1;
    }
    return 0;
}
