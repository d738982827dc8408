/* tt_blocks.h - the sample ring: conversions are filed into fixed-size blocks by the ADC
 * interrupt and sent one block per samples message by the main loop.
 *
 * Blocks always hold whole channel sets and start at a conversion index that is a multiple
 * of the channel count, as protocol v1 requires. When every block is waiting to be sent, the
 * block being filled is thrown away whole and refilled, and its samples are counted in
 * `dropped`; the host sees exactly that gap in first_index. Nothing is lost silently. */
#ifndef TT_BLOCKS_H
#define TT_BLOCKS_H

#include <stdint.h>

#ifndef TT_BLOCK_MAX_SAMPLES
#define TT_BLOCK_MAX_SAMPLES 40u /* per message; 2+5+80+2 = 89-byte frame */
#endif
#ifndef TT_BLOCK_COUNT
#define TT_BLOCK_COUNT 6u /* 5 waiting + 1 filling: 25 ms of 2 x 4 kSps */
#endif

struct tt_block {
    uint32_t first_index;
    uint16_t samples[TT_BLOCK_MAX_SAMPLES];
};

struct tt_blocks {
    struct tt_block block[TT_BLOCK_COUNT];
    volatile uint8_t head;      /* block being filled (interrupt side) */
    volatile uint8_t tail;      /* oldest block waiting to be sent (main-loop side) */
    uint8_t fill;               /* samples in the block being filled */
    uint8_t block_len;          /* samples per block: a multiple of the channel count */
    uint32_t next_index;        /* conversion index of the next sample */
    volatile uint32_t dropped;  /* samples thrown away because every block was waiting */
};

/* Empty the ring and start counting at conversion index 0 with block_len samples a block
 * (1..TT_BLOCK_MAX_SAMPLES, a multiple of the channel count). */
void tt_blocks_reset(struct tt_blocks *r, uint8_t block_len);

/* Samples per block for a stream: about 20 ms of data, whole channel sets, at most
 * TT_BLOCK_MAX_SAMPLES. */
uint8_t tt_blocks_len_for(uint16_t rate_hz, uint8_t channels);

/* Interrupt side: file one conversion. Returns 1 if a block was dropped, else 0. */
static inline uint8_t tt_blocks_put(struct tt_blocks *r, uint16_t sample)
{
    struct tt_block *b = &r->block[r->head];
    uint8_t next;
    if (r->fill == 0u) {
        b->first_index = r->next_index;
    }
    b->samples[r->fill++] = sample;
    r->next_index++;
    if (r->fill < r->block_len) {
        return 0;
    }
    r->fill = 0;
    next = (uint8_t)(r->head + 1u);
    if (next == TT_BLOCK_COUNT) {
        next = 0;
    }
    if (next == r->tail) {
        r->dropped += r->block_len; /* refill the same block: its samples are lost */
        return 1;
    }
    r->head = next;
    return 0;
}

/* Interrupt side: the next n conversions (from next_index on) will never be made (their
 * trigger time passed, see tt_adc.h). A block holds consecutive indices only, so the samples
 * already in the block being filled go with them; all are counted in `dropped` and the next
 * block starts at the index after the skipped ones. Keep next_index + n a multiple of the
 * channel count. */
static inline void tt_blocks_skip(struct tt_blocks *r, uint16_t n)
{
    r->dropped += (uint32_t)r->fill + n;
    r->fill = 0;
    r->next_index += n;
}

/* Main-loop side: the oldest complete block, or NULL if none is waiting. */
static inline const struct tt_block *tt_blocks_peek(const struct tt_blocks *r)
{
    return r->tail == r->head ? (const struct tt_block *)0 : &r->block[r->tail];
}

/* Main-loop side: the block returned by tt_blocks_peek has been sent. */
static inline void tt_blocks_release(struct tt_blocks *r)
{
    uint8_t next = (uint8_t)(r->tail + 1u);
    r->tail = next == TT_BLOCK_COUNT ? 0u : next;
}

#endif /* TT_BLOCKS_H */
