#!/usr/bin/python3
"""shot_check.py - decodes a browser screenshot (PNG, zlib + struct, numpy for the filters) and checks regions.

Usage: shot_check.py SHOT.png NAME X0 Y0 X1 Y1 [...]: each box must hold real
drawing (several distinct colours and a spread of values), not a blank area;
a NAME starting with "!" marks a control box that must be blank.
"""
import struct, sys, zlib
import numpy as np


def decode(path):
    data = open(path, 'rb').read()
    assert data[:8] == b'\x89PNG\r\n\x1a\n', 'not a PNG'
    pos, idat = 8, b''
    while pos < len(data):
        n, = struct.unpack('>I', data[pos:pos + 4])
        typ, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        if typ == b'IHDR':
            w, h, depth, ctype = struct.unpack('>IIBB', body[:10])
        elif typ == b'IDAT':
            idat += body
        pos += 12 + n
    assert depth == 8
    ch = {0: 1, 2: 3, 4: 2, 6: 4}[ctype]
    raw = np.frombuffer(zlib.decompress(idat), np.uint8).reshape(h, 1 + w * ch)
    img = np.zeros((h, w * ch), np.int64)
    prev = np.zeros(w * ch, np.int64)
    for y in range(h):
        ft, line = raw[y, 0], raw[y, 1:].astype(np.int64)
        if ft == 0:
            cur = line
        elif ft == 2:
            cur = (line + prev) & 255
        elif ft == 1:
            cur = (np.cumsum(line.reshape(w, ch), axis=0) & 255).reshape(-1)
        else:  # average and Paeth depend on the pixel just decoded: one pixel at a time (PNG spec 9.2)
            cur = np.zeros(w * ch, np.int64)
            for i in range(w * ch):
                a = cur[i - ch] if i >= ch else 0
                b = prev[i]
                if ft == 3:
                    cur[i] = (line[i] + (a + b) // 2) & 255
                else:
                    c = prev[i - ch] if i >= ch else 0
                    p = a + b - c
                    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                    pr = a if pa <= pb and pa <= pc else (b if pb <= pc else c)
                    cur[i] = (line[i] + pr) & 255
        img[y] = cur
        prev = cur
    return img.reshape(h, w, ch)[:, :, :3] if ch >= 3 else img.reshape(h, w, ch)


img = decode(sys.argv[1])
args = sys.argv[2:]
failed = 0
while args:
    name, x0, y0, x1, y1 = args[0], *map(int, args[1:5])
    args = args[5:]
    box = img[y0:y1, x0:x1].reshape(-1, img.shape[2])
    ncol = len(np.unique(box @ np.array([1, 256, 65536][:img.shape[2]])))
    drawn = box.size > 0 and ncol >= 8 and box.std() > 8
    blank = name.startswith('!')   # a control: this box must be empty paper
    ok = drawn != blank
    print(('ok - ' if ok else 'not ok - ') + '%s: box (%d,%d)-(%d,%d) is %s (%d colours, sd %.1f)' %
          (name.lstrip('!'), x0, y0, x1, y1, 'blank' if blank else 'drawn', ncol, box.std() if box.size else 0))
    failed += not ok
sys.exit(1 if failed else 0)
