#!/usr/bin/env python3
# Recomputes the pinned audit hashes of storetest's AuditVector test from
# the encoding described in store.AuditHashEncoding, with Python's hashlib:
# an implementation independent of plumb's Go code. Run: python3 audit_vector.py
import calendar
import hashlib


def uvarint(n):
    out = b""
    while True:
        b, n = n & 0x7F, n >> 7
        if n:
            out += bytes([b | 0x80])
        else:
            return out + bytes([b])


def encode(seq, nanos, fields):
    b = b"plumb audit record v1\x00" + seq.to_bytes(8, "big") + nanos.to_bytes(8, "big", signed=True)
    for f in fields:
        fb = f.encode("utf-8")
        b += uvarint(len(fb)) + fb
    return b


base = calendar.timegm((2026, 5, 4, 10, 30, 0)) * 10**9 + 123456789
records = [
    (1, base, ["r.okafor", "acknowledge", "cal", "alert-1", "checking the valve",
               '{"state":"open"}', '{"state":"acknowledged"}']),
    (2, base + 60 * 10**9, ["plumb", "resolve", "cal", "alert-1", 'été: unicode, "quotes", a\nnewline',
                            '{"state":"acknowledged"}', '{"state":"resolved"}']),
]
prev = bytes(32)
for seq, nanos, fields in records:
    prev = hashlib.sha256(encode(seq, nanos, fields) + prev).digest()
    print(seq, prev.hex())
