#!/usr/bin/env python3
"""Make the CMYK JPEG fixtures in tests/reference/fixtures/cmyk/.

    .venv/bin/pip install -r tests/reference/requirements.txt
    .venv/bin/python tests/reference/make_cmyk.py            # write the fixtures
    .venv/bin/python tests/reference/make_cmyk.py --check    # regenerate in memory, compare

Every image is a row of flat 16×16 patches (pure C, M, Y, K, white, 50 % K and
a mixed colour), so each 8×8 DCT block holds one colour and the expected RGB
follows from the naive formula R = (1−C)(1−K), G = (1−M)(1−K), B = (1−Y)(1−K).
The patch table, stored polarity and versions go into manifest.toml, which
tests/integration/cmyk.rs reads.

What Pillow 12.0.0 writes for Image.new("CMYK", …).save(…, "JPEG", quality=100)
-------------------------------------------------------------------------------
Found from the bytes (and asserted again on every run by `describe` below, with
a small DC-coefficient reader that does not depend on any decoder's CMYK
convention):

* It carries an Adobe APP14 segment: "Adobe", version 100, flags0 = flags1 = 0,
  transform 0 (no colour transform: the four components are C, M, Y, K as
  stored). There is no JFIF APP0 segment.
* Its samples are inverted (the Adobe convention): the stored value is
  255 − ink, so a patch with no ink stores 255 and full ink stores 0. (Pillow
  packs CMYK through its "CMYK;I" raw mode when saving.)
* The frame is baseline, four components with ids 'C' 'M' 'Y' 'K', all sampled
  1×1, sharing one quantisation table whose 64 steps are all 1 at quality 100.
  A flat block then has only a DC coefficient, DC = 8·(v − 128) (ITU-T T.81
  §A.3.3 normalisation), stored to within ±0.5 of a quantiser step = 1/16 code.

Fixtures and how each is made honestly
--------------------------------------
* adobe-cmyk.jpg — Pillow's file as written: Adobe marker, inverted samples.
* plain-cmyk.jpg — a file without the Adobe marker that stores plain CMYK
  (stored 255 = full ink). Compressed data cannot be un-inverted by editing
  bytes, so Pillow is given the complemented image (255 − ink); its inversion
  then stores 255 − (255 − ink) = ink, and the APP14 segment (a header segment
  of its own, nothing else refers to it) is cut out. The entropy-coded data are
  untouched, so the file stores the plain ink values with no marker.
* adobe-ycck.jpg — Adobe transform 2 (YCCK). Pillow cannot write YCCK, so this
  script writes it with its own minimal baseline encoder (`ycck_jpeg`): each
  8×8 block is flat, so only DC coefficients are coded (quantiser steps 1, AC
  all zero as one end-of-block code). Stored values follow the Adobe convention
  (255 − ink); the encoder forms R = 255 − C, G = 255 − M, B = 255 − Y from
  the stored C, M, Y (the complement decoders undo on YCCK, e.g. zune-jpeg's
  color_convert_ycck_to_rgb in worker.rs) and codes them as JFIF YCbCr
  (ITU-T T.871 §7), K passing through.
* adobe-metadata.jpg — Pillow's Adobe file with dpi=(300, 300), an EXIF block
  holding Orientation 6 and a stand-in ICC payload (bytes kept verbatim by
  the decoder; it is not a usable profile), for the metadata checks.
"""

from __future__ import annotations

import argparse
import io
import json
import sys
from pathlib import Path

import numpy as np
import PIL
from PIL import Image

HERE = Path(__file__).resolve().parent
OUT = HERE / "fixtures" / "cmyk"

PATCH = 16  # pixels; a multiple of the 8×8 DCT block, so no block mixes two patches
# (name, ink C, M, Y, K) as 8-bit codes, 0 = no ink, 255 = full ink.
PATCHES = [
    ("white", 0, 0, 0, 0),
    ("cyan", 255, 0, 0, 0),
    ("magenta", 0, 255, 0, 0),
    ("yellow", 0, 0, 255, 0),
    ("black", 0, 0, 0, 255),
    ("k50", 0, 0, 0, 128),  # 128/255 ≈ 50 % K
    ("mixed", 64, 160, 32, 48),
]
ICC_STAND_IN = b"pumice test: stand-in ICC payload, kept verbatim, not a profile"


def ink_image() -> np.ndarray:
    """The ink values as an [h, w, 4] uint8 array."""
    row = np.concatenate(
        [np.broadcast_to(np.array(p[1:], np.uint8), (PATCH, PATCH, 4)) for p in PATCHES], axis=1
    )
    return np.ascontiguousarray(row)


def pillow_jpeg(cmyk: np.ndarray, **save) -> bytes:
    buf = io.BytesIO()
    Image.fromarray(cmyk, "CMYK").save(buf, "JPEG", quality=100, **save)
    return buf.getvalue()


# --- reading the bytes --------------------------------------------------------


def segments(data: bytes):
    """(marker, payload, start, end) for each segment before the first scan."""
    assert data[:2] == b"\xff\xd8", "not a JPEG"
    pos = 2
    while True:
        assert data[pos] == 0xFF, f"no marker at {pos}"
        marker = data[pos + 1]
        length = int.from_bytes(data[pos + 2 : pos + 4], "big")
        yield marker, data[pos + 4 : pos + 2 + length], pos, pos + 2 + length
        if marker == 0xDA:
            return
        pos += 2 + length


def strip_app14(data: bytes) -> bytes:
    for marker, payload, start, end in segments(data):
        if marker == 0xEE and payload.startswith(b"Adobe"):
            return data[:start] + data[end:]
    raise AssertionError("no Adobe APP14 segment to strip")


class Bits:
    """MSB-first reader over entropy-coded data, undoing 0xFF00 stuffing (T.81 §F.1.2.3)."""

    def __init__(self, data: bytes):
        out = bytearray()
        i = 0
        while i < len(data):
            b = data[i]
            if b == 0xFF:
                if data[i + 1] == 0x00:
                    out.append(0xFF)
                    i += 2
                    continue
                break  # a marker: end of the scan
            out.append(b)
            i += 1
        self.data, self.pos = bytes(out), 0

    def bit(self) -> int:
        b = (self.data[self.pos >> 3] >> (7 - (self.pos & 7))) & 1
        self.pos += 1
        return b

    def bits(self, n: int) -> int:
        v = 0
        for _ in range(n):
            v = (v << 1) | self.bit()
        return v


def huffman_codes(counts, symbols) -> dict:
    """(length, code) → symbol, generated as in T.81 Annex C (Figures C.1–C.3)."""
    table, code, k = {}, 0, 0
    for length in range(1, 17):
        for _ in range(counts[length - 1]):
            table[(length, code)] = symbols[k]
            code += 1
            k += 1
        code <<= 1
    return table


def decode_symbol(bits: Bits, table: dict) -> int:
    code = 0
    for length in range(1, 17):
        code = (code << 1) | bits.bit()
        if (length, code) in table:
            return table[(length, code)]
    raise AssertionError("bad Huffman code")


def extend(v: int, s: int) -> int:
    """T.81 §F.2.2.1, EXTEND."""
    return v - (1 << s) + 1 if s and v < (1 << (s - 1)) else v


def describe(data: bytes) -> dict:
    """What the headers say, and the stored sample value of every 8×8 block of
    the first block row, read from the DC coefficients (baseline, 1×1 sampling,
    flat blocks only: any non-zero AC coefficient is an error)."""
    info = {"adobe": None, "jfif": False}
    qt, dc_tables, ac_tables = {}, {}, {}
    for marker, p, _start, end in segments(data):
        if marker == 0xEE and p.startswith(b"Adobe"):
            info["adobe"] = {
                "version": int.from_bytes(p[5:7], "big"),
                "flags0": int.from_bytes(p[7:9], "big"),
                "flags1": int.from_bytes(p[9:11], "big"),
                "transform": p[11],
            }
        elif marker == 0xE0 and p.startswith(b"JFIF\0"):
            info["jfif"] = True
        elif marker == 0xDB:
            i = 0
            while i < len(p):
                assert p[i] >> 4 == 0, "16-bit quantisation table"
                qt[p[i] & 15] = list(p[i + 1 : i + 65])
                i += 65
        elif marker == 0xC4:
            i = 0
            while i < len(p):
                tc, th = p[i] >> 4, p[i] & 15
                counts = list(p[i + 1 : i + 17])
                symbols = list(p[i + 17 : i + 17 + sum(counts)])
                (ac_tables if tc else dc_tables)[th] = huffman_codes(counts, symbols)
                i += 17 + sum(counts)
        elif marker == 0xC0:
            info["height"] = int.from_bytes(p[1:3], "big")
            info["width"] = int.from_bytes(p[3:5], "big")
            comps = [(p[6 + 3 * c], p[7 + 3 * c], p[8 + 3 * c]) for c in range(p[5])]
            info["components"] = [bytes([c[0]]).decode("latin-1") for c in comps]
            assert all(c[1] == 0x11 for c in comps), "only 1×1 sampling is read here"
            info["quant"] = [qt[c[2]] for c in comps]
        elif marker == 0xDD:
            raise AssertionError("restart intervals are not read here")
        elif marker == 0xDA:
            sel = [(p[1 + 2 * c], p[2 + 2 * c]) for c in range(p[0])]
            scan_start = end
    bits = Bits(data[scan_start:])
    pred = [0] * len(sel)
    blocks = []
    for _mcu in range(info["width"] // 8):
        values = []
        for c, (_cid, tables) in enumerate(sel):
            s = decode_symbol(bits, dc_tables[tables >> 4])
            pred[c] += extend(bits.bits(s), s)
            k = 1
            while k < 64:
                rs = decode_symbol(bits, ac_tables[tables & 15])
                if rs == 0:
                    break  # end of block
                raise AssertionError("a flat patch block has an AC coefficient")
            # Inverse DCT of a DC-only block: every sample is DC·Q/8 + 128 (T.81 §A.3.3).
            values.append(pred[c] * info["quant"][c][0] / 8 + 128)
        blocks.append(values)
    info["first_row_blocks"] = blocks
    return info


# --- a minimal DC-only baseline encoder, for YCCK ------------------------------

# T.81 Annex K, Table K.3: the typical luminance DC table (categories 0–11).
DC_COUNTS = [0, 1, 5, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0, 0, 0]
DC_SYMBOLS = list(range(12))
# An AC table holding one symbol, 0x00 (end of block): every block here is flat.
AC_COUNTS = [1] + [0] * 15
AC_SYMBOLS = [0x00]


class BitWriter:
    def __init__(self):
        self.out, self.acc, self.n = bytearray(), 0, 0

    def put(self, value: int, length: int):
        for i in range(length - 1, -1, -1):
            self.acc = (self.acc << 1) | ((value >> i) & 1)
            self.n += 1
            if self.n == 8:
                self.out.append(self.acc)
                if self.acc == 0xFF:
                    self.out.append(0x00)  # byte stuffing, T.81 §F.1.2.3
                self.acc, self.n = 0, 0

    def flush(self) -> bytes:
        if self.n:
            self.put((1 << (8 - self.n)) - 1, 8 - self.n)  # pad the last byte with 1-bits (from memory of T.81)
        return bytes(self.out)


def segment(marker: int, payload: bytes) -> bytes:
    return bytes([0xFF, marker]) + (len(payload) + 2).to_bytes(2, "big") + payload


def ycck_jpeg(stored_cmyk: np.ndarray) -> bytes:
    """A baseline YCCK JPEG with an Adobe transform-2 marker for an image whose
    8×8 blocks are flat. `stored_cmyk` holds the CMYK values as they are to be
    stored (Adobe convention: 255 − ink)."""
    h, w, _ = stored_cmyk.shape
    assert h % 8 == 0 and w % 8 == 0
    s = stored_cmyk.astype(np.float64)
    r, g, b = 255 - s[..., 0], 255 - s[..., 1], 255 - s[..., 2]
    # ITU-T T.871 §7, the JFIF RGB → YCbCr equations (8-bit, offsets 128).
    y = 0.299 * r + 0.587 * g + 0.114 * b
    cb = -0.1687 * r - 0.3313 * g + 0.5 * b + 128
    cr = 0.5 * r - 0.4187 * g - 0.0813 * b + 128
    planes = np.clip(np.rint(np.stack([y, cb, cr, s[..., 3]], axis=-1)), 0, 255).astype(np.int64)
    dc_codes = {sym: code for code, sym in huffman_codes(DC_COUNTS, DC_SYMBOLS).items()}
    ac_codes = {sym: code for code, sym in huffman_codes(AC_COUNTS, AC_SYMBOLS).items()}
    bw, pred = BitWriter(), [0, 0, 0, 0]
    for by in range(h // 8):
        for bx in range(w // 8):
            block = planes[by * 8 : by * 8 + 8, bx * 8 : bx * 8 + 8]
            for c in range(4):
                v = block[..., c]
                assert (v == v[0, 0]).all(), "blocks must be flat"
                dc = 8 * (int(v[0, 0]) - 128)  # T.81 §A.3.3 with quantiser step 1
                diff, pred[c] = dc - pred[c], dc
                size = abs(diff).bit_length()
                length, code = dc_codes[size]
                bw.put(code, length)
                if size:
                    bw.put(diff if diff > 0 else diff + (1 << size) - 1, size)
                length, code = ac_codes[0x00]
                bw.put(code, length)
    adobe = b"Adobe" + (100).to_bytes(2, "big") + b"\0\0\0\0" + bytes([2])
    dqt = bytes([0]) + bytes([1] * 64)
    sof = bytes([8]) + h.to_bytes(2, "big") + w.to_bytes(2, "big") + bytes([4])
    sof += b"".join(bytes([c, 0x11, 0]) for c in (1, 2, 3, 4))
    dht = bytes([0x00]) + bytes(DC_COUNTS) + bytes(DC_SYMBOLS)
    dht += bytes([0x10]) + bytes(AC_COUNTS) + bytes(AC_SYMBOLS)
    sos = bytes([4]) + b"".join(bytes([c, 0x00]) for c in (1, 2, 3, 4)) + bytes([0, 63, 0])
    return (
        b"\xff\xd8"
        + segment(0xEE, adobe)
        + segment(0xDB, dqt)
        + segment(0xC0, sof)
        + segment(0xC4, dht)
        + segment(0xDA, sos)
        + bw.flush()
        + b"\xff\xd9"
    )


def ycc_inverse(y, cb, cr):
    """T.871 §7, YCbCr → RGB, used only to report the expected YCCK rounding."""
    return (
        y + 1.402 * (cr - 128),
        y - 0.344136 * (cb - 128) - 0.714136 * (cr - 128),
        y + 1.772 * (cb - 128),
    )


# --- the fixtures --------------------------------------------------------------


def exif_orientation_6() -> bytes:
    exif = Image.Exif()
    exif[0x0112] = 6  # Orientation: 0th row right, 0th column top (EXIF 2.32 §4.6.4 A)
    return exif.tobytes()


def build() -> tuple[dict[str, bytes], str]:
    ink = ink_image()
    files = {
        "adobe-cmyk.jpg": pillow_jpeg(ink),
        "plain-cmyk.jpg": strip_app14(pillow_jpeg(255 - ink)),
        "adobe-ycck.jpg": ycck_jpeg(255 - ink),
        "adobe-metadata.jpg": pillow_jpeg(
            ink, dpi=(300, 300), icc_profile=ICC_STAND_IN, exif=exif_orientation_6()
        ),
    }
    expected_stored = {
        "adobe-cmyk.jpg": ("inverted", 255 - ink),
        "plain-cmyk.jpg": ("plain", ink),
        "adobe-metadata.jpg": ("inverted", 255 - ink),
    }
    # Check the claims in the docstring against the bytes.
    for name, (polarity, stored) in expected_stored.items():
        d = describe(files[name])
        if polarity == "inverted":
            assert d["adobe"] == {"version": 100, "flags0": 0, "flags1": 0, "transform": 0}, d["adobe"]
        else:
            assert d["adobe"] is None
        assert not d["jfif"] or name == "adobe-metadata.jpg"  # dpi= adds a JFIF APP0
        assert d["components"] == ["C", "M", "Y", "K"], d["components"]
        assert all(q == [1] * 64 for q in d["quant"]), "quality 100 should give steps of 1"
        want = stored[0, ::8].astype(np.float64)  # one value per block of the first row
        got = np.array(d["first_row_blocks"])
        assert np.abs(got - want).max() <= 1 / 16 + 1e-9, (name, got, want)
    d = describe(files["adobe-ycck.jpg"])
    assert d["adobe"]["transform"] == 2
    # Pillow's own reader as a second opinion. It takes every CMYK JPEG to be
    # inverted (JpegImagePlugin: rawmode "CMYK;I", "assume adobe conventions"), so it
    # gives the inks back for the Adobe files, YCCK included, and says nothing
    # about plain-cmyk.jpg (it reads 255 − ink there).
    for name in ("adobe-cmyk.jpg", "adobe-ycck.jpg", "adobe-metadata.jpg"):
        back = np.asarray(Image.open(io.BytesIO(files[name])).convert("CMYK")).astype(int)
        assert np.abs(back - ink).max() <= 2, (name, np.abs(back - ink).max())
    # Decoded value per patch of the YCCK file, through the T.871 inverse and the complement.
    ycc = np.array(d["first_row_blocks"])[::2]
    r, g, b = ycc_inverse(ycc[:, 0], ycc[:, 1], ycc[:, 2])
    ycck_stored_cmy = 255 - np.clip(np.stack([r, g, b], axis=-1), 0, 255)
    ycck_error = np.abs(ycck_stored_cmy - (255 - ink[0, ::PATCH, :3])).max()

    lines = [
        "# Written by tests/reference/make_cmyk.py; read by tests/integration/cmyk.rs.",
        f'pillow = "{PIL.__version__}"',
        f'numpy = "{np.__version__}"',
        f"patch_size = {PATCH}",
        "# Largest difference, in 8-bit codes, between the intended stored C, M, Y and what",
        "# the YCCK file decodes to through T.871 §7 (from the YCbCr rounding to integers).",
        f"ycck_cmy_rounding = {ycck_error:.4f}",
        "# The ICC payload in adobe-metadata.jpg.",
        f"icc_stand_in = {json.dumps(ICC_STAND_IN.decode('ascii'))}",
        "",
    ]
    for name, polarity in [
        ("adobe-cmyk.jpg", "inverted"),
        ("plain-cmyk.jpg", "plain"),
        ("adobe-ycck.jpg", "inverted"),
        ("adobe-metadata.jpg", "inverted"),
    ]:
        d = describe(files[name])
        transform = "none" if d["adobe"] is None else str(d["adobe"]["transform"])
        lines += [
            "[[file]]",
            f'name = "{name}"',
            f'adobe_transform = "{transform}"',
            f'stored = "{polarity}"  # inverted: stored = 255 − ink; plain: stored = ink',
            f"width = {d['width']}",
            f"height = {d['height']}",
            "",
        ]
    for name, c, m, y, k in PATCHES:
        lines += ["[[patch]]", f'name = "{name}"', f"ink = [{c}, {m}, {y}, {k}]", ""]
    return files, "\n".join(lines)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--check", action="store_true", help="compare with the committed files")
    args = ap.parse_args()
    files, manifest = build()
    files["manifest.toml"] = manifest.encode()
    if args.check:
        bad = [n for n, b in files.items() if not (OUT / n).exists() or (OUT / n).read_bytes() != b]
        for n in bad:
            print(f"differs: {n}", file=sys.stderr)
        return 1 if bad else 0
    OUT.mkdir(parents=True, exist_ok=True)
    for name, data in files.items():
        (OUT / name).write_bytes(data)
        print(f"{name}: {len(data)} bytes")
    return 0


if __name__ == "__main__":
    sys.exit(main())
