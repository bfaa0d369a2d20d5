"""Small valid image files of every supported kind: the seeds that fuzzing mutates.

Shared by the hypothesis suite and ``benchmarks/bench_fuzz.py``.
"""

from __future__ import annotations

import io

import numpy as np


def _ramp(h=24, w=32):
    yy, xx = np.mgrid[0:h, 0:w]
    return np.round(10 + 190 * (xx + yy) / (h + w - 2)).astype(np.uint8)


def seed_files() -> dict[str, bytes]:
    """name (with the suffix that picks the reader) -> file bytes."""
    import tifffile
    from PIL import Image

    g = _ramp()
    rgb = np.dstack([g, g[::-1], g[:, ::-1]])
    out: dict[str, bytes] = {}

    def tiff(name, data, **kw):
        b = io.BytesIO()
        tifffile.imwrite(b, data, **kw)
        out[name] = b.getvalue()

    def pil(name, im, fmt, **kw):
        b = io.BytesIO()
        im.save(b, format=fmt, **kw)
        out[name] = b.getvalue()

    tiff("grey8.tif", g, resolution=(20000, 20000), resolutionunit="CENTIMETER")
    tiff("grey16_deflate.tif", g.astype(np.uint16) * 200, compression="zlib")
    tiff("float_tiled.tif", g.astype(np.float32) / 7, tile=(16, 16))
    tiff("rgb_planar.tif", np.moveaxis(rgb, -1, 0), photometric="rgb", planarconfig="separate")
    tiff("cmyk.tif", np.dstack([rgb, g]), photometric="separated")
    pil("lzw_rgb.tif", Image.fromarray(rgb), "TIFF", compression="tiff_lzw")
    pil("packbits_bilevel.tif", Image.fromarray(g > 100), "TIFF", compression="packbits")
    pil("grey.png", Image.fromarray(g), "PNG")
    pil("rgb.png", Image.fromarray(rgb), "PNG")
    pil("palette.png", Image.fromarray(rgb).convert("P", palette=Image.Palette.ADAPTIVE), "PNG")
    pil("grey16.png", Image.fromarray(g.astype(np.uint16) * 250), "PNG")
    pil("grey.jpg", Image.fromarray(g), "JPEG", quality=90)
    pil("rgb_progressive.jpg", Image.fromarray(rgb), "JPEG", progressive=True)
    pil("grey.bmp", Image.fromarray(g), "BMP")
    pil("rgb.bmp", Image.fromarray(rgb), "BMP")
    return out


def mutate(data: bytes, edits, *, cut: int | None = None) -> bytes:
    """Apply ``edits`` = [(kind, position, value)]: kind 0 set a byte, 1 insert, 2 delete.

    Positions wrap around the current length; ``cut`` truncates at that fraction (0-255).
    """
    buf = bytearray(data)
    for kind, pos, value in edits:
        if not buf:
            break
        i = pos % len(buf)
        if kind == 0:
            buf[i] = value & 0xFF
        elif kind == 1:
            buf[i:i] = bytes([value & 0xFF]) * (1 + (value >> 8) % 8)
        else:
            del buf[i: i + 1 + value % 4]
    if cut is not None and buf:
        buf = buf[: max(1, len(buf) * cut // 255)]
    return bytes(buf)
