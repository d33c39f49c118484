#!/usr/bin/python3
"""Independent PNG reader for the quick-look tests, Python standard library only (no image library).

Follows ISO/IEC 15948:2003 (PNG, 2nd edition): checks the signature and every chunk's CRC-32, reads IHDR,
inflates the concatenated IDAT data (zlib) and undoes the five scanline filters (section 9: None, Sub, Up,
Average, Paeth). Handles 8-bit RGBA (colour type 6) and RGB (colour type 2), non-interlaced.
Usage: decode-png.py FILE X,Y [X,Y ...] -> JSON {width, height, pixels: [[r, g, b, a], ...]} on stdout,
pixel (X, Y) counted from the top-left corner.
"""
import json
import struct
import sys
import zlib

data = open(sys.argv[1], "rb").read()
if data[:8] != b"\x89PNG\r\n\x1a\n":
    sys.exit("not a PNG signature")
pos = 8
idat = b""
while pos < len(data):
    (length,) = struct.unpack(">I", data[pos : pos + 4])
    kind = data[pos + 4 : pos + 8]
    body = data[pos + 8 : pos + 8 + length]
    (crc,) = struct.unpack(">I", data[pos + 8 + length : pos + 12 + length])
    if zlib.crc32(kind + body) & 0xFFFFFFFF != crc:
        sys.exit("bad CRC in chunk " + kind.decode("latin1"))
    if kind == b"IHDR":
        width, height, depth, colour, _, _, interlace = struct.unpack(">IIBBBBB", body)
    elif kind == b"IDAT":
        idat += body
    elif kind == b"IEND":
        break
    pos += 12 + length
if depth != 8 or colour not in (2, 6) or interlace != 0:
    sys.exit("unsupported PNG layout: depth %d colour %d interlace %d" % (depth, colour, interlace))
channels = 4 if colour == 6 else 3
raw = zlib.decompress(idat)
stride = width * channels
rows = []
previous = bytearray(stride)
for y in range(height):
    start = y * (stride + 1)
    kind = raw[start]
    line = bytearray(raw[start + 1 : start + 1 + stride])
    for i in range(stride):
        left = line[i - channels] if i >= channels else 0
        up = previous[i]
        upper_left = previous[i - channels] if i >= channels else 0
        if kind == 1:
            line[i] = (line[i] + left) & 0xFF
        elif kind == 2:
            line[i] = (line[i] + up) & 0xFF
        elif kind == 3:
            line[i] = (line[i] + (left + up) // 2) & 0xFF
        elif kind == 4:
            p = left + up - upper_left
            pa, pb, pc = abs(p - left), abs(p - up), abs(p - upper_left)
            predictor = left if pa <= pb and pa <= pc else (up if pb <= pc else upper_left)
            line[i] = (line[i] + predictor) & 0xFF
        elif kind != 0:
            sys.exit("unknown filter type %d" % kind)
    rows.append(line)
    previous = line
pixels = []
for spec in sys.argv[2:]:
    x, y = (int(v) for v in spec.split(","))
    px = list(rows[y][x * channels : (x + 1) * channels])
    pixels.append(px if channels == 4 else px + [255])
print(json.dumps({"width": width, "height": height, "pixels": pixels}))
