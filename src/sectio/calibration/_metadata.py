"""Pixel sizes that a TIFF file states about itself, as tifffile parses them.

Each reader takes an open :class:`tifffile.TiffFile` and returns ``FileSize`` records (or
nothing); the caller decides which one to use. Readers never raise on odd metadata: a block
that is present but holds no usable size gives a note instead.

Read, in this order of trust (the instrument's own record first):

* SEM/FIB vendor blocks: ``fei_metadata`` (``[Scan]``, ``[EScan]`` or ``[IScan]``
  ``PixelWidth`` / ``PixelHeight``, metres) and ``sem_metadata`` (``ap_image_pixel_size``,
  value and unit);
* OME-XML ``Pixels`` ``PhysicalSizeX`` / ``PhysicalSizeY`` with ``PhysicalSizeXUnit``
  (default µm, OME schema 2016-06);
* MetaSeries ``spatial-calibration-x`` / ``-y`` with ``spatial-calibration-units``;
* ImageJ: resolution tags in pixels per ``unit`` (ImageJ writes ResolutionUnit NONE);
* the baseline TIFF resolution tags with ResolutionUnit inch or centimetre (TIFF 6.0).
"""

from __future__ import annotations

from dataclasses import dataclass

#: Length units as metadata writes them, in micrometres.
_UNIT_UM = {
    "m": 1e6, "dm": 1e5, "cm": 1e4, "mm": 1e3, "um": 1.0, "µm": 1.0, "μm": 1.0,
    "\\u00b5m": 1.0, "micron": 1.0, "microns": 1.0, "micrometer": 1.0, "micrometre": 1.0,
    "nm": 1e-3, "nanometer": 1e-3, "pm": 1e-6, "å": 1e-4, "angstrom": 1e-4,
    "in": 25400.0, "inch": 25400.0, "ft": 304800.0,
}

# TIFF 6.0: ResolutionUnit 2 = inch, 3 = centimetre.
_RESUNIT_UM = {2: 25400.0, 3: 10000.0}
# Dots per inch that writers put by default; not a calibration (common practice).
_SCREEN_DPI = (72, 96, 150, 300, 600)


def unit_um(name) -> float | None:
    """Micrometres per unit ``name`` (``"nm"``, ``"µm"``, ``"micron"``...); None if unknown."""
    key = str(name).strip().lower().replace("\u00c2", "")  # stray byte of a mis-decoded µ
    return _UNIT_UM.get(key)


@dataclass(frozen=True)
class FileSize:
    """A pixel size stated by the file: width and height of one pixel in µm."""

    source: str
    width_um: float
    height_um: float

    @property
    def square(self) -> bool:
        return abs(self.width_um - self.height_um) <= 1e-3 * self.width_um

    def to_dict(self) -> dict:
        return {"source": self.source, "pixel_size_um": self.width_um,
                "pixel_height_um": self.height_um}


def _positive(v) -> float | None:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if f > 0 and f == f and f != float("inf") else None


def _fei(tif, notes) -> list[FileSize]:
    meta = tif.fei_metadata
    if not meta:
        return []
    for section in ("Scan", "EScan", "IScan"):
        block = meta.get(section) or {}
        w, h = _positive(block.get("PixelWidth")), _positive(block.get("PixelHeight"))
        if w:
            # PixelWidth / PixelHeight are in metres in these blocks
            return [FileSize(f"SEM metadata (FEI/Thermo [{section}] PixelWidth)",
                             w * 1e6, (h or w) * 1e6)]
    notes.append("FEI/Thermo metadata present but without a PixelWidth")
    return []


def _zeiss(tif, notes) -> list[FileSize]:
    meta = tif.sem_metadata
    if not meta:
        return []
    item = meta.get("ap_image_pixel_size") or meta.get("ap_pixel_size")
    if isinstance(item, tuple) and len(item) >= 3:
        v, u = _positive(item[1]), unit_um(item[2])
        if v and u:
            return [FileSize("SEM metadata (Zeiss ap_image_pixel_size)", v * u, v * u)]
    notes.append("Zeiss SEM metadata present but without a readable Image Pixel Size")
    return []


def _ome(tif, notes) -> list[FileSize]:
    xml = tif.ome_metadata
    if not xml:
        return []
    from xml.etree import ElementTree

    try:
        root = ElementTree.fromstring(xml)
    except ElementTree.ParseError:
        notes.append("OME-XML present but not well-formed")
        return []
    pixels = next((e for e in root.iter() if e.tag.rsplit("}", 1)[-1] == "Pixels"), None)
    if pixels is None or "PhysicalSizeX" not in pixels.attrib:
        return []
    a = pixels.attrib
    w = _positive(a.get("PhysicalSizeX"))
    h = _positive(a.get("PhysicalSizeY", a.get("PhysicalSizeX")))
    ux = unit_um(a.get("PhysicalSizeXUnit", "µm"))  # OME schema default: µm
    uy = unit_um(a.get("PhysicalSizeYUnit", a.get("PhysicalSizeXUnit", "µm")))
    if not (w and h and ux and uy):
        notes.append(f"OME-XML PhysicalSizeX {a.get('PhysicalSizeX')!r} "
                     f"{a.get('PhysicalSizeXUnit', 'µm')!r} is not a physical length")
        return []
    return [FileSize("OME-XML PhysicalSizeX/Y", w * ux, h * uy)]


def _metaseries(tif, notes) -> list[FileSize]:
    try:
        meta = tif.metaseries_metadata
    except Exception:  # tifffile raises for malformed descriptions
        meta = None
    if not meta:
        return []
    plane = meta.get("PlaneInfo", meta)
    w = _positive(plane.get("spatial-calibration-x"))
    h = _positive(plane.get("spatial-calibration-y")) or w
    u = unit_um(plane.get("spatial-calibration-units", ""))
    if w and h and u and plane.get("spatial-calibration-state", True):
        return [FileSize("MetaSeries spatial calibration", w * u, h * u)]
    return []


def _ratio(tag) -> float | None:
    if tag is None:
        return None
    v = tag.value
    if isinstance(v, tuple):
        return v[0] / v[1] if len(v) == 2 and v[1] else None
    return _positive(v)


def _resolution(tif, page, notes) -> list[FileSize]:
    tags = page.tags
    fx = _ratio(tags.get("XResolution"))
    if not fx:
        return []
    fy = _ratio(tags.get("YResolution")) or fx
    unit = tags.get("ResolutionUnit")
    unit_value = int(unit.value) if unit is not None else 2  # TIFF 6.0 default: inch
    ij = tif.imagej_metadata or {}
    if ij.get("unit") and unit_value == 1:
        u = unit_um(ij["unit"])
        if u is None:
            notes.append(f"ImageJ unit {ij['unit']!r} is not a length; not a calibration")
            return []
        return [FileSize(f"ImageJ resolution ({ij['unit']})", u / fx, u / fy)]
    u = _RESUNIT_UM.get(unit_value)
    if u is None:
        return []
    if unit_value == 2 and fx == fy and round(fx) in _SCREEN_DPI and abs(fx - round(fx)) < 1e-6:
        notes.append("TIFF resolution tags hold a screen/print dpi, not a calibration")
        return []
    return [FileSize("TIFF resolution tags", u / fx, u / fy)]


def file_sizes(tif, page=None) -> tuple[list[FileSize], list[str]]:
    """Every pixel size the open TIFF states, most trusted first, and notes on the rest."""
    page = page if page is not None else tif.pages[0]
    notes: list[str] = []
    found: list[FileSize] = []
    for reader in (_fei, _zeiss, _ome, _metaseries):
        try:
            found += reader(tif, notes)
        except Exception as exc:  # a malformed vendor block must not stop the reading
            notes.append(f"{reader.__name__.strip('_')} metadata could not be parsed "
                         f"({type(exc).__name__}); ignored")
    found += _resolution(tif, page, notes)
    return found, notes


