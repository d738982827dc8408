/* tt_health.h - why the board started, how it restarts after a stall, and the measured ADC
 * reference: the portable rules behind avr/main.c's reset handling and AVCC measurement, kept
 * here so the host tests them (hosttest/tt_core_check.c).
 *
 * Reset causes (identity.reset_flags, protocol/catalogue.yaml `reset_flags`):
 *  - MCUSR holds PORF/EXTRF/BORF/WDRF (bits 0..3, the same bit numbers as the catalogue) when
 *    the firmware starts without a bootloader, or after one that leaves MCUSR alone (the old
 *    Nano bootloader);
 *  - optiboot (Uno, newer Nano) clears MCUSR and, from version 5 on (from memory), passes the
 *    original value in register r2, which the firmware saves in .init0 before anything runs;
 *  - a stall restart (the watchdog interrupt found the main loop stuck and jumped to the
 *    reset vector, see avr/main.c) leaves a marker in .noinit RAM, which the C runtime does not
 *    clear; a power-on, brown-out or external reset in MCUSR overrides it (RAM is not kept). */
#ifndef TT_HEALTH_H
#define TT_HEALTH_H

#include <stdint.h>

#include "tt_protocol_defs.h"

#define TT_MCUSR_CAUSE_BITS 0x0Fu /* PORF, EXTRF, BORF, WDRF */
#define TT_RESTART_MAGIC 0x7A5Cu

/* Where the main loop was when it stalled (kept in the restart marker). */
enum tt_stall_site { TT_STALL_LOOP = 0, TT_STALL_TRANSMIT = 1 };

/* The restart marker in .noinit RAM: magic, site and the site's complement, so random RAM at
 * power-up passes for a marker with a chance of about 2^-24. */
struct tt_restart_marker {
    uint16_t magic;
    uint8_t site;
    uint8_t site_check;
};

static inline void tt_marker_set(volatile struct tt_restart_marker *m, uint8_t site)
{
    m->magic = TT_RESTART_MAGIC;
    m->site = site;
    m->site_check = (uint8_t)~site;
}

/* 1 and *site when the marker is valid; the marker is cleared either way. */
static inline uint8_t tt_marker_take(volatile struct tt_restart_marker *m, uint8_t *site)
{
    uint8_t site_now = m->site;
    uint8_t check = (uint8_t)~site_now;
    uint8_t ok = m->magic == TT_RESTART_MAGIC && m->site_check == check;
    *site = site_now;
    m->magic = 0u;
    return ok;
}

/* identity.reset_flags from what the firmware found at its start: MCUSR as read (before it is
 * cleared), r2 as the bootloader left it, and the restart marker (valid, site). */
static inline uint8_t tt_reset_flags(uint8_t mcusr, uint8_t r2, uint8_t marker_ok, uint8_t site)
{
    uint8_t hw = (uint8_t)(mcusr & TT_MCUSR_CAUSE_BITS);
    if (hw & (TT_RF_POWER_ON | TT_RF_EXTERNAL | TT_RF_BROWN_OUT)) {
        return hw; /* a real reset: RAM (and any marker in it) is not to be trusted */
    }
    if (marker_ok) {
        return (uint8_t)(hw | TT_RF_STALL_RESTART
                         | (site == TT_STALL_TRANSMIT ? TT_RF_STALL_IN_TRANSMIT : 0u));
    }
    if (hw) {
        return hw;
    }
    /* MCUSR cleared by a bootloader: r2 holds its copy if it passes one (only cause bits,
     * never none of them: anything else is what an older bootloader left in r2) */
    if ((r2 & TT_MCUSR_CAUSE_BITS) != 0u && (r2 & (uint8_t)~TT_MCUSR_CAUSE_BITS) == 0u) {
        return (uint8_t)(r2 | TT_RF_FROM_BOOTLOADER);
    }
    return TT_RF_UNKNOWN;
}

/* status.error_flags bits that say the firmware restarted (kept until the next start). */
static inline uint8_t tt_restart_error_flags(uint8_t reset_flags)
{
    uint8_t f = 0u;
    if (reset_flags & TT_RF_STALL_RESTART) {
        f |= TT_EF_RESTARTED;
    }
    if (reset_flags & TT_RF_STALL_IN_TRANSMIT) {
        f |= TT_EF_TX_OVERRUN;
    }
    return f;
}

/* AVCC against the internal bandgap: with AVCC as the reference and the 1.1 V bandgap as the
 * input, ADC = floor(1100 mV * 1024 / AVCC) (ATmega328P datasheet, "ADC Conversion Result"),
 * so a count n means 1100 * 1024 / AVCC lies in [n, n + 1): the middle of that interval,
 * n + 1/2, gives AVCC = 1100 * 1024 / (n + 1/2) with at most +-0.23 % of quantisation error at
 * n = 220 (5.1 V) instead of a bias of up to 0.45 %. sum = n conversions added up; rounded to
 * the nearest mV; 0 when sum is 0 (no measurement). The bandgap's own tolerance (1.0..1.2 V,
 * from memory) is the dominant uncertainty: see firmware/README.md. */
#define TT_BANDGAP_MV 1100u

static inline uint16_t tt_avcc_mv(uint32_t sum, uint8_t n)
{
    uint32_t num = (uint32_t)TT_BANDGAP_MV * 1024u * n;
    uint32_t mv;
    uint32_t den = sum + n / 2u; /* + half a count per conversion */
    if (sum == 0u) {
        return 0u;
    }
    mv = (num + den / 2u) / den;
    return mv > 0xFFFFu ? (uint16_t)0xFFFFu : (uint16_t)mv;
}

/* A wait bound on the 32-bit tick: nonzero once now has reached deadline (wrap-safe). */
static inline uint8_t tt_deadline_passed(uint32_t now, uint32_t deadline)
{
    return (int32_t)(now - deadline) >= 0;
}

#endif /* TT_HEALTH_H */
