"""Pixel sizes from the metadata a TIFF carries, checked against tifffile's own parsing.

Reference: tifffile (``TiffFile.fei_metadata``, ``sem_metadata``, ``ome_metadata`` +
``tifffile.xml2dict``, ``metaseries_metadata``, ``imagej_metadata`` and the resolution
tags) parses the same files; each test writes the metadata with tifffile, reads the value
tifffile finds, converts it by the unit's definition (SI prefixes; 1 in = 25.4 mm exactly,
from memory) and compares with what sectio uses.
"""

from __future__ import annotations

import numpy as np
import pytest
import tifffile

from sectio.calibration import file_sizes
from sectio.errors import CalibrationError, CalibrationWarning
from sectio.micrograph import load

UNIT_UM = {"m": 1e6, "mm": 1e3, "µm": 1.0, "um": 1.0, "nm": 1e-3, "pm": 1e-6, "Å": 1e-4}


def _image(h=64, w=80):
    yy, xx = np.mgrid[0:h, 0:w]
    return (20 + 200 * ((xx // 8 + yy // 8) % 2)).astype(np.uint8)


def _sizes(path):
    with tifffile.TiffFile(path) as tif:
        return file_sizes(tif)


FEI_TEXT = """[User]
Date=12/01/2026
[Beam]
HV=15000
[Scan]
PixelWidth={w}
PixelHeight={h}
HorFieldsize=1.44e-005
[EScan]
PixelWidth={w}
"""


@pytest.mark.parametrize("code", [34680, 34682])  # FEI_SFEG and FEI_HELIOS tags
def test_fei_thermo_metadata(tmp_path, code):
    p = tmp_path / "fei.tif"
    text = FEI_TEXT.format(w="4.5e-009", h="4.5e-009")
    tifffile.imwrite(p, _image(), extratags=[(code, "s", 0, text, True)])
    with tifffile.TiffFile(p) as tif:
        ref_um = tif.fei_metadata["Scan"]["PixelWidth"] * 1e6  # tifffile: metres
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(ref_um, rel=1e-12)
    assert mg.pixel_size_um == pytest.approx(0.0045, rel=1e-12)
    assert mg.pixel_size_source == "SEM metadata (FEI/Thermo [Scan] PixelWidth)"


def test_fei_ion_beam_block_only(tmp_path):
    # a FIB image: only the ion-scan block carries the pixel size
    p = tmp_path / "fib.tif"
    text = "[Beam]\nHV=30000\n[IScan]\nPixelWidth=1.2e-08\nPixelHeight=1.2e-08\n"
    tifffile.imwrite(p, _image(), extratags=[(34682, "s", 0, text, True)])
    with tifffile.TiffFile(p) as tif:
        ref_um = tif.fei_metadata["IScan"]["PixelWidth"] * 1e6
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(ref_um) and "[IScan]" in mg.pixel_size_source


ZEISS_TEXT = ("0\n0\nAP_WD\nWD = 8.5 mm\nAP_IMAGE_PIXEL_SIZE\nImage Pixel Size = {v}\n"
              "DP_DETECTOR_TYPE\nSignal A = InLens\n")


@pytest.mark.parametrize("value, encoding", [("2.791 nm", "ascii"), ("1.234 µm", "cp1252"),
                                             ("0.5 um", "ascii"), ("250 pm", "ascii")])
def test_zeiss_sem_metadata(tmp_path, value, encoding):
    p = tmp_path / "zeiss.tif"
    text = ZEISS_TEXT.format(v=value).encode(encoding)
    tifffile.imwrite(p, _image(), extratags=[(34118, "s", 0, text, True)])
    with tifffile.TiffFile(p) as tif:
        _, number, unit = tif.sem_metadata["ap_image_pixel_size"]
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(number * UNIT_UM[unit], rel=1e-12)
    assert mg.pixel_size_source == "SEM metadata (Zeiss ap_image_pixel_size)"


@pytest.mark.parametrize("size, unit", [(0.25, "µm"), (125.0, "nm"), (0.0005, "mm"),
                                        (3.5, "Å"), (None, None)])
def test_ome_physical_size(tmp_path, size, unit):
    p = tmp_path / "ome.tif"
    meta = {"axes": "YX"}
    if size is not None:
        meta.update(PhysicalSizeX=size, PhysicalSizeY=size)
    if unit is not None:
        meta.update(PhysicalSizeXUnit=unit, PhysicalSizeYUnit=unit)
    else:
        meta.update(PhysicalSizeX=0.8, PhysicalSizeY=0.8)  # unit left out: OME default µm
    tifffile.imwrite(p, _image(), ome=True, metadata=meta)
    with tifffile.TiffFile(p) as tif:
        px = tifffile.xml2dict(tif.ome_metadata)["OME"]["Image"]["Pixels"]
    ref_um = px["PhysicalSizeX"] * UNIT_UM[px.get("PhysicalSizeXUnit", "µm")]
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(ref_um, rel=1e-12)
    assert mg.pixel_size_source == "OME-XML PhysicalSizeX/Y"


def test_ome_pixel_unit_is_not_a_length(tmp_path):
    p = tmp_path / "ome_px.tif"
    tifffile.imwrite(p, _image(), ome=True, metadata={
        "axes": "YX", "PhysicalSizeX": 1.0, "PhysicalSizeXUnit": "pixel",
        "PhysicalSizeY": 1.0, "PhysicalSizeYUnit": "pixel"})
    sizes, notes = _sizes(p)
    assert sizes == [] and any("not a physical length" in n for n in notes)
    with pytest.raises(CalibrationError, match="carries no pixel size"):
        load(p)


def test_ome_non_square_refused_without_pixel_size(tmp_path):
    p = tmp_path / "ome_aniso.tif"
    tifffile.imwrite(p, _image(), ome=True, metadata={
        "axes": "YX", "PhysicalSizeX": 0.5, "PhysicalSizeY": 0.25})
    with pytest.raises(CalibrationError, match=r"OME-XML PhysicalSizeX/Y give non-square pixels "
                                               r"\(0\.5 x 0\.25 µm\)"):
        load(p)
    assert load(p, pixel_size="0.5um").pixel_size_um == 0.5


def test_metaseries(tmp_path):
    p = tmp_path / "mds.tif"
    desc = ('<MetaData><prop id="Description" type="string" value=""/>'
            '<PlaneInfo><prop id="spatial-calibration-state" type="bool" value="on"/>'
            '<prop id="spatial-calibration-x" type="float" value="0.6450"/>'
            '<prop id="spatial-calibration-y" type="float" value="0.6450"/>'
            '<prop id="spatial-calibration-units" type="string" value="um"/>'
            '</PlaneInfo></MetaData>')
    tifffile.imwrite(p, _image(), description=desc, software="MetaSeries", metadata=None)
    with tifffile.TiffFile(p) as tif:
        ref = tif.metaseries_metadata["PlaneInfo"]["spatial-calibration-x"]
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(ref) and mg.pixel_size_um == pytest.approx(0.645)
    assert mg.pixel_size_source == "MetaSeries spatial calibration"


@pytest.mark.parametrize("unit, um_per_unit", [("um", 1.0), ("micron", 1.0), ("nm", 1e-3),
                                               ("mm", 1e3), ("\\u00B5m", 1.0)])
def test_imagej_resolution_and_unit(tmp_path, unit, um_per_unit):
    p = tmp_path / "ij.tif"
    per_unit = 1 / 0.3125  # 0.3125 units per pixel
    tifffile.imwrite(p, _image(), imagej=True, resolution=(per_unit, per_unit),
                     metadata={"unit": unit})
    with tifffile.TiffFile(p) as tif:
        assert tif.imagej_metadata["unit"] == unit
        num, den = tif.pages[0].tags["XResolution"].value
        assert tif.pages[0].tags["ResolutionUnit"].value == 1  # ImageJ: NONE
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(den / num * um_per_unit, rel=1e-9)
    assert mg.pixel_size_source == f"ImageJ resolution ({unit})"


def test_imagej_pixel_unit_refused(tmp_path):
    p = tmp_path / "ij_px.tif"
    tifffile.imwrite(p, _image(), imagej=True, resolution=(1, 1), metadata={"unit": "pixel"})
    sizes, notes = _sizes(p)
    assert sizes == [] and any("not a length" in n for n in notes)


@pytest.mark.parametrize("dpi", [72, 96, 300])
def test_screen_dpi_refused(tmp_path, dpi):
    p = tmp_path / "dpi.tif"
    tifffile.imwrite(p, _image(), resolution=(dpi, dpi), resolutionunit="INCH")
    sizes, notes = _sizes(p)
    assert sizes == [] and any("screen/print dpi" in n for n in notes)


def test_sources_agree_within_two_percent_no_warning(tmp_path):
    # FEI says 45 nm, the resolution tags 45.5 nm (1.1 % apart): used FEI, other recorded
    p = tmp_path / "agree.tif"
    text = FEI_TEXT.format(w="4.5e-08", h="4.5e-08")
    tifffile.imwrite(p, _image(), extratags=[(34682, "s", 0, text, True)],
                     resolution=(1e4 / 0.0455, 1e4 / 0.0455), resolutionunit="CENTIMETER")
    mg = load(p)
    assert mg.pixel_size_um == pytest.approx(0.045)
    other = [s for s in mg.calibration["sources"] if not s["used"]]
    assert other[0]["source"] == "TIFF resolution tags"
    assert other[0]["differs_by_pct"] == pytest.approx(100 * (0.0455 / 0.045 - 1), abs=1e-3)


def test_sources_disagree_warned_and_listed(tmp_path):
    # FEI 45 nm, OME 50 nm, resolution tags 45 nm: FEI used, OME 11 % away warned about
    p = tmp_path / "disagree.tif"
    text = FEI_TEXT.format(w="4.5e-08", h="4.5e-08")
    tifffile.imwrite(p, _image(), ome=True, extratags=[(34682, "s", 0, text, True)],
                     metadata={"axes": "YX", "PhysicalSizeX": 0.05, "PhysicalSizeY": 0.05},
                     resolution=(1e4 / 0.045, 1e4 / 0.045), resolutionunit="CENTIMETER")
    with pytest.warns(CalibrationWarning, match=r"OME-XML PhysicalSizeX/Y say 0\.05 µm.*11\.1 %"
                                                r".*SEM metadata \(FEI"):
        mg = load(p)
    assert mg.pixel_size_source.startswith("SEM metadata (FEI")
    d = mg.to_dict()["calibration"]
    assert [s["source"] for s in d["sources"]] == [
        "SEM metadata (FEI/Thermo [Scan] PixelWidth)", "OME-XML PhysicalSizeX/Y",
        "TIFF resolution tags"]
    assert [s["used"] for s in d["sources"]] == [True, False, False]
    assert any("OME-XML" in n and "11.1 %" in n for n in mg.notes)


def test_malformed_vendor_block_is_a_note_not_a_crash(tmp_path):
    p = tmp_path / "junk.tif"
    tifffile.imwrite(p, _image(), extratags=[(34682, "s", 0, "[Scan]\nPixelWidth=abc\n", True)],
                     resolution=(20000, 20000), resolutionunit="CENTIMETER")
    mg = load(p)
    assert mg.pixel_size_source == "TIFF resolution tags" and mg.pixel_size_um == 0.5
    assert any("without a PixelWidth" in n for n in mg.notes)
