/* tt_adc.h - stepping the ADC trigger (Timer1 compare-match B) from one conversion to the next.
 *
 * The ADC interrupt of conversion i writes OCR1B for conversion i + 1. If that time is already
 * past (or too close to write safely), the compare match would come one whole timer wrap
 * (65536 ticks = 32.8 ms at 2 MHz) late and every later sample time would be wrong, with no
 * gap in the indices. Instead the trigger steps on to the first channel-set boundary (an index
 * that is a multiple of the channel count) safely ahead; the conversions in between are never
 * made, their indices are skipped and counted as dropped, so the host sees a gap and every
 * sample it does get keeps the exact relation tick = start_tick + index * period_ticks. */
#ifndef TT_ADC_H
#define TT_ADC_H

#include <stdint.h>

/* A trigger must be at least this far ahead of the count when OCR1B is written: the writes
 * of OCR1B and TIFR1 follow within a few dozen CPU cycles (16 ticks = 128 cycles). */
#ifndef TT_ADC_LEAD_TICKS
#define TT_ADC_LEAD_TICKS 16u
#endif

/* Step the trigger time *due (of the next conversion) until it is at least `lead` ticks
 * ahead of `now` (16-bit timer arithmetic: "ahead" means within half a timer period).
 * set_mask = channels - 1 for 1 or 2 channels (the index of a channel-set start has these
 * bits clear); next_phase = the next conversion's index & set_mask. Returns the number of
 * conversions skipped: 0 when *due was already safely ahead; otherwise *due is the trigger
 * of index next + skipped, a channel-set start. */
static inline uint16_t tt_adc_step(uint16_t *due, uint16_t now, uint16_t period,
                                   uint8_t next_phase, uint8_t set_mask, uint16_t lead)
{
    uint16_t d = *due;
    uint16_t skipped = 0;
    uint8_t phase = next_phase;
    for (;;) {
        uint16_t ahead = (uint16_t)(d - now);
        if (ahead >= lead && ahead < 0x8000u && (skipped == 0u || (phase & set_mask) == 0u)) {
            break;
        }
        d = (uint16_t)(d + period);
        phase++;
        skipped++;
    }
    *due = d;
    return skipped;
}

#endif /* TT_ADC_H */
