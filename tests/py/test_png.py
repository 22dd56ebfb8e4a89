#!/usr/bin/python3
"""test_png.py - PNGs from our encoder (through libpng) decoded independently with zlib + struct.

The decoder follows the PNG specification (W3C/ISO 15948, section 9: filter
types 0-4 with the Paeth predictor) and checks every chunk's CRC-32.
"""
import os, struct, subprocess, sys, tempfile, zlib

BUILD = os.environ.get('BUILD', 'build')
TOOL = os.path.join(BUILD, 'tests', 'tools', 'pngtool')
failed = 0


def check(cond, name):
    global failed
    print(('ok - ' if cond else 'not ok - ') + name)
    failed += not cond


def paeth(a, b, c):
    p = a + b - c
    pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
    if pa <= pb and pa <= pc:
        return a
    return b if pb <= pc else c


def decode(path):
    data = open(path, 'rb').read()
    assert data[:8] == b'\x89PNG\r\n\x1a\n', 'bad signature'
    pos, idat, ihdr, crc_ok = 8, b'', None, True
    while pos < len(data):
        n, = struct.unpack('>I', data[pos:pos + 4])
        typ = data[pos + 4:pos + 8]
        body = data[pos + 8:pos + 8 + n]
        crc, = struct.unpack('>I', data[pos + 8 + n:pos + 12 + n])
        crc_ok &= zlib.crc32(typ + body) & 0xffffffff == crc
        if typ == b'IHDR':
            ihdr = struct.unpack('>IIBBBBB', body)
        elif typ == b'IDAT':
            idat += body
        elif typ == b'IEND':
            break
        pos += 12 + n
    w, h, depth, ctype, comp, filt, inter = ihdr
    ch = {0: 1, 2: 3, 6: 4}[ctype]
    assert depth == 8 and inter == 0
    raw = zlib.decompress(idat)
    stride = w * ch
    rows, prev, p = [], bytearray(stride), 0
    for y in range(h):
        ft = raw[p]
        line = bytearray(raw[p + 1:p + 1 + stride])
        p += 1 + stride
        for i in range(stride):
            a = line[i - ch] if i >= ch else 0
            b = prev[i]
            c = prev[i - ch] if i >= ch else 0
            if ft == 1:
                line[i] = (line[i] + a) & 255
            elif ft == 2:
                line[i] = (line[i] + b) & 255
            elif ft == 3:
                line[i] = (line[i] + (a + b) // 2) & 255
            elif ft == 4:
                line[i] = (line[i] + paeth(a, b, c)) & 255
            elif ft != 0:
                raise ValueError('filter %d' % ft)
        rows.append(line)
        prev = line
    return w, h, ch, rows, crc_ok, p == len(raw)


if not os.access(TOOL, os.X_OK):
    print('not ok - %s is missing (make builds tests/tools)' % TOOL)
    sys.exit(1)
with tempfile.TemporaryDirectory() as tmp:
    for (w, h, ch) in ((1, 1, 1), (7, 5, 1), (33, 19, 3), (64, 40, 4), (257, 3, 3)):
        path = os.path.join(tmp, 'x.png')
        rc = subprocess.run([TOOL, path, str(w), str(h), str(ch)]).returncode
        check(rc == 0, 'pngtool writes %dx%dx%d' % (w, h, ch))
        if rc:
            continue
        W, H, CH, rows, crc_ok, used = decode(path)
        check((W, H, CH) == (w, h, ch), 'header says %dx%d, %d channels' % (w, h, ch))
        check(crc_ok and used, 'chunk CRCs match and the image data is exactly consumed')
        bad = sum(rows[y][x * ch + c] != (31 * x + 17 * y + 89 * c + x * y) & 255
                  for y in range(h) for x in range(w) for c in range(ch))
        check(bad == 0, 'every pixel of %dx%dx%d decodes to the pattern (%d wrong)' % (w, h, ch, bad))
    rc = subprocess.run([TOOL, os.path.join(tmp, 'y.png'), '0', '3', '3'], stderr=subprocess.PIPE)
    check(rc.returncode == 1 and b'bad image size' in rc.stderr and not os.path.exists(os.path.join(tmp, 'y.png')),
          'a zero width is refused and leaves no file')
    leftovers = [f for f in os.listdir(tmp) if f not in ('x.png',)]
    check(not leftovers, 'no temporary files left behind (%s)' % leftovers)
sys.exit(1 if failed else 0)
