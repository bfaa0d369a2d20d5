"""The calibration step of loading: find the strip, choose the pixel size, say what was done."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError
from ..units import parse_length_um
from . import resolve_pixel_size
from ._metadata import FileSize
from ._strip import InfoStrip, find_info_strips


@dataclass(frozen=True)
class ImageCalibration:
    """Pixel size, its source and details, and the rows to leave out at the top and bottom."""

    pixel_size_um: float
    source: str
    crop_top_px: int
    crop_bottom_px: int
    details: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()


def _typed_um(pixel_size) -> float:
    return parse_length_um(pixel_size, what="--pixel-size",
                           default_unit="um" if isinstance(pixel_size, (int, float)) else None)


def calibrate_image(
    grey: np.ndarray,
    *,
    path: str,
    file_sources: Sequence[FileSize] = (),
    pixel_size=None,
    objective: str | None = None,
    calibration_file=None,
    scale_bar=None,
    crop_bottom: int = 0,
    keep_strip: bool = False,
) -> ImageCalibration:
    """Everything :func:`sectio.micrograph.load` needs to know about scale and strip.

    The info strip is looked for on every image (bottom and top) unless ``keep_strip`` or
    an explicit ``crop_bottom`` (rows) is given, and left out whatever the pixel size's
    source.
    """
    notes: list[str] = []
    crop_bottom = int(crop_bottom or 0)
    strips: list[InfoStrip] = []
    if crop_bottom:
        notes.append(f"{crop_bottom} rows cut from the bottom (--crop-bottom)")
    elif not keep_strip:
        strips = find_info_strips(grey)
    typed_um = _typed_um(pixel_size) if pixel_size is not None else None
    objective_record = bar = None
    if typed_um is None and objective is not None:
        from ._objectives import lookup_objective

        objective_record = lookup_objective(objective, calibration_file)
    if typed_um is None and objective_record is None and scale_bar is not None:
        bar = _measure_bar(grey, path, scale_bar, strips, keep_strip)
        if not strips and not keep_strip and not crop_bottom:
            strips = [InfoStrip(bar["strip_side"], bar["strip_height_px"], float("nan"))]
    resolved = resolve_pixel_size(path=path, typed_um=typed_um,
                                  typed_text=None if pixel_size is None else str(pixel_size),
                                  objective=objective_record, bar=bar,
                                  file_sources=list(file_sources))
    notes.extend(resolved.notes)
    details = dict(resolved.details)
    top = sum(s.rows for s in strips if s.side == "top")
    bottom = crop_bottom or sum(s.rows for s in strips if s.side == "bottom")
    if strips:
        details["info_strips"] = [s.to_dict() for s in strips]
        for s in strips:
            notes.append(f"info strip found at the {s.side}: {s.rows} rows left out "
                         "(--keep-strip to measure them, --crop-bottom to set the rows)")
    if strips and top + bottom >= grey.shape[0] - 16:
        raise OptionError(
            f"{path}: the info strips ({top + bottom} rows) leave too little image; "
            "give --keep-strip or --crop-bottom with the strip's height."
        )
    return ImageCalibration(resolved.pixel_size_um, resolved.source, top, bottom, details,
                            tuple(notes))


def _measure_bar(grey, path, scale_bar, strips, keep_strip) -> dict:
    from ..scalebar import measure_scale_bar

    strip = strips[0] if strips else None
    if isinstance(scale_bar, str) and scale_bar.strip().lower() == "auto":
        from ._label import read_bar_length

        bar_um, label = read_bar_length(grey, path=path, strip=strip)
        found = measure_scale_bar(grey, bar_length_um=bar_um, path=path, strip=strip)
        return {**found.to_dict(), "bar_label": label}
    bar_um = parse_length_um(scale_bar, what="--scale-bar",
                             default_unit="um" if isinstance(scale_bar, (int, float)) else None)
    return measure_scale_bar(grey, bar_length_um=bar_um, path=path, strip=strip).to_dict()
