#!/usr/bin/python3
"""stimset — invented stimulus sets for the stimuli tests and benchmark, written with numpy and a
small PNG encoder (zlib + struct from the standard library, filter type 0, RFC 2083 / PNG spec).

  stimset.py set DIR          a small set: 3 categories x 4 clean sources x budgets 0, 1.5, 4
                              (L2, values in [0, 1]), list.csv, and expected.json with the L2 and
                              L-infinity norms numpy computes for every perturbed row
  stimset.py bad DIR          problem files: corrupt and truncated PNGs, a 16-bit PNG, grey and
                              grey+alpha PNGs, an RGBA PNG with transparency, a source of another size
  stimset.py bench DIR N      N RGB images of 256x256 in DIR/cat{0..3}/ and DIR/list.csv, in
                              groups of a clean source and three perturbed versions
  stimset.py png FILE W H C BITS SEED   one random image
"""
import json
import os
import struct
import sys
import zlib

import numpy as np


def write_png(path, a, bits=8, trns=None, plte=None):
    """a: (H, W) grey, (H, W, 2) grey+alpha, (H, W, 3) RGB or (H, W, 4) RGBA, integer codes; with
    plte (a list of RGB triples), a is (H, W) palette indices. trns: the bytes of a tRNS chunk."""
    a = np.asarray(a)
    if a.ndim == 2:
        a = a[:, :, None]
    h, w, c = a.shape
    ctype = 3 if plte is not None else {1: 0, 2: 4, 3: 2, 4: 6}[c]
    dt = ">u2" if bits == 16 else "u1"
    raw = b"".join(b"\x00" + a[y].astype(dt).tobytes() for y in range(h))

    def chunk(kind, data):
        body = kind + data
        return struct.pack(">I", len(data)) + body + struct.pack(">I", zlib.crc32(body) & 0xFFFFFFFF)

    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n")
        f.write(chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, bits, ctype, 0, 0, 0)))
        if plte is not None:
            f.write(chunk(b"PLTE", bytes(v for rgb in plte for v in rgb)))
        if trns is not None:
            f.write(chunk(b"tRNS", trns))
        f.write(chunk(b"IDAT", zlib.compress(raw, 6)))
        f.write(chunk(b"IEND", b""))


def clean_image(rng, w, h, cat):
    """An invented pattern (a few random plane waves, several per category) plus texture, kept away
    from 0 and 255; every call draws a new pattern."""
    y, x = np.mgrid[0:h, 0:w] / max(w, h)
    base = np.zeros((h, w))
    for _ in range(3):
        fx, fy = rng.uniform(-12, 12, 2)
        base += np.sin(fx * x + fy * y + rng.uniform(0, 6.3)) / 1.5
    img = np.empty((h, w, 3))
    for c in range(3):
        img[:, :, c] = 0.5 + 0.18 * base * (1 + 0.2 * c) + rng.normal(0, 0.03, (h, w))
    return np.clip(np.rint(img * 255), 30, 225).astype(np.uint8)


def perturb(rng, src, budget):
    """Gaussian noise scaled to the L2 budget (values in [0, 1]), clipped and rounded."""
    d = rng.normal(size=src.shape)
    d *= budget / np.linalg.norm(d)
    return np.clip(np.rint(src + 255 * d), 0, 255).astype(np.uint8)


def read_png(path):
    """Decodes an 8-bit non-interlaced PNG (any of the five filter types) to an (H, W, C) array."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", path
    pos, idat = 8, b""
    while pos < len(data):
        (n,) = struct.unpack(">I", data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            w, h, bits, ctype, _, _, interlace = struct.unpack(">IIBBBBB", body)
            assert bits == 8 and interlace == 0 and ctype in (0, 2, 4, 6), path
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    c = {0: 1, 2: 3, 4: 2, 6: 4}[ctype]
    raw = zlib.decompress(idat)
    stride = w * c
    out = np.zeros((h, stride), dtype=np.int64)
    prev = np.zeros(stride, dtype=np.int64)
    for y in range(h):
        ft = raw[y * (stride + 1)]
        line = np.frombuffer(raw, np.uint8, stride, y * (stride + 1) + 1).astype(np.int64)
        cur = np.zeros(stride, dtype=np.int64)
        for i in range(stride):
            a = cur[i - c] if i >= c else 0
            b = prev[i]
            cc = prev[i - c] if i >= c else 0
            if ft == 0:
                p = 0
            elif ft == 1:
                p = a
            elif ft == 2:
                p = b
            elif ft == 3:
                p = (a + b) // 2
            else:
                pa, pb, pc = abs(b - cc), abs(a - cc), abs(a + b - 2 * cc)
                p = a if pa <= pb and pa <= pc else (b if pb <= pc else cc)
            cur[i] = (line[i] + p) & 255
        out[y] = cur
        prev = cur
    return out.reshape(h, w, c).astype(np.uint8)


def lum_rms(a):
    """Mean relative luminance and RMS contrast (population SD of luminance) of RGB codes:
    IEC 61966-2-1 transfer function, Rec. 709 weights."""
    v = a[:, :, :3].astype(np.float64) / 255.0
    lin = np.where(v <= 0.04045, v / 12.92, ((v + 0.055) / 1.055) ** 2.4)
    y = lin @ np.array([0.2126, 0.7152, 0.0722])
    return float(y.mean()), float(y.std())


def norms(a, b):
    d = (a.astype(np.float64) - b.astype(np.float64)) / 255.0
    return float(np.linalg.norm(d.ravel())), float(np.abs(d).max())


def make_set(root):
    rng = np.random.default_rng(20261201)
    rows, expected = [], {}
    for ci, cat in enumerate(["kettle", "lantern", "compass"]):
        os.makedirs(os.path.join(root, cat), exist_ok=True)
        for k in range(4):
            src = clean_image(rng, 64, 48, ci + 3 * k)
            sname = "%s/%s%02d.png" % (cat, cat[:3], k)
            write_png(os.path.join(root, sname), src)
            rows.append((sname, cat, "0", ""))
            lum, rms = lum_rms(src)
            expected[sname] = {"lum": lum, "rms": rms}
            for lev in (1.5, 4.0):
                img = perturb(rng, src, lev)
                name = "%s/%s%02d_l2_%s.png" % (cat, cat[:3], k, str(lev).replace(".", "p"))
                write_png(os.path.join(root, name), img)
                rows.append((name, cat, "%g" % lev, sname))
                l2, linf = norms(img, src)
                lum, rms = lum_rms(img)
                expected[name] = {"l2": l2, "linf": linf, "lum": lum, "rms": rms}
    with open(os.path.join(root, "list.csv"), "w") as f:
        f.write("image,category,level,source\n")
        for r in rows:
            f.write(",".join(r) + "\n")
    with open(os.path.join(root, "expected.json"), "w") as f:
        json.dump(expected, f, indent=1)


def make_bad(root):
    rng = np.random.default_rng(7)
    os.makedirs(root, exist_ok=True)
    rgb = rng.integers(40, 200, (32, 32, 3))
    write_png(os.path.join(root, "rgb.png"), rgb)
    write_png(os.path.join(root, "deep16.png"), rgb * 257, bits=16)
    write_png(os.path.join(root, "grey.png"), rgb[:, :, 0])
    write_png(os.path.join(root, "greykey.png"), rgb[:, :, 0], trns=struct.pack(">H", rgb[0, 0, 0]))
    write_png(os.path.join(root, "rgbkey.png"), rgb, trns=struct.pack(">HHH", *rgb[0, 0]))
    idx = (rgb[:, :, 0] > 120).astype(np.uint8)
    write_png(os.path.join(root, "palkey.png"), idx, plte=[(10, 20, 30), (200, 180, 160)], trns=b"\x00")
    write_png(os.path.join(root, "greyalpha.png"), np.dstack([rgb[:, :, 0], np.full((32, 32), 200)]))
    alpha = np.dstack([rgb, np.full((32, 32), 255)])
    alpha[:4, :4, 3] = 0
    write_png(os.path.join(root, "alpha.png"), alpha)
    write_png(os.path.join(root, "opaque_rgba.png"), np.dstack([rgb, np.full((32, 32), 255)]))
    write_png(os.path.join(root, "small.png"), rgb[:16, :16])
    good = open(os.path.join(root, "rgb.png"), "rb").read()
    with open(os.path.join(root, "truncated.png"), "wb") as f:
        f.write(good[: len(good) // 2])
    bad = bytearray(good)
    for i in range(60, min(len(bad) - 20, 400)):
        bad[i] ^= 0x5A
    with open(os.path.join(root, "corrupt.png"), "wb") as f:
        f.write(bytes(bad))
    with open(os.path.join(root, "notes.png"), "w") as f:
        f.write("not an image\n")


def make_bench(root, n):
    """N rows of 256x256 RGB images in groups of four: a clean source and three perturbed versions
    (L2 budgets 1, 2 and 4), spread over four categories."""
    rng = np.random.default_rng(1)
    cats = ["cat0", "cat1", "cat2", "cat3"]
    for c in cats:
        os.makedirs(os.path.join(root, c), exist_ok=True)
    with open(os.path.join(root, "list.csv.tmp"), "w") as f:
        f.write("image,category,level,source\n")
        for g in range(0, n, 4):
            c = cats[(g // 4) % 4]
            src = clean_image(rng, 256, 256, g)
            sname = "%s/im%05d.png" % (c, g)
            write_png(os.path.join(root, sname), src)
            f.write("%s,%s,0,\n" % (sname, c))
            for k, lev in enumerate((1.0, 2.0, 4.0)[: min(3, n - g - 1)]):
                name = "%s/im%05d.png" % (c, g + k + 1)
                write_png(os.path.join(root, name), perturb(rng, src, lev))
                f.write("%s,%s,%g,%s\n" % (name, c, lev, sname))
    os.replace(os.path.join(root, "list.csv.tmp"), os.path.join(root, "list.csv"))


if __name__ == "__main__":
    mode = sys.argv[1]
    if mode == "set":
        make_set(sys.argv[2])
    elif mode == "bad":
        make_bad(sys.argv[2])
    elif mode == "bench":
        make_bench(sys.argv[2], int(sys.argv[3]))
    elif mode == "png":
        path, w, h, c, bits, seed = sys.argv[2], *map(int, sys.argv[3:8])
        rng = np.random.default_rng(seed)
        top = 65535 if bits == 16 else 255
        shape = (h, w) if c == 1 else (h, w, c)
        write_png(path, rng.integers(0, top + 1, shape), bits)
    else:
        sys.exit(__doc__)
