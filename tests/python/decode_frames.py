#!/usr/bin/env python3
"""An independent decoder of frothline wire frames, written from docs/wire-protocol.md.

Reads a live serial port (pyserial), splits the byte stream at 0x00, COBS-decodes each
frame, checks its CRC-32 (zlib.crc32, little-endian after the payload), parses the header
and the body, and prints one JSON line per valid frame on standard output:

    {"ready": true, "port": "/dev/pts/3"}          once the port is open
    {"device": 1, "seq": 5, "kind": "windows", "body": [...]}
    {"summary": {"frames": 12, "crc_failures": 0, ...}}   at the end

Window results keep the wire's integers (fixed-point units of section 7), so a test can
compare them exactly. Stops after --count window results, or --timeout seconds.

    python3 decode_frames.py PORT [--count N] [--timeout SECONDS] [--baud B]

`decode(frame)` is also imported by check_decoders.py, which runs it beside the reference
decoder of the spec on golden vectors and mutated frames.
"""

import argparse
import json
import sys
import time
import zlib

MAX_FRAME_BYTES = 545  # section 1: no valid frame is longer (0x00 included)
VERSION = 2  # section 4


def cobs_decode(enc):
    """Section 1: code byte c, then c - 1 data bytes; a zero after every block with
    c < 255 except the last."""
    out = bytearray()
    i = 0
    while i < len(enc):
        code = enc[i]
        if code == 0 or i + code > len(enc):
            raise ValueError("COBS")
        out += enc[i + 1:i + code]
        i += code
        if code < 255 and i < len(enc):
            out.append(0)
    return bytes(out)


class Cursor:
    """Section 3: postcard's encoding of the types used by the bodies."""

    def __init__(self, data):
        self.data = data
        self.pos = 0

    def byte(self):
        if self.pos >= len(self.data):
            raise ValueError("short")
        b = self.data[self.pos]
        self.pos += 1
        return b

    def uvar(self, bits):
        longest = (bits + 6) // 7
        value = 0
        for n in range(longest):
            b = self.byte()
            value |= (b & 0x7F) << (7 * n)
            if not b & 0x80:
                if value >> bits:
                    raise ValueError("varint overflows")
                return value
        raise ValueError("varint too long")

    def svar(self, bits):
        z = self.uvar(bits)
        return (z >> 1) ^ -(z & 1)

    def opt(self, read):
        tag = self.byte()
        if tag == 0:
            return None
        if tag == 1:
            return read()
        raise ValueError("option tag")

    def seq(self, read, cap):
        n = self.uvar(32)  # section 3: length prefixes are u32 varints
        if n > cap:
            raise ValueError("too many elements")
        return [read() for _ in range(n)]

    def text(self, cap):
        n = self.uvar(32)
        if n > cap or self.pos + n > len(self.data):
            raise ValueError("string")
        s = self.data[self.pos:self.pos + n].decode("utf-8")
        self.pos += n
        return s


def u16(c):
    return c.uvar(16)


def u32(c):
    return c.uvar(32)


def u64(c):
    return c.uvar(64)


def window_setting(c):
    variant = c.uvar(32)
    if variant == 0:
        return {"whole": True}
    if variant == 1:
        return {"frames": u32(c)}
    if variant == 2:
        return {"bubbles": u32(c), "probe": c.byte(), "max_frames": c.opt(lambda: u32(c))}
    if variant == 3:
        return {"after_front": u32(c)}
    raise ValueError("window setting")


def window_result(c):
    return {
        "probe": c.byte(),
        "start": u64(c),
        "frames": u32(c),
        "void_fraction": u16(c),
        "bubble_rate": u32(c),
        "bubbles": u32(c),
        "chords": c.opt(lambda: [u32(c), u32(c), u32(c), u32(c)]),
        "correlation": c.opt(lambda: [c.svar(16), u16(c), c.opt(lambda: u16(c))]),
        "flags": u32(c),
    }


def derived_result(c):
    return {
        "probe": c.byte(),
        "start": u64(c),
        "chord_lengths": c.opt(lambda: [u32(c), u32(c), u32(c)]),
        "interfacial_area": c.opt(lambda: u32(c)),
        "sauter_diameter": c.opt(lambda: u32(c)),
        "judged": u32(c),
        "pairs": u32(c),
        "clusters": u32(c),
        "clustered": u32(c),
        "random_pair_probability": c.opt(lambda: u16(c)),
    }


def probe_layout(c):
    return {
        "station": c.byte(),
        "leading": c.byte(),
        "trailing": c.opt(lambda: {"channel": c.byte(), "spacing": u16(c)}),
        "elevation": c.svar(32),
        "x": c.svar(32),
    }


def describe(c):
    return {
        "firmware": c.text(16),
        "sample_rate_millihz": u32(c),
        "channels": c.byte(),
        "window": window_setting(c),
        "probes": c.seq(lambda: probe_layout(c), 16),
    }


def health(c):
    keys = ["samples_dropped", "saturated_samples", "tips_stuck", "buffer_high_water",
            "windows_dropped", "frames_dropped", "uptime_frames"]
    widths = [64, 64, 64, 32, 32, 32, 64]
    return {k: c.uvar(w) for k, w in zip(keys, widths)}


def run_start(c):
    return {"run": u32(c), "label": c.text(16), "uptime_frames": u64(c),
            "utc_ms": c.opt(lambda: u64(c))}


def profile(c):
    return {"station": c.byte(), "slice_start": u64(c), "slice_frames": u32(c),
            "probes_used": c.byte(), "y90": c.opt(lambda: u32(c)),
            "mean_void_fraction": c.opt(lambda: u16(c)),
            "equivalent_depth": c.opt(lambda: u32(c)), "exponent": c.opt(lambda: u16(c)),
            "fit_rmse": c.opt(lambda: u16(c)), "flags": u32(c), "estimate": c.byte(),
            "y90_se": c.opt(lambda: u16(c)),
            "mean_void_fraction_se": c.opt(lambda: u16(c)),
            "exponent_se": c.opt(lambda: u16(c)),
            "equivalent_depth_se": c.opt(lambda: u16(c))}


def tip_state(c):
    return {"levels": c.opt(lambda: {"air": c.svar(16), "water": c.svar(16)}),
            "interfaces": u32(c), "bubbles": u32(c), "void_fraction": u16(c),
            "flags": u32(c)}


def tip_report(c):
    return {"probe": c.byte(), "start": u64(c), "frames": u32(c),
            "leading": tip_state(c), "trailing": c.opt(lambda: tip_state(c))}


def window_extras(c):
    levels = lambda: c.opt(lambda: {"air": c.svar(16), "water": c.svar(16)})
    return {
        "droplet_chord_mean": c.opt(lambda: u32(c)),
        "trailing": c.opt(lambda: {"void_fraction": u16(c), "bubble_rate": u32(c)}),
        "levels": levels(),
        "trailing_levels": levels(),
        "correlation": c.opt(lambda: {
            "transit": c.opt(lambda: u32(c)),
            "secondary_peak_ratio": c.opt(lambda: u16(c)),
            "t05": c.opt(lambda: u32(c)),
            "tau05": c.opt(lambda: u32(c)),
            "auto_integral": c.opt(lambda: u32(c)),
            "cross_integral": c.opt(lambda: u32(c)),
        }),
    }


def tip_setting(c):
    levels = c.opt(lambda: {"air": c.svar(16), "water": c.svar(16)})
    fixed = c.byte()
    if fixed > 1:
        raise ValueError("bad bool")
    return {"levels": levels, "fixed": fixed == 1}


def probe_levels(c):
    return {"leading": tip_setting(c), "trailing": c.opt(lambda: tip_setting(c))}


def logger_status(c):
    # Section 6, 0x0C: the state's variant index, its fields, then the log's use.
    variant = c.uvar(32)
    if variant == 0:
        out = {"state": "idle"}
    elif variant == 1:
        out = {"state": "armed"}
    elif variant == 2:
        out = {"state": "capturing", "remaining": u32(c)}
    else:
        raise ValueError("logger state")
    out["used_bytes"] = u32(c)
    out["capacity_bytes"] = u32(c)
    return out


def device_status(c):
    return {"supply_mv": c.opt(lambda: u16(c)), "uptime_ms": u64(c),
            "logger": c.opt(lambda: logger_status(c))}


def empty(c):
    return None


def set_extras(c):
    on = c.byte()
    if on > 1:
        raise ValueError("bad bool")
    return {"on": on == 1}


def set_levels(c):
    probe, trailing = c.byte(), c.byte()
    if trailing > 1:
        raise ValueError("bad bool")
    return {"probe": probe, "trailing": trailing == 1, "air": c.svar(16),
            "water": c.svar(16)}


# Section 5: kind codes and their bodies.
KINDS = {
    0x01: ("describe", describe),
    0x02: ("windows", lambda c: c.seq(lambda: window_result(c), 8)),
    0x03: ("front", lambda c: {"probe": c.byte(), "station": c.byte(), "frame": u64(c)}),
    0x04: ("profile", profile),
    0x05: ("health", health),
    0x06: ("run_start", run_start),
    0x07: ("log_chunk", lambda c: {"offset": u32(c), "total": u32(c),
                                   "data": bytes(c.seq(c.byte, 64)).hex()}),
    0x08: ("derived", lambda c: c.seq(lambda: derived_result(c), 8)),
    0x09: ("tip_health", lambda c: c.seq(lambda: tip_report(c), 6)),
    0x0A: ("levels", lambda c: c.seq(lambda: probe_levels(c), 16)),
    0x0C: ("device_status", device_status),
    0x0B: ("full_windows", lambda c: c.seq(
        lambda: {"result": window_result(c), "extras": window_extras(c)}, 4)),
    0x20: ("start_run", lambda c: {"label": c.text(16), "utc_ms": c.opt(lambda: u64(c))}),
    0x21: ("stop_run", empty),
    0x22: ("set_window", window_setting),
    0x23: ("relearn", lambda c: {"probes": u32(c)}),
    0x24: ("describe_request", empty),
    0x25: ("set_clock", lambda c: {"utc_ms": u64(c)}),
    0x26: ("set_levels", set_levels),
    0x27: ("read_log", lambda c: {"offset": u32(c)}),
    0x28: ("set_extras", set_extras),
    0x30: ("ack", lambda c: {"seq": u16(c)}),
    0x31: ("nack", lambda c: {"seq": u16(c), "reason": c.byte()}),
}


def decode(frame):
    """One frame (the bytes between two delimiters) -> dict, or raises ValueError."""
    if len(frame) >= MAX_FRAME_BYTES:
        raise ValueError("oversize")
    data = cobs_decode(frame)
    if len(data) < 8:
        raise ValueError("short")
    payload, crc = data[:-4], int.from_bytes(data[-4:], "little")
    if zlib.crc32(payload) & 0xFFFFFFFF != crc:
        raise ValueError("CRC")
    c = Cursor(payload)
    version, device, kind, seq = c.byte(), u16(c), c.byte(), u16(c)
    if version != VERSION or kind not in KINDS:
        return {"device": device, "seq": seq, "kind": "unsupported", "code": kind}
    name, parse = KINDS[kind]
    body = parse(c)
    if c.pos != len(payload):
        raise ValueError("bytes left over")
    return {"device": device, "seq": seq, "kind": name, "body": body}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("port")
    ap.add_argument("--count", type=int, default=0, help="stop after this many window results")
    ap.add_argument("--timeout", type=float, default=30.0)
    ap.add_argument("--baud", type=int, default=115200)
    args = ap.parse_args()

    import serial  # pyserial

    link = serial.Serial(args.port, baudrate=args.baud, timeout=0.05)
    print(json.dumps({"ready": True, "port": args.port}), flush=True)
    counts = {"frames": 0, "crc_or_malformed": 0, "oversize": 0, "windows": 0,
              "lost": 0, "bytes": 0}
    last_seq = {}
    pending = bytearray()
    deadline = time.monotonic() + args.timeout
    while time.monotonic() < deadline:
        chunk = link.read(4096)
        if not chunk:
            continue
        counts["bytes"] += len(chunk)
        pending += chunk
        *frames, rest = bytes(pending).split(b"\x00")
        pending = bytearray(rest)
        if len(pending) >= MAX_FRAME_BYTES:
            counts["oversize"] += 1
            pending = bytearray()
        for f in frames:
            if not f:
                continue
            try:
                d = decode(f)
            except ValueError:  # UnicodeDecodeError is one
                counts["crc_or_malformed"] += 1
                continue
            counts["frames"] += 1
            # Section 8: a gap of the sequence number counts lost frames.
            prev = last_seq.get(d["device"])
            if prev is not None:
                gap = (d["seq"] - (prev + 1)) % 65536
                if 0 < gap < 32768:
                    counts["lost"] += gap
            last_seq[d["device"]] = d["seq"]
            print(json.dumps(d), flush=True)
            if d["kind"] == "windows":
                counts["windows"] += len(d["body"])
        if args.count and counts["windows"] >= args.count:
            break
    print(json.dumps({"summary": counts}), flush=True)
    link.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
