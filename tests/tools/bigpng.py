#!/usr/bin/python3
"""bigpng — PNG files whose pixel size is far beyond what they cost on disk, for the image size
limit tests (PNG specification: signature, IHDR, IDAT, IEND; zlib from the standard library).

  bigpng.py real FILE W H     a real W×H grey image of zeros, compressed row by row (20000×20000
                              is about 400 KB on disk and 1.6 GB as RGBA8 pixels)
  bigpng.py claim FILE W H    a valid IHDR claiming W×H followed by a tiny IDAT and IEND (about
                              100 bytes): only a decoder that trusts the header allocates W×H
"""
import struct
import sys
import zlib


def chunk(kind, data):
    body = kind + data
    return struct.pack(">I", len(data)) + body + struct.pack(">I", zlib.crc32(body) & 0xFFFFFFFF)


def main():
    mode, path, w, h = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])
    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n")
        f.write(chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 0, 0, 0, 0)))
        if mode == "real":
            z = zlib.compressobj(9)
            row = bytes(w + 1)   # filter byte 0, then W zeros
            data = b"".join(z.compress(row) for _ in range(h)) + z.flush()
        else:
            data = zlib.compress(bytes(64 + 1))
        f.write(chunk(b"IDAT", data))
        f.write(chunk(b"IEND", b""))


if __name__ == "__main__":
    main()
