#!/usr/bin/env python3
"""Writes the seed corpora of the proto fuzz targets:
  corpus/msg_decode/  one valid encoding of every message type (plus edge forms)
  corpus/params/      a few params texts, valid and not

The MessagePack writer below is our own few lines written from the spec
(msgpack.org spec.md), independent of msgpack-c, so the corpus also checks
that the C decoder reads what another encoder writes. Run from anywhere:
    /usr/bin/python3 tests/fuzz/make_corpus.py
Files are named by content, so re-running is idempotent."""
import hashlib
import os
import struct

HERE = os.path.dirname(os.path.abspath(__file__))


class F64(float):
    """A float that must be written as float 64 (all our floats are)."""


class Bin(bytes):
    """Bytes written as bin, not str."""


def pack(v):
    if v is True:
        return b"\xc3"
    if v is False:
        return b"\xc2"
    if isinstance(v, float):
        return b"\xcb" + struct.pack(">d", v)
    if isinstance(v, int):
        assert v >= 0
        if v <= 0x7F:
            return bytes([v])
        if v <= 0xFF:
            return b"\xcc" + struct.pack(">B", v)
        if v <= 0xFFFF:
            return b"\xcd" + struct.pack(">H", v)
        if v <= 0xFFFFFFFF:
            return b"\xce" + struct.pack(">I", v)
        return b"\xcf" + struct.pack(">Q", v)
    if isinstance(v, Bin):
        n = len(v)
        if n <= 0xFF:
            return b"\xc4" + bytes([n]) + v
        if n <= 0xFFFF:
            return b"\xc5" + struct.pack(">H", n) + v
        return b"\xc6" + struct.pack(">I", n) + v
    if isinstance(v, str):
        b = v.encode()
        n = len(b)
        if n <= 31:
            return bytes([0xA0 | n]) + b
        if n <= 0xFF:
            return b"\xd9" + bytes([n]) + b
        if n <= 0xFFFF:
            return b"\xda" + struct.pack(">H", n) + b
        return b"\xdb" + struct.pack(">I", n) + b
    if isinstance(v, list):
        n = len(v)
        if n <= 15:
            head = bytes([0x90 | n])
        elif n <= 0xFFFF:
            head = b"\xdc" + struct.pack(">H", n)
        else:
            head = b"\xdd" + struct.pack(">I", n)
        return head + b"".join(pack(x) for x in v)
    raise TypeError(type(v))


U64 = (1 << 64) - 1
KEY = Bin(bytes(range(32)))
GENOME = Bin(struct.pack("<3d", 0.1, 0.2, 0.3))

V = 2  # PROTO_VERSION (proto/limits.h)
MESSAGES = {
    "submit": [V, 1, "run-1", 42, 0, 0, 5000, 3, 7, "zdt1", '{"n":30}',
               [[1, 0, GENOME], [2, 1, GENOME], [U64, 9999, Bin(b"")]], 1],
    "submit_common": [V, 1, "r", U64, 1, 3, 0, 0, 0, "granular", "{}", [], 1000],
    "ack": [V, 2, "run-1", [0, 1, 255, 65536, U64]],
    "status_req": [V, 3],
    "accepted": [V, 10, "run-1", 7, 3],
    "results": [V, 11, "run-1", [[1, 0, True, 12345, KEY, [0.5, -0.0, 5e-324], "",
                                  "lab-3.1", "lab-3", 0.25, 2048, 1795000000.5],
                                 [2, 4, False, 0, KEY, [], "timeout after 5000 ms",
                                  "", "", 0.0, 0, 0.0]]],
    "refused": [V, 12, 2, 7, "run-1", "unknown plugin zdt9; pool has: zdt1@1.0", False, 0],
    "status": [V, 13, [["w1", "lab-3", "x86_64", 8, 3, ["zdt1@1.0", "granular@2.3"], 812.5,
                        "active", [0.0, 0.4625]],
                       ["w2", "desk-7", "x86_64", 4, 0, [], 0.0,
                        "paused: outside --hours 18:00-08:00", []]],
               [["run-1", 10, 2, U64, 5, 3, 1]], ["two builds of zdt1@1.0"]],
    "hello": [V, 20, "w1", "lab-3", "x86_64", 8,
              [["zdt1", "1.0", 2, 1, KEY, [], '{"n":30}'],
               ["granular", "2.3", 3, 0, KEY, ["scatter_radius", "jitter"], ""]], 812.5],
    "credit": [V, 21, 256],
    "done": [V, 22, 2, [[7, 0, [0.5, 1.5], 0.25, 2048, "", 0.3],
                        [8, 3, [], 1.0, 0, "signal 11", 1.25]]],
    "bye": [V, 23],
    "hand_back": [V, 24, "load 3.10 from other processes above --max-load 2", [7, 8, U64], False],
    "hand_back_empty": [V, 24, "outside --hours 18:00-08:00", [], False],
    "hand_back_draining": [V, 24, "stopping: SIGTERM", [9], True],
    "cancel": [V, 32, [7, U64]],
    "jobs": [V, 30, [[1, "zdt1", '{"n":30}', 99, 0, GENOME],
                     [2, "granular", "{}", U64, 60000, Bin(b"\x00" * 300)]]],
    "rehello": [V, 31],
    "heartbeat": [V, 40],
}

PARAMS = [
    b'{"n":30}',
    b'{ "b" : 1, "a" : [1, 2.5, -3e-7, true, null, "x"] }',
    b'{"z":{"y":{"x":{}}},"name":"caf\\u00e9"}',
    b'{"n":1,"n":2}',
    b"[1,2]",
    b"",
]


def write(dirname, data):
    path = os.path.join(HERE, "corpus", dirname, hashlib.sha1(data).hexdigest()[:16])
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "wb") as f:
        f.write(data)


def main():
    for name, msg in MESSAGES.items():
        write("msg_decode", pack(msg))
    for p in PARAMS:
        write("params", p)


if __name__ == "__main__":
    main()
