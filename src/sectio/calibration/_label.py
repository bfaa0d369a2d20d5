"""Reading the scale bar's length from the info strip's text (``--scale-bar auto``).

No OCR engine on the package registries reads such strips without a system install
(Tesseract needs its own binary and language data), so this is a small reader of digits
and length units of our own, made to refuse rather than guess:

1. the bar is found (:func:`sectio.scalebar.measure_scale_bar`) and taken out of the ink;
2. the remaining ink is cut into glyphs (connected pieces, pieces above one another
   joined; a unit's touching letters split at the columns of least ink when that reads
   clearly)
   and glyphs on one line with gaps under one glyph height into runs of text;
3. the run next to the bar (above or below it and centred on it, or beside it on its row)
   is the label; none, or more than one, is refused;
4. every glyph is compared (correlation of its 16 x 16 ink picture, and its width/height
   ratio) with pictures of ``0-9 . u µ n m`` rendered in the fonts matplotlib and Pillow
   ship, at several sizes; a glyph whose best match is weak, or close to a different
   character, is refused;
5. the text must read ``NUMBER UNIT`` with the unit nm, µm (um) or mm, the digits of one
   height, the unit's letters lower than the digits and the point on the digits'
   baseline; anything else is refused.

Validated on labels rendered with Pillow in other fonts and sizes than the reference
pictures (``tests/calibration/test_label.py``): no wrong reading is allowed, a refusal is.
"""

from __future__ import annotations

import functools
import re

import numpy as np
from scipy import ndimage as ndi

from ..errors import CalibrationError

CLASSES = "0123456789.unmµ"
CELL = 16
MIN_SCORE = 0.65
MIN_MARGIN = 0.08
INK = 0.3  # share of the full ink contrast that counts as ink (thin strokes stay joined)
_UNITS_UM = {"nm": 1e-3, "um": 1.0, "µm": 1.0, "mm": 1e3}
_LABEL = re.compile(r"^(\d+(?:\.\d+)?)(nm|um|µm|mm)$")


def _cell(frac: np.ndarray) -> np.ndarray:
    """The glyph's ink picture, padded to a square (aspect kept), as a 16 x 16 vector."""
    from PIL import Image

    h, w = frac.shape
    side = max(h, w)
    sq = np.zeros((side, side), np.float32)
    r0, c0 = (side - h) // 2, (side - w) // 2
    sq[r0: r0 + h, c0: c0 + w] = frac
    im = Image.fromarray(sq, mode="F").resize((CELL, CELL), Image.Resampling.BOX)
    v = np.asarray(im, np.float64).ravel()
    v = v - v.mean()
    n = np.linalg.norm(v)
    return v / n if n else v


@functools.lru_cache(maxsize=1)
def _templates():
    """(class, aspect, cell vector) of every reference character, font and size."""
    from PIL import Image, ImageDraw

    from ..synth.strips import font_paths, load_font

    out = []
    fonts = [*font_paths(), None]  # None: Pillow's own font (no µ)
    for font in fonts:
        for size in (9, 11, 13, 16, 20, 26, 34, 44):
            f = load_font(font, size)
            for ch in CLASSES:
                if font is None and ch == "µ":
                    continue
                canvas = Image.new("L", (size * 3, size * 3), 0)
                ImageDraw.Draw(canvas).text((size, size // 2), ch, fill=255, font=f)
                a = np.asarray(canvas, np.float64) / 255.0
                rows, cols = np.flatnonzero(a.max(1) > INK), np.flatnonzero(a.max(0) > INK)
                if rows.size == 0:
                    continue
                g = a[rows[0]: rows[-1] + 1, cols[0]: cols[-1] + 1]
                out.append((ch, g.shape[1] / g.shape[0], _cell(g)))
    classes = np.array([t[0] for t in out])
    aspects = np.array([t[1] for t in out])
    cells = np.vstack([t[2] for t in out])
    return classes, aspects, cells


def classify(frac: np.ndarray) -> tuple[str | None, float, float]:
    """Best class of one glyph's ink picture, its score and the margin to another class.

    The class is None when the score is below ``MIN_SCORE`` or the margin below
    ``MIN_MARGIN``.
    """
    classes, aspects, cells = _templates()
    h, w = frac.shape
    aspect = w / h
    score = cells @ _cell(frac) - 0.35 * np.abs(np.log(aspects / aspect))
    best: dict = {}
    for c, s in zip(classes, score, strict=True):
        if s > best.get(c, -9):
            best[c] = s
    ranked = sorted(best.items(), key=lambda kv: -kv[1])
    (c1, s1), (c2, s2) = ranked[0], ranked[1]
    if {c1, c2} == {"u", "µ"}:  # the same unit either way: compare with the next one
        s2 = ranked[2][1] if len(ranked) > 2 else -9
    ok = s1 >= MIN_SCORE and s1 - s2 >= MIN_MARGIN
    return (c1 if ok else None), float(s1), float(s1 - s2)


def _read_glyph(g: dict):
    """``[(glyph, char)]`` for one glyph, or for its parts when two or three of a unit's
    letters touch (split at the columns of least ink); None when neither reads clearly."""
    ch = classify(g["frac"])[0]
    if ch is not None:
        return [(g, ch)]
    f = g["frac"]
    h, w = f.shape
    if w < 1.2 * h:
        return None
    col = f.sum(axis=0)
    inner = np.arange(2, w - 2)
    cuts = sorted(inner, key=lambda c: col[c])[: max(1, w // 3)]
    for n_cuts in (1, 2):
        for first in cuts:
            chosen = [first]
            if n_cuts == 2:
                rest = [c for c in cuts if abs(c - first) >= 0.3 * h]
                if not rest:
                    continue
                chosen.append(rest[0])
            edges = [0, *sorted(chosen), w]
            parts = []
            for a, b in zip(edges[:-1], edges[1:], strict=True):
                sub = f[:, a:b]
                rows = np.flatnonzero(sub.max(axis=1) >= INK)
                if rows.size == 0 or b - a < 2:
                    break
                part = {"r0": g["r0"] + rows[0], "r1": g["r0"] + rows[-1] + 1,
                        "c0": g["c0"] + a, "c1": g["c0"] + b,
                        "frac": sub[rows[0]: rows[-1] + 1]}
                pc = classify(part["frac"])[0]
                if pc is None or pc not in "unmµ":  # only a unit's letters are split:
                    break  # touching digits are refused, never cut into other digits
                parts.append((part, pc))
            else:
                return parts
    return None


def _glyphs(frac: np.ndarray, ink: np.ndarray) -> list[dict]:
    lab, n = ndi.label(ink, structure=np.ones((3, 3)))
    boxes = [[sl[0].start, sl[0].stop, sl[1].start, sl[1].stop]
             for sl in ndi.find_objects(lab) if sl is not None]
    boxes.sort(key=lambda b: b[2])
    merged: list[list[int]] = []
    for b in boxes:  # pieces above one another (a broken glyph) belong together
        if merged:
            m = merged[-1]
            overlap = min(m[3], b[3]) - max(m[2], b[2])
            if overlap >= 0.5 * min(m[3] - m[2], b[3] - b[2]):
                merged[-1] = [min(m[0], b[0]), max(m[1], b[1]), min(m[2], b[2]),
                              max(m[3], b[3])]
                continue
        merged.append(list(b))
    return [{"r0": r0, "r1": r1, "c0": c0, "c1": c1, "frac": frac[r0:r1, c0:c1]}
            for r0, r1, c0, c1 in merged]


def _runs(glyphs: list[dict]) -> list[list[dict]]:
    """Glyphs on one text line with gaps under one glyph height, left to right."""
    runs: list[list[dict]] = []
    for g in sorted(glyphs, key=lambda g: g["c0"]):
        hg = g["r1"] - g["r0"]
        for run in runs:
            last = run[-1]
            top = min(x["r0"] for x in run)
            bot = max(x["r1"] for x in run)
            height = bot - top
            vert = min(bot, g["r1"]) - max(top, g["r0"])
            gap = g["c0"] - last["c1"]
            if vert >= 0.4 * min(hg, height) and -1 <= gap <= max(height, hg):
                run.append(g)
                break
        else:
            runs.append([g])
    return runs


def _box(run):
    return (min(g["r0"] for g in run), max(g["r1"] for g in run),
            min(g["c0"] for g in run), max(g["c1"] for g in run))


def _near_bar(runs, bar_r0, bar_r1, bar_c0, bar_c1):
    out = []
    for run in runs:
        r0, r1, c0, c1 = _box(run)
        h = r1 - r0
        centre = 0.5 * (c0 + c1)
        above_below = (bar_c0 <= centre <= bar_c1 and
                       (0 <= bar_r0 - r1 <= 2 * h or 0 <= r0 - bar_r1 <= 2 * h))
        same_row = r0 <= bar_r1 and r1 >= bar_r0
        beside = same_row and (0 <= c0 - bar_c1 <= 3 * h or 0 <= bar_c0 - c1 <= 3 * h)
        if above_below or beside:
            out.append(run)
    return out


def _check_heights(run, text) -> bool:
    digits = [g for g, ch in zip(run, text, strict=True) if ch.isdigit()]
    letters = [g for g, ch in zip(run, text, strict=True) if ch in "unm"]
    if not digits:
        return False
    dh = np.array([g["r1"] - g["r0"] for g in digits])
    if dh.max() > 1.2 * dh.min() + 1:
        return False
    base = float(np.median([g["r1"] for g in digits]))
    height = float(np.median(dh))
    for g, ch in zip(run, text, strict=True):
        gh = g["r1"] - g["r0"]
        if ch in "unm" and not (0.5 * height <= gh <= 0.92 * height + 1):
            return False
        if ch == "." and not (gh <= 0.4 * height and abs(g["r1"] - base) <= 0.15 * height + 1):
            return False
        if ch in "unm" and abs(g["r1"] - base) > 0.15 * height + 1:
            return False
        if ch == "µ" and not g["r1"] > base + 0.1 * height:
            return False
    return bool(letters) or "µ" in text


def read_label(frac: np.ndarray, ink: np.ndarray, bar_box, *, path: str) -> tuple[float, str]:
    """The bar's length in µm and the label as read, from the strip's ink; or refuse."""
    runs = _near_bar(_runs(_glyphs(frac, ink)), *bar_box)
    if not runs:
        raise CalibrationError(f"{path}: no text next to the scale bar to read its length "
                               "from; give --scale-bar with the length (e.g. 20um).")
    readings = []
    for run in runs:
        pieces: list = []
        text: str | None = ""
        for g in run:
            read = _read_glyph(g)
            if read is None:
                text = None
                break
            for part, ch in read:
                pieces.append(part)
                text += ch
        if text is not None:
            readings.append((pieces, text))
    labels = [(run, t) for run, t in readings if _LABEL.match(t.replace("µ", "µ"))]
    if len(runs) > 1 and len(labels) != 1:
        raise CalibrationError(f"{path}: several pieces of text lie next to the scale bar and "
                               "none reads clearly as its length; give --scale-bar with it.")
    if not labels:
        raise CalibrationError(f"{path}: the text next to the scale bar does not read clearly "
                               "as a length (digits and nm, µm or mm); give --scale-bar with "
                               "the length (e.g. 20um).")
    run, text = labels[0]
    if not _check_heights(run, text):
        raise CalibrationError(f"{path}: the scale bar's label reads {text!r} but its letters "
                               "do not sit as text does; give --scale-bar with the length.")
    m = _LABEL.match(text)
    assert m is not None  # the label was chosen by this pattern
    value = float(m.group(1))
    unit = m.group(2)
    shown = f"{m.group(1)} {'µm' if unit == 'um' else unit}"
    return value * _UNITS_UM[unit], shown


def read_bar_length(image, *, path: str = "<array>", strip=None) -> tuple[float, str]:
    """Find the bar and read its label: ``(length_um, label)``; refuses when unsure."""
    from ..scalebar import measure_scale_bar
    from ._strip import find_info_strips

    img = np.asarray(image, dtype=np.float64)
    if strip is None:
        found = find_info_strips(img)
        if not found:
            raise CalibrationError(f"{path}: no info strip with a scale bar found at the bottom "
                                   "or top of the image; give --pixel-size instead.")
        strip = found[0]
    bar = measure_scale_bar(img, bar_length_um=1.0, path=path, strip=strip)
    h = img.shape[0]
    row0 = h - strip.rows if strip.side == "bottom" else 0
    band = img[row0: row0 + strip.rows]
    diff = band - strip.level
    ink_level = diff.max() if bar.polarity == "light on dark" else diff.min()
    frac = np.clip(diff / ink_level, 0.0, 1.0)
    ink = frac >= INK
    # the bar (and its end ticks) out of the ink
    lab, _ = ndi.label(ink, structure=np.ones((3, 3)))
    r = bar.bar_row_px - row0
    c = int(bar.bar_start_col_px + bar.bar_length_px / 2)
    bar_id = lab[r, c]
    rows, cols = np.nonzero(lab == bar_id)
    bar_box = (int(rows.min()), int(rows.max()) + 1, int(cols.min()), int(cols.max()) + 1)
    ink = ink & (lab != bar_id)
    return read_label(frac, ink, bar_box, path=path)
