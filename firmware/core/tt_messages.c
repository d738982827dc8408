/* tt_messages.c - message builders over the generated packers of tt_protocol_defs.h. */
#include "tt_messages.h"

#include "tt_frame.h"

static uint8_t *tt_begin(uint8_t *raw, uint8_t type, uint8_t seq)
{
    raw[0] = type;
    raw[1] = seq;
    return raw + TT_HEADER_BYTES;
}

size_t tt_msg_identity(uint8_t *raw, uint8_t seq, const struct tt_identity *v)
{
    tt_pack_identity(tt_begin(raw, TT_MSG_IDENTITY, seq), v);
    return tt_frame_seal(raw, TT_MSG_IDENTITY_FIXED_BYTES);
}

size_t tt_msg_reply(uint8_t *raw, uint8_t seq, uint8_t command_type, uint8_t command_seq,
                    uint8_t error)
{
    struct tt_reply v;
    v.command_type = command_type;
    v.command_seq = command_seq;
    v.error = error;
    tt_pack_reply(tt_begin(raw, TT_MSG_REPLY, seq), &v);
    return tt_frame_seal(raw, TT_MSG_REPLY_FIXED_BYTES);
}

size_t tt_msg_stream_config(uint8_t *raw, uint8_t seq, const struct tt_stream_config *v)
{
    tt_pack_stream_config(tt_begin(raw, TT_MSG_STREAM_CONFIG, seq), v);
    return tt_frame_seal(raw, TT_MSG_STREAM_CONFIG_FIXED_BYTES);
}

size_t tt_msg_samples(uint8_t *raw, uint8_t seq, uint32_t first_index, uint8_t channels,
                      uint32_t start_tick, uint16_t period_ticks, const uint16_t *samples,
                      uint8_t count)
{
    struct tt_samples v;
    uint8_t *p = tt_begin(raw, TT_MSG_SAMPLES, seq);
    uint8_t i;
    v.first_index = first_index;
    v.channels = channels;
    v.start_tick = start_tick;
    v.period_ticks = period_ticks;
    tt_pack_samples(p, &v);
    p += TT_MSG_SAMPLES_FIXED_BYTES;
    for (i = 0; i < count; i++) {
        *p++ = (uint8_t)samples[i];
        *p++ = (uint8_t)(samples[i] >> 8);
    }
    return tt_frame_seal(raw, TT_MSG_SAMPLES_FIXED_BYTES
                              + (size_t)count * TT_MSG_SAMPLES_REST_ITEM_BYTES);
}

size_t tt_msg_tach(uint8_t *raw, uint8_t seq, uint32_t tick, uint16_t edge_count)
{
    struct tt_tach v;
    v.tick = tick;
    v.edge_count = edge_count;
    tt_pack_tach(tt_begin(raw, TT_MSG_TACH, seq), &v);
    return tt_frame_seal(raw, TT_MSG_TACH_FIXED_BYTES);
}

size_t tt_msg_status(uint8_t *raw, uint8_t seq, const struct tt_status *v)
{
    tt_pack_status(tt_begin(raw, TT_MSG_STATUS, seq), v);
    return tt_frame_seal(raw, TT_MSG_STATUS_FIXED_BYTES);
}

size_t tt_msg_pong(uint8_t *raw, uint8_t seq, uint32_t token, uint32_t tick)
{
    struct tt_pong v;
    v.token = token;
    v.tick = tick;
    tt_pack_pong(tt_begin(raw, TT_MSG_PONG, seq), &v);
    return tt_frame_seal(raw, TT_MSG_PONG_FIXED_BYTES);
}

size_t tt_msg_empty(uint8_t *raw, uint8_t type, uint8_t seq)
{
    (void)tt_begin(raw, type, seq);
    return tt_frame_seal(raw, 0);
}

size_t tt_msg_configure(uint8_t *raw, uint8_t seq, const struct tt_configure *v)
{
    tt_pack_configure(tt_begin(raw, TT_MSG_CONFIGURE, seq), v);
    return tt_frame_seal(raw, TT_MSG_CONFIGURE_FIXED_BYTES);
}

size_t tt_msg_ping(uint8_t *raw, uint8_t seq, uint32_t token)
{
    struct tt_ping v;
    v.token = token;
    tt_pack_ping(tt_begin(raw, TT_MSG_PING, seq), &v);
    return tt_frame_seal(raw, TT_MSG_PING_FIXED_BYTES);
}
