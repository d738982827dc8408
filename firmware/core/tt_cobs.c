/* tt_cobs.c - COBS encoder/decoder (Cheshire & Baker 1999). */
#include "tt_cobs.h"

size_t tt_cobs_encode(const uint8_t *in, size_t n, uint8_t *out)
{
    size_t code_at = 0, o = 1, i;
    uint8_t code = 1;
    for (i = 0; i < n; i++) {
        if (in[i] == 0) {
            out[code_at] = code;
            code_at = o++;
            code = 1;
        } else {
            out[o++] = in[i];
            code++;
            if (code == 0xFF) {
                out[code_at] = code;
                if (i + 1u == n) {
                    return o; /* a full block at the end needs no empty block after it */
                }
                code_at = o++;
                code = 1;
            }
        }
    }
    out[code_at] = code;
    return o;
}

uint8_t tt_cobs_encode_ring(const uint8_t *in, uint8_t n, uint8_t *ring256, uint8_t head)
{
    uint8_t code_at = head, o = (uint8_t)(head + 1u), i, code = 1;
    for (i = 0; i < n; i++) {
        if (in[i] == 0) {
            ring256[code_at] = code;
            code_at = o++;
            code = 1;
        } else {
            ring256[o++] = in[i];
            code++;
            if (code == 0xFF) {
                ring256[code_at] = code;
                if ((uint8_t)(i + 1u) == n) {
                    ring256[o++] = 0;
                    return (uint8_t)(o - head);
                }
                code_at = o++;
                code = 1;
            }
        }
    }
    ring256[code_at] = code;
    ring256[o++] = 0;
    return (uint8_t)(o - head);
}

int tt_cobs_decode(uint8_t *buf, size_t n)
{
    size_t r = 0, w = 0;
    while (r < n) {
        uint8_t code = buf[r];
        size_t k;
        if (code == 0 || r + code > n) {
            return -1; /* a zero inside the body, or a block running past the end */
        }
        r++;
        for (k = 1; k < code; k++) {
            if (buf[r] == 0) {
                return -1;
            }
            buf[w++] = buf[r++];
        }
        if (code != 0xFF && r < n) {
            buf[w++] = 0;
        }
    }
    return (int)w;
}
