"""Decoding hostile and unusual image files: the size budget, colour models, odd files.

External references: the TIFF 6.0 specification (PhotometricInterpretation 0 = min-is-white,
3 = palette, 5 = separated/CMYK; tag numbers 256/257/258/259/262/273/278/279; from memory),
the PNG specification (IHDR layout, CRC-32 over type + data; from memory), Pillow's own
``convert`` (CMYK, palette and bilevel computed another way) and scikit-image's
``rgb2gray`` (ITU-R BT.709 luminance).
"""

from __future__ import annotations

import io
import os
import re
import struct
import zlib

import numpy as np
import pytest
import tifffile
from PIL import Image
from skimage.color import rgb2gray

from sectio._decode import (
    OVER_BUDGET_READERS,
    ImageTooLargeError,
    cmyk_to_rgb,
    format_bytes,
    parse_bytes,
)
from sectio.errors import ImageReadError, ImageWarning, InputError, OptionError
from sectio.micrograph import load


def _ramp(h=40, w=50):
    yy, xx = np.mgrid[0:h, 0:w]
    return np.round(10 + 190 * (xx + yy) / (h + w - 2)).astype(np.uint8)


def _scaled(a):
    a = np.asarray(a, float)
    return (a - a.min()) / (a.max() - a.min())


def tiny_tiff_header(width: int, height: int, bits: int = 8, samples: int = 1) -> bytes:
    """A little-endian TIFF whose one IFD declares ``width x height`` with 16 data bytes.

    Built by hand from the TIFF 6.0 tag layout, so that a huge declared size costs nothing
    to write (the strip is short: decoding it would fail, but the budget check comes first).
    """
    entries = [(256, 4, 1, width), (257, 4, 1, height), (258, 3, 1, bits),
               (259, 3, 1, 1), (262, 3, 1, 1 if samples == 1 else 2), (273, 4, 1, 0),
               (277, 3, 1, samples), (278, 4, 1, height), (279, 4, 1, 16)]
    ifd_offset = 8
    data_offset = ifd_offset + 2 + 12 * len(entries) + 4
    out = bytearray(b"II*\x00" + struct.pack("<I", ifd_offset))
    out += struct.pack("<H", len(entries))
    for tag, typ, count, value in entries:
        if tag == 273:
            value = data_offset
        if typ == 3:
            out += struct.pack("<HHIHH", tag, typ, count, value, 0)
        else:
            out += struct.pack("<HHII", tag, typ, count, value)
    out += struct.pack("<I", 0) + bytes(16)
    return bytes(out)


def png_with_size(width: int, height: int) -> bytes:
    """A 1x1 grey PNG whose IHDR is rewritten to declare ``width x height`` (CRC fixed)."""
    buf = io.BytesIO()
    Image.new("L", (1, 1)).save(buf, format="PNG")
    data = bytearray(buf.getvalue())
    ihdr = bytearray(data[12:29])  # b"IHDR" + 13 data bytes
    ihdr[4:12] = struct.pack(">II", width, height)
    data[12:29] = ihdr
    data[29:33] = struct.pack(">I", zlib.crc32(bytes(ihdr)) & 0xFFFFFFFF)
    return bytes(data)


# --------------------------------------------------------------------------- budget
def test_huge_tiff_header_refused_before_decoding(tmp_path):
    p = tmp_path / "huge.tif"
    p.write_bytes(tiny_tiff_header(60000, 60000, bits=8, samples=1))
    assert p.stat().st_size < 200
    # 60000^2 pixels x 8 bytes = 26.8 GiB of float pixels
    msg = (re.escape(str(p)) + r" would need 26\.8 GiB decoded \(60000 x 60000 pixels\), "
           r"above the 1\.5 GiB image memory budget; raise it with --max-image-memory 27GiB")
    with pytest.raises(ImageTooLargeError, match=msg) as info:
        load(p, pixel_size="1um")
    assert info.value.header.decoded_bytes == 60000 * 60000 * 8
    assert isinstance(info.value, ImageReadError)


def test_budget_option_and_environment(tmp_path, monkeypatch):
    p = tmp_path / "ramp.tif"
    tifffile.imwrite(p, np.tile(_ramp(), (20, 20)))  # 800 x 1000 = 6.1 MiB as float64
    with pytest.raises(ImageTooLargeError, match=r"6\.1 MiB decoded .* above the 5\.0 MiB"):
        load(p, pixel_size="1um", max_image_memory="5MiB")
    assert load(p, pixel_size="1um", max_image_memory="7MiB").shape == (800, 1000)
    monkeypatch.setenv("SECTIO_MAX_IMAGE_MEMORY", "5MiB")
    with pytest.raises(ImageTooLargeError):
        load(p, pixel_size="1um")
    monkeypatch.setenv("SECTIO_MAX_IMAGE_MEMORY", "lots")
    with pytest.raises(OptionError, match=r"SECTIO_MAX_IMAGE_MEMORY 'lots' is not a memory "):
        load(p, pixel_size="1um")


def test_over_budget_reader_hook(tmp_path):
    p = tmp_path / "mosaic.tif"
    p.write_bytes(tiny_tiff_header(60000, 60000))
    seen = []

    def reader(header, budget):
        seen.append((header.width, header.height, header.format, budget))
        return np.tile(_ramp(), (2, 2)).astype(float)

    OVER_BUDGET_READERS.append(reader)
    try:
        mg = load(p, pixel_size="1um")
    finally:
        OVER_BUDGET_READERS.remove(reader)
    assert seen == [(60000, 60000, "TIFF", int(1.5 * 2**30))]
    assert mg.shape == (80, 100)


def test_png_bomb_and_header_budget(tmp_path):
    # 100000^2 is above twice Pillow's limit: Pillow's own check stops it at open()
    bomb = tmp_path / "bomb.png"
    bomb.write_bytes(png_with_size(100000, 100000))
    assert bomb.stat().st_size < 100
    with pytest.raises(ImageReadError, match=re.escape(str(bomb)) + r" declares more than"):
        load(bomb, pixel_size="1um")
    # 20000^2 passes Pillow's check (set from the budget) but not ours: 2.98 GiB of floats
    big = tmp_path / "big.png"
    big.write_bytes(png_with_size(20000, 20000))
    with pytest.raises(ImageTooLargeError, match=r"3\.0 GiB decoded \(20000 x 20000 pixels\)"):
        load(big, pixel_size="1um")


@pytest.mark.parametrize("text, n", [("1.5GiB", int(1.5 * 2**30)), ("800MB", 800_000_000),
                                      ("4 gib", 4 * 2**30), (2**21, 2**21)])
def test_parse_bytes(text, n):
    assert parse_bytes(text) == n


@pytest.mark.parametrize("text", ["", "1e400GiB", "-1GiB", "nan", "inf", "12 parsecs",
                                  "1KiB", "9" * 400, 1e300, float("nan")])
def test_parse_bytes_refuses(text):
    with pytest.raises(OptionError, match=r"--max-image-memory .* (not a memory size|outside)"):
        parse_bytes(text)


def test_format_bytes():
    assert format_bytes(3 * 2**30) == "3.0 GiB"
    assert format_bytes(512) == "512 bytes"


# --------------------------------------------------------------------------- colour models
def test_cmyk_tiff_matches_pillow(tmp_path):
    rng = np.random.default_rng(1)
    cmyk = rng.integers(0, 256, size=(40, 50, 4), dtype=np.uint8)
    p = tmp_path / "cmyk.tif"
    tifffile.imwrite(p, cmyk, photometric="separated")
    mg = load(p, pixel_size="1um")
    # Pillow converts CMYK to RGB by its own code: the same model computed another way
    rgb = np.asarray(Image.fromarray(cmyk, mode="CMYK").convert("RGB"))
    np.testing.assert_allclose(mg.image, _scaled(rgb2gray(rgb)), atol=0.01)
    assert any("CMYK" in n for n in mg.notes)
    # the old bug: C = M = Y = 0 with K = dark ink must come out dark, not inverted
    np.testing.assert_allclose(cmyk_to_rgb(np.array([[[0, 0, 0, 255]]], np.uint8)), 0.0)


def test_cmyk_jpeg(tmp_path):
    grey = np.kron(np.array([[40, 200], [120, 10]], np.uint8), np.ones((32, 32), np.uint8))
    cmyk = np.zeros(grey.shape + (4,), np.uint8)
    cmyk[..., 3] = 255 - grey  # black ink only
    p = tmp_path / "cmyk.jpg"
    Image.fromarray(cmyk, mode="CMYK").save(p, quality=95)
    mg = load(p, pixel_size="1um")
    np.testing.assert_allclose(mg.image[8:24, 8:24], _scaled(grey)[8:24, 8:24], atol=0.04)


def test_palette_png_and_tiff(tmp_path):
    rgb = np.zeros((40, 50, 3), np.uint8)
    rgb[:, :25] = (200, 30, 30)
    rgb[:, 25:] = (20, 180, 90)
    pil = Image.fromarray(rgb).convert("P", palette=Image.Palette.ADAPTIVE, colors=4)
    p = tmp_path / "pal.png"
    pil.save(p)
    back = np.asarray(pil.convert("RGB"))  # Pillow applies the palette its own way
    mg = load(p, pixel_size="1um")
    np.testing.assert_allclose(mg.image, _scaled(rgb2gray(back)), atol=1e-5)
    assert any("palette" in n for n in mg.notes)
    # a TIFF palette: 16-bit colour map (TIFF 6.0)
    idx = (np.arange(50)[None, :] >= 25).astype(np.uint8).repeat(40, axis=0)
    cmap = np.zeros((3, 256), np.uint16)
    cmap[:, 0] = (200 * 257, 30 * 257, 30 * 257)
    cmap[:, 1] = (20 * 257, 180 * 257, 90 * 257)
    pt = tmp_path / "pal.tif"
    tifffile.imwrite(pt, idx, photometric="palette", colormap=cmap)
    np.testing.assert_allclose(load(pt, pixel_size="1um").image,
                               _scaled(rgb2gray(rgb)), atol=1e-5)


def test_bilevel_png_and_tiff(tmp_path):
    bits = (np.indices((40, 50)).sum(axis=0) // 7) % 2 == 1
    p = tmp_path / "bw.png"
    Image.fromarray(bits).save(p)  # mode "1"
    with Image.open(p) as im:
        assert im.mode == "1"
    np.testing.assert_array_equal(load(p, pixel_size="1um").image, bits.astype(np.float32))
    pt = tmp_path / "bw.tif"
    tifffile.imwrite(pt, bits)  # tifffile writes bilevel as min-is-white
    with tifffile.TiffFile(pt) as tif:
        photometric = int(tif.pages[0].photometric)
    mg = load(pt, pixel_size="1um")
    expect = (~bits if photometric == 0 else bits).astype(np.float32)
    np.testing.assert_array_equal(mg.image, expect)


def test_min_is_white_inverted(tmp_path):
    p = tmp_path / "miw.tif"
    tifffile.imwrite(p, _ramp(), photometric="miniswhite")
    mg = load(p, pixel_size="1um")
    np.testing.assert_allclose(mg.image, _scaled(255 - _ramp().astype(float)), atol=1e-6)
    assert any("min-is-white" in n for n in mg.notes)


def test_rgba_transparency_said(tmp_path):
    rgba = np.dstack([_ramp()] * 3 + [np.full((40, 50), 255, np.uint8)])
    rgba[:5, :5, 3] = 0
    p = tmp_path / "rgba.png"
    Image.fromarray(rgba, mode="RGBA").save(p)
    mg = load(p, pixel_size="1um")
    np.testing.assert_allclose(mg.image, _scaled(_ramp()), atol=1e-6)
    assert any("transparency" in n for n in mg.notes)


def test_complex_and_stacks_refused(tmp_path):
    p = tmp_path / "fft.tif"
    tifffile.imwrite(p, (_ramp() + 1j * _ramp()).astype(np.complex64))
    with pytest.raises(ImageReadError, match=re.escape(str(p)) + r" holds complex values"):
        load(p, pixel_size="1um")
    s = tmp_path / "stack.tif"
    for _ in range(6):
        tifffile.imwrite(s, _ramp(), photometric="minisblack", append=True)
    with pytest.warns(ImageWarning, match=r"has 6 pages; using page 1 only"):
        assert load(s, pixel_size="1um").shape == (40, 50)
    v = tmp_path / "volume.tif"
    tifffile.imwrite(v, np.stack([_ramp()] * 4), volumetric=True, tile=(16, 16),
                     photometric="minisblack")
    with pytest.raises(ImageReadError, match=re.escape(str(v)) + r" .*(3-D stack|2-D)"):
        load(v, pixel_size="1um")


def test_float_extremes_and_nonfinite(tmp_path):
    a = _ramp().astype(np.float64) / 200.0 * 1.7e308
    a[0, 0] = -1.7e308
    p = tmp_path / "extreme.tif"
    tifffile.imwrite(p, a)
    img = load(p, pixel_size="1um").image
    assert np.isfinite(img).all() and img.min() == 0.0 and img.max() == 1.0
    b = _ramp().astype(np.float32)
    b[3, :] = np.inf
    b[4, :10] = np.nan
    q = tmp_path / "holes.tif"
    tifffile.imwrite(q, b)
    mg = load(q, pixel_size="1um")
    assert np.isfinite(mg.image).all()
    assert any("non-finite pixels (NaN or infinity: 60, 3 %" in n for n in mg.notes)


def test_scale_bar_on_nan_image_is_a_sentence(tmp_path):
    p = tmp_path / "nan.tif"
    tifffile.imwrite(p, np.full((64, 64), np.nan, np.float32))
    with pytest.raises(InputError, match=re.escape(str(p)) + r" holds no finite pixel"):
        load(p, scale_bar="10um")


# --------------------------------------------------------------------------- odd files
@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs named pipes")
def test_fifo_and_device_refused(tmp_path):
    f = tmp_path / "pipe.tif"
    os.mkfifo(f)
    with pytest.raises(ImageReadError, match=re.escape(str(f)) + r" is a named pipe \(FIFO\)"):
        load(f, pixel_size="1um")
    d = tmp_path / "zero.png"
    d.symlink_to("/dev/zero")
    with pytest.raises(ImageReadError, match=re.escape(str(d)) + r" is a device"):
        load(d, pixel_size="1um")


def test_other_format_under_an_image_suffix(tmp_path):
    p = tmp_path / "really_a_gif.png"
    Image.fromarray(_ramp()).save(p, format="GIF")
    with pytest.raises(ImageReadError, match=r"could not be read as an image"):
        load(p, pixel_size="1um")
    q = tmp_path / "really_a_jpeg.png"
    Image.fromarray(_ramp()).save(q, format="JPEG")
    assert load(q, pixel_size="1um").shape == (40, 50)


def test_cli_names_the_file_and_the_option(tmp_path, monkeypatch, capsys):
    from sectio.cli import main

    monkeypatch.setenv("SECTIO_MAX_IMAGE_MEMORY", "1.5GiB")  # restored after the test
    p = tmp_path / "huge.tif"
    p.write_bytes(tiny_tiff_header(60000, 60000))
    rc = main(["grains", str(p), "--pixel-size", "1um", "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 1 and "above the 1.5 GiB image memory budget" in err
    assert "Traceback" not in err
    rc = main(["grains", str(p), "--pixel-size", "1um", "--max-image-memory", "64GiB",
               "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 1 and "could not be read as a TIFF" in err  # past the budget: the data
    rc = main(["grains", str(p), "--pixel-size", "1um", "--max-image-memory", "1e999GiB",
               "--out", str(tmp_path / "o")])
    assert rc == 2
    assert "--max-image-memory '1e999GiB' is not a memory size" in capsys.readouterr().err
