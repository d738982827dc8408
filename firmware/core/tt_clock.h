/* tt_clock.h - the board's one clock: Timer1 (16 bits) extended to 32 bits by counting its
 * overflows in software. */
#ifndef TT_CLOCK_H
#define TT_CLOCK_H

#include <stdint.h>

/* Extend a 16-bit timer value to 32 bits.
 *   overflows:   the software count of overflows serviced so far (the high 16 bits);
 *   low:         the timer value (TCNT1, or ICR1 for a capture);
 *   ovf_pending: nonzero if the overflow flag (TOV1) is set but not yet serviced.
 * With interrupts off, a pending overflow means the timer wrapped after `overflows` was last
 * counted. If `low` is in the lower half, it was read after that wrap, so it belongs to the
 * next period; if in the upper half, it was taken just before the wrap. This is exact while
 * the code runs within half a timer period (32768 ticks = 16.4 ms at 2 MHz) of the wrap. */
static inline uint32_t tt_extend_ticks(uint16_t overflows, uint16_t low, uint8_t ovf_pending)
{
    if (ovf_pending && low < 0x8000u) {
        overflows++;
    }
    return ((uint32_t)overflows << 16) | low;
}

#endif /* TT_CLOCK_H */
