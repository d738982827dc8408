/* tt_command.c - host command validation and the idle/streaming state rules. */
#include "tt_command.h"

uint8_t tt_setup_check(const struct tt_configure *c, const struct tt_limits *lim,
                       struct tt_setup *out)
{
    uint32_t per_second, period;
    if (c->rate_hz < lim->min_rate_hz || c->rate_hz > lim->max_rate_hz
        || c->channels < 1u || c->channels > lim->max_channels || c->tach_edge > 1u) {
        return TT_ERR_BAD_VALUE;
    }
    per_second = (uint32_t)c->rate_hz * c->channels;
    if (lim->tick_hz % per_second != 0u) {
        return TT_ERR_BAD_VALUE;
    }
    period = lim->tick_hz / per_second;
    if (period < lim->min_period_ticks || period > 0xFFFFu) {
        return TT_ERR_BAD_VALUE;
    }
    out->rate_hz = c->rate_hz;
    out->channels = c->channels;
    out->tach_edge = c->tach_edge;
    out->period_ticks = (uint16_t)period;
    return TT_ERR_OK;
}

uint8_t tt_command_parse(enum tt_frame_status st, const struct tt_frame *f, uint8_t state,
                         const struct tt_limits *lim, struct tt_command *cmd)
{
    uint8_t idle = state == TT_STATE_IDLE;
    cmd->action = TT_ACT_NONE;
    cmd->error = TT_ERR_OK;
    if (st != TT_FRAME_OK && st != TT_FRAME_UNKNOWN_TYPE && st != TT_FRAME_BAD_LENGTH) {
        return 0;
    }
    cmd->type = f->type;
    cmd->seq = f->seq;
    if (st == TT_FRAME_UNKNOWN_TYPE || f->dir != TT_DIR_HOST) {
        cmd->error = TT_ERR_UNKNOWN_COMMAND;
        return 1;
    }
    if (st == TT_FRAME_BAD_LENGTH) {
        cmd->error = TT_ERR_BAD_LENGTH;
        return 1;
    }
    switch (f->type) {
    case TT_MSG_IDENTIFY:
        cmd->action = TT_ACT_IDENTIFY;
        break;
    case TT_MSG_START:
        if (!idle) {
            cmd->error = TT_ERR_BUSY;
        } else {
            cmd->action = TT_ACT_START;
        }
        break;
    case TT_MSG_STOP:
        if (idle) {
            cmd->error = TT_ERR_NOT_STREAMING;
        } else {
            cmd->action = TT_ACT_STOP;
        }
        break;
    case TT_MSG_CONFIGURE: {
        struct tt_configure c;
        tt_unpack_configure(f->payload, &c);
        if (!idle) {
            cmd->error = TT_ERR_BUSY;
        } else {
            cmd->error = tt_setup_check(&c, lim, &cmd->setup);
            if (cmd->error == TT_ERR_OK) {
                cmd->action = TT_ACT_CONFIGURE;
            }
        }
        break;
    }
    case TT_MSG_PING: {
        struct tt_ping p;
        tt_unpack_ping(f->payload, &p);
        cmd->token = p.token;
        cmd->action = TT_ACT_PING;
        break;
    }
    default:
        cmd->error = TT_ERR_UNKNOWN_COMMAND; /* a host type this firmware does not handle */
        break;
    }
    return 1;
}
