/* tt_tachq.h - queue of once-per-rev edges from the input-capture interrupt to the main loop.
 * Every edge is counted (edge_count, edges_total) even when the queue is full, so a lost edge
 * shows as a gap in the tach messages' edge_count and in `dropped`. */
#ifndef TT_TACHQ_H
#define TT_TACHQ_H

#include <stdint.h>

#define TT_TACHQ_LEN 8u /* power of two */

struct tt_tach_event {
    uint32_t tick;
    uint16_t edge_count;
};

struct tt_tachq {
    struct tt_tach_event event[TT_TACHQ_LEN];
    volatile uint8_t head;
    volatile uint8_t tail;
    uint16_t edge_count;            /* edges since reset, mod 2^16 (the first edge is 1) */
    volatile uint32_t edges_total;  /* edges since reset */
    volatile uint16_t dropped;      /* edges not queued because the queue was full */
    volatile uint16_t suppressed;   /* hold-off windows in which more edges came (chatter) */
};

/* Tach hold-off after an accepted edge: 1/16 of the last period (22.5 degrees), at least
 * 100 us and at most 15 ms (it is timed by a 16-bit compare register). A chattering input
 * gives bursts of edges right after the real one; at 2 MHz: 200..30000 ticks. */
#define TT_TACH_HOLDOFF_MIN_TICKS 200u
#define TT_TACH_HOLDOFF_MAX_TICKS 30000u
#define TT_TACH_HOLDOFF_SHIFT 4u

static inline uint16_t tt_tach_holdoff_ticks(uint32_t last_period_ticks)
{
    uint32_t h = last_period_ticks >> TT_TACH_HOLDOFF_SHIFT;
    if (h > TT_TACH_HOLDOFF_MAX_TICKS) {
        return TT_TACH_HOLDOFF_MAX_TICKS;
    }
    return h < TT_TACH_HOLDOFF_MIN_TICKS ? (uint16_t)TT_TACH_HOLDOFF_MIN_TICKS : (uint16_t)h;
}

/* Interrupt side: record an edge at tick. Returns 1 if it could not be queued. */
static inline uint8_t tt_tachq_put(struct tt_tachq *q, uint32_t tick)
{
    uint8_t next = (uint8_t)((q->head + 1u) & (TT_TACHQ_LEN - 1u));
    q->edge_count++;
    q->edges_total++;
    if (next == q->tail) {
        q->dropped++;
        return 1;
    }
    q->event[q->head].tick = tick;
    q->event[q->head].edge_count = q->edge_count;
    q->head = next;
    return 0;
}

/* Main-loop side: the oldest queued edge, or NULL. */
static inline const struct tt_tach_event *tt_tachq_peek(const struct tt_tachq *q)
{
    return q->tail == q->head ? (const struct tt_tach_event *)0 : &q->event[q->tail];
}

static inline void tt_tachq_release(struct tt_tachq *q)
{
    q->tail = (uint8_t)((q->tail + 1u) & (TT_TACHQ_LEN - 1u));
}

#endif /* TT_TACHQ_H */
