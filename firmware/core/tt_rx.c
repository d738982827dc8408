/* tt_rx.c - delimiter splitting with overflow resynchronisation. */
#include "tt_rx.h"

void tt_rx_init(struct tt_rx *rx, uint8_t *buf, uint16_t cap)
{
    rx->buf = buf;
    rx->cap = cap;
    rx->len = 0;
    rx->discarding = 0;
}

enum tt_rx_result tt_rx_byte(struct tt_rx *rx, uint8_t byte)
{
    if (byte == 0u) {
        if (rx->discarding) {
            rx->discarding = 0;
            rx->len = 0;
            return TT_RX_MORE;
        }
        return rx->len ? TT_RX_BODY : TT_RX_MORE;
    }
    if (rx->discarding) {
        return TT_RX_MORE;
    }
    if (rx->len >= rx->cap) {
        rx->discarding = 1;
        rx->len = 0;
        return TT_RX_TOO_LONG;
    }
    rx->buf[rx->len++] = byte;
    return TT_RX_MORE;
}
