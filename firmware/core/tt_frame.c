/* tt_frame.c - sealing, encoding and checking protocol frames. */
#include "tt_frame.h"

#include "tt_cobs.h"
#include "tt_crc.h"

struct tt_msg_shape {
    uint8_t type;
    uint8_t fixed_bytes;
    uint8_t rest_item_bytes;
    uint8_t dir;
};

#define TT_SHAPE_ROW(NAME, ID, FIXED, REST, DIR) {ID, FIXED, REST, DIR},
static const struct tt_msg_shape tt_shapes[] = {TT_FOR_EACH_MESSAGE(TT_SHAPE_ROW)};
#undef TT_SHAPE_ROW

static const struct tt_msg_shape *tt_shape(uint8_t type)
{
    uint8_t i;
    for (i = 0; i < sizeof tt_shapes / sizeof tt_shapes[0]; i++) {
        if (tt_shapes[i].type == type) {
            return &tt_shapes[i];
        }
    }
    return NULL;
}

const char *tt_frame_status_name(enum tt_frame_status st)
{
    switch (st) {
    case TT_FRAME_OK: return "ok";
    case TT_FRAME_COBS: return "cobs";
    case TT_FRAME_TOO_SHORT: return "too_short";
    case TT_FRAME_TOO_LONG: return "too_long";
    case TT_FRAME_CRC: return "crc";
    case TT_FRAME_UNKNOWN_TYPE: return "unknown_type";
    case TT_FRAME_BAD_LENGTH: return "bad_length";
    }
    return "?";
}

/* The sample-block rules (SPEC 4.4): limits.channels, 1..limits.samples_per_block samples in
 * whole channel sets, a start aligned to the channel count. */
static int tt_samples_block_ok(const uint8_t *p, size_t payload_len)
{
    uint32_t first = (uint32_t)p[TT_MSG_SAMPLES_OFF_FIRST_INDEX]
                   | ((uint32_t)p[TT_MSG_SAMPLES_OFF_FIRST_INDEX + 1u] << 8)
                   | ((uint32_t)p[TT_MSG_SAMPLES_OFF_FIRST_INDEX + 2u] << 16)
                   | ((uint32_t)p[TT_MSG_SAMPLES_OFF_FIRST_INDEX + 3u] << 24);
    uint8_t channels = p[TT_MSG_SAMPLES_OFF_CHANNELS];
    size_t count = (payload_len - TT_MSG_SAMPLES_FIXED_BYTES) / TT_MSG_SAMPLES_REST_ITEM_BYTES;
    return channels >= TT_LIMIT_CHANNELS_MIN && channels <= TT_LIMIT_CHANNELS_MAX
           && count >= TT_LIMIT_SAMPLES_PER_BLOCK_MIN && count <= TT_LIMIT_SAMPLES_PER_BLOCK_MAX
           && count % channels == 0u && first % channels == 0u;
}

enum tt_frame_status tt_frame_decode(uint8_t *body, size_t n, struct tt_frame *out)
{
    const struct tt_msg_shape *shape;
    size_t len, payload_len;
    int decoded;
    uint16_t got, want;

    if (n > TT_MAX_ENCODED_BYTES) {
        return TT_FRAME_TOO_LONG;
    }
    decoded = tt_cobs_decode(body, n);
    if (decoded < 0) {
        return TT_FRAME_COBS;
    }
    len = (size_t)decoded;
    if (len < TT_OVERHEAD_BYTES) {
        return TT_FRAME_TOO_SHORT;
    }
    if (len > TT_MAX_FRAME_BYTES) {
        return TT_FRAME_TOO_LONG;
    }
    got = (uint16_t)(((uint16_t)body[len - 2u] << 8) | body[len - 1u]);
    want = tt_crc16(body, len - TT_CRC_BYTES);
    if (got != want) {
        return TT_FRAME_CRC;
    }
    payload_len = len - TT_OVERHEAD_BYTES;
    out->type = body[0];
    out->seq = body[1];
    out->payload = body + TT_HEADER_BYTES;
    out->payload_len = (uint8_t)payload_len;
    shape = tt_shape(body[0]);
    if (shape == NULL) {
        return TT_FRAME_UNKNOWN_TYPE;
    }
    out->dir = shape->dir;
    if (shape->rest_item_bytes == 0u) {
        if (payload_len != shape->fixed_bytes) {
            return TT_FRAME_BAD_LENGTH;
        }
    } else if (payload_len < shape->fixed_bytes
               || (payload_len - shape->fixed_bytes) % shape->rest_item_bytes != 0u) {
        return TT_FRAME_BAD_LENGTH;
    }
    if (shape->type == TT_MSG_SAMPLES && !tt_samples_block_ok(out->payload, payload_len)) {
        return TT_FRAME_BAD_LENGTH;
    }
    return TT_FRAME_OK;
}

size_t tt_frame_seal(uint8_t *raw, size_t payload_len)
{
    size_t n = TT_HEADER_BYTES + payload_len;
    uint16_t crc = tt_crc16(raw, n);
    raw[n] = (uint8_t)(crc >> 8); /* big-endian: high byte first */
    raw[n + 1u] = (uint8_t)crc;
    return n + TT_CRC_BYTES;
}

size_t tt_frame_wire(const uint8_t *raw, size_t raw_len, uint8_t *out)
{
    size_t n = tt_cobs_encode(raw, raw_len, out);
    out[n] = 0;
    return n + 1u;
}
