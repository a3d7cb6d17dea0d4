#!/usr/bin/python3
"""Writes the image fixtures of tests/test_images.c into tests/reference/images/.

Outside tools only: PNG and PGM are written by Python's standard library (zlib, struct), following
the PNG specification (W3C / ISO/IEC 15948) and the netpbm PGM description; BMP, JPEG and a second
PGM are converted from those PNG files by ImageMagick's `convert` (Debian package imagemagick).
expected.txt lists, for each fixture: name width height channels maxval, then the pixel values in
row-major order (channels interleaved), as the writing tool was given them.
Run from the repository root:  python3 tests/reference/make_images.py
"""
import os
import struct
import subprocess
import zlib

here = os.path.join(os.path.dirname(os.path.abspath(__file__)), "images")
os.makedirs(here, exist_ok=True)
W, H = 8, 6


def png(path, w, h, channels, bits, pixels):
    """pixels: row-major list of ints, channels interleaved."""
    color = {1: 0, 3: 2}[channels]
    raw = bytearray()
    for y in range(h):
        raw.append(0)  # filter type None
        for v in pixels[y * w * channels:(y + 1) * w * channels]:
            raw += struct.pack(">H", v) if bits == 16 else bytes([v])

    def chunk(tag, data):
        return struct.pack(">I", len(data)) + tag + data + struct.pack(">I", zlib.crc32(tag + data) & 0xffffffff)

    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n")
        f.write(chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, bits, color, 0, 0, 0)))
        f.write(chunk(b"IDAT", zlib.compress(bytes(raw), 9)))
        f.write(chunk(b"IEND", b""))


def pgm(path, w, h, maxval, pixels):
    with open(path, "wb") as f:
        f.write(b"P5\n%d %d\n%d\n" % (w, h, maxval))
        for v in pixels:
            f.write(struct.pack(">H", v) if maxval > 255 else bytes([v]))


def convert(src, dst, *opts):
    subprocess.run(["convert", os.path.join(here, src), *opts, os.path.join(here, dst)], check=True)


expected = []


def record(name, w, h, c, maxval, pixels):
    expected.append("%s %d %d %d %d\n%s\n" % (name, w, h, c, maxval, " ".join(map(str, pixels))))


gray8 = [(x * 29 + y * 41) % 256 for y in range(H) for x in range(W)]
rgb8 = []
for y in range(H):
    for x in range(W):
        rgb8 += [x * 30 + 15, y * 45 + 10, (x * 7 + y * 31) % 256]
gray16 = [x * 8000 + y * 1000 + 17 for y in range(H) for x in range(W)]
smooth = [40 + 8 * x + 6 * y for y in range(16) for x in range(16)]   # 16x16 gradient for JPEG

png(os.path.join(here, "gray8.png"), W, H, 1, 8, gray8)
record("gray8.png", W, H, 1, 255, gray8)
png(os.path.join(here, "rgb8.png"), W, H, 3, 8, rgb8)
record("rgb8.png", W, H, 3, 255, rgb8)
png(os.path.join(here, "gray16.png"), W, H, 1, 16, gray16)
record("gray16.png", W, H, 1, 65535, gray16)
pgm(os.path.join(here, "gray8.pgm"), W, H, 255, gray8)
record("gray8.pgm", W, H, 1, 255, gray8)
pgm(os.path.join(here, "gray16.pgm"), W, H, 65535, gray16)
record("gray16.pgm", W, H, 1, 65535, gray16)
png(os.path.join(here, "smooth.png"), 16, 16, 1, 8, smooth)

# ImageMagick conversions of the PNGs above.
convert("rgb8.png", "rgb8.bmp", "-type", "TrueColor")
convert("rgb8.bmp", "rgb8_bmp.bmp")  # round trip through ImageMagick's BMP reader as well
os.replace(os.path.join(here, "rgb8_bmp.bmp"), os.path.join(here, "rgb8.bmp"))
record("rgb8.bmp", W, H, 3, 255, rgb8)
convert("gray8.png", "gray8_im.pgm")
record("gray8_im.pgm", W, H, 1, 255, gray8)
convert("smooth.png", "smooth.jpg", "-quality", "95", "-sampling-factor", "1x1")
record("smooth.jpg", 16, 16, 1, 255, smooth)   # lossy: compared with a tolerance
convert("rgb8.png", "rgb8.jpg", "-quality", "98", "-sampling-factor", "1x1")
record("rgb8.jpg", W, H, 3, 255, rgb8)         # lossy colour: compared with a tolerance on luma
os.remove(os.path.join(here, "smooth.png"))

# Truncated files: the first part of valid ones.
for name, keep in (("gray8.png", 0.6), ("smooth.jpg", 0.6), ("rgb8.bmp", 0.6), ("gray16.pgm", 0.8)):
    data = open(os.path.join(here, name), "rb").read()
    base, ext = os.path.splitext(name)
    with open(os.path.join(here, "trunc_" + base + ext), "wb") as f:
        f.write(data[:int(len(data) * keep)])

with open(os.path.join(here, "expected.txt"), "w") as f:
    f.write("# written by make_images.py: name width height channels maxval, then pixel values\n")
    f.writelines(expected)
