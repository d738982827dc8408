/* tt_blocks.c - sample ring set-up. */
#include "tt_blocks.h"

void tt_blocks_reset(struct tt_blocks *r, uint8_t block_len)
{
    r->head = 0;
    r->tail = 0;
    r->fill = 0;
    r->block_len = block_len;
    r->next_index = 0;
}

uint8_t tt_blocks_len_for(uint16_t rate_hz, uint8_t channels)
{
    uint32_t per_20ms = ((uint32_t)rate_hz * channels) / 50u;
    uint8_t len;
    if (channels == 0u) {
        return 0;
    }
    if (per_20ms > TT_BLOCK_MAX_SAMPLES) {
        per_20ms = TT_BLOCK_MAX_SAMPLES;
    }
    len = (uint8_t)(per_20ms - per_20ms % channels);
    return len < channels ? channels : len;
}
