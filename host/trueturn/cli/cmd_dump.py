"""``trueturn dump FILE``: decoded messages as JSON lines, then a line of counts."""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from trueturn.cli.common import open_capture
from trueturn.link.codec import LinkEvent, StreamDecoder


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "dump", help="print the messages in a capture or frame file as JSON lines",
        description="Decode a capture file (from `trueturn record`) or a plain file of frames "
                    "(such as protocol/vectors/) and print one JSON object per message or "
                    "link event, then a summary line with frame, CRC error and gap counts.")
    parser.add_argument("file", help="capture file or raw frame file")
    parser.add_argument("--no-samples", action="store_true",
                        help="omit the sample values of sample blocks (counts only)")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    out = sys.stdout
    with open_capture(args.file) as reader:  # streamed: memory does not grow with the file
        metadata = reader.metadata
        if not reader.plain:
            out.write(json.dumps({"capture": metadata}) + "\n")
        # a plain frame file (e.g. protocol/vectors) may hold frames of either direction
        decoder = StreamDecoder(from_board=not reader.plain)
        for chunk in reader.chunks():
            for item in decoder.feed(chunk):
                record: dict[str, Any]
                if isinstance(item, LinkEvent):
                    record = {"event": item.kind, "detail": item.detail, "count": item.count}
                else:
                    record = item.to_json()
                    if args.no_samples and "samples" in record:
                        record["samples"] = len(record["samples"])
                out.write(json.dumps(record) + "\n")
    if decoder.pending_bytes:
        out.write(json.dumps({"event": "truncated", "detail":
                              f"{decoder.pending_bytes} bytes after the last delimiter"}) + "\n")
    c = decoder.counters
    out.write(json.dumps({"summary": {"frames": c.frames_ok + c.frames_bad,
                                      "crc_errors": c.errors["crc"],
                                      "gaps": c.seq_gaps + c.sample_gaps, **c.to_json()}}) + "\n")
    return 0
