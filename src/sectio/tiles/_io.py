"""Band-of-rows access to a large TIFF and to scratch arrays on disk.

Both are read with plain file reads (``readinto``), not memory maps, so the pages read are
not counted in the process's resident size: the memory of a tiled measurement is what its
bands need, whatever the size of the image.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

from ..errors import ImageReadError


@dataclass(frozen=True)
class TiffRows:
    """Rows of page 1 of a TIFF, decoded only where asked (any strip or tile layout)."""

    path: str

    def info(self) -> tuple[tuple[int, ...], np.dtype]:
        import tifffile

        with tifffile.TiffFile(self.path) as tif:
            page = tif.pages[0]
            return tuple(page.shape), np.dtype(page.dtype)

    def read(self, r0: int, r1: int) -> np.ndarray:
        """Rows r0..r1 (all columns; samples last for colour images)."""
        import tifffile

        try:
            with tifffile.TiffFile(self.path) as tif:
                page = tif.pages[0]
                return _read_rows(tif, page, r0, r1)
        except ImageReadError:
            raise
        except Exception as exc:  # tifffile raises many types for damaged files
            raise ImageReadError(
                f"{self.path} could not be read as a TIFF ({type(exc).__name__}); "
                "check that the file is complete and not corrupt, or re-export it."
            ) from None


def _read_rows(tif, page, r0: int, r1: int) -> np.ndarray:
    shape = tuple(page.shape)
    h, w = shape[0], shape[1]
    samples = shape[2] if len(shape) == 3 else 1
    dtype = np.dtype(page.dtype).newbyteorder(tif.byteorder)
    fh = tif.filehandle
    if page.is_contiguous and page.bitspersample % 8 == 0 and page.predictor in (1, None):
        row_bytes = w * samples * dtype.itemsize
        out = np.empty((r1 - r0) * w * samples, dtype)
        fh.seek(page.dataoffsets[0] + r0 * row_bytes)
        if fh.readinto(out.view(np.uint8)) != out.nbytes:
            raise ImageReadError(f"{fh.path} ends before its image data does (rows {r0} to "
                                 f"{r1}); the file is truncated: copy or export it again.")
        return out.reshape((r1 - r0, w) + ((samples,) if samples > 1 else ())).astype(
            dtype.newbyteorder("="), copy=False)
    if page.planarconfig != 1 and samples > 1:
        # separate colour planes: rare for micrographs; decode the whole page
        return page.asarray()[r0:r1]
    ch, cw = page.chunks[0], page.chunks[1]
    ny, nx = page.chunked[0], page.chunked[1]
    out = np.zeros((r1 - r0, w, samples), np.dtype(page.dtype))
    for iy in range(r0 // ch, min(ny, (r1 - 1) // ch + 1)):
        for ix in range(nx):
            index = iy * nx + ix
            fh.seek(page.dataoffsets[index])
            data = fh.read(page.databytecounts[index])
            if len(data) != page.databytecounts[index]:
                raise ImageReadError(f"{fh.path} ends before its image data does (segment "
                                     f"{index}); the file is truncated: copy or export it "
                                     "again.")
            seg, _, _ = page.decode(data, index, jpegtables=page.jpegtables)
            seg = np.asarray(seg).reshape(-1, seg.shape[-3], seg.shape[-2], seg.shape[-1])[0]
            y0, x0 = iy * ch, ix * cw
            a, b = max(r0, y0), min(r1, y0 + seg.shape[0], h)
            c1 = min(w, x0 + seg.shape[1])
            out[a - r0 : b - r0, x0:c1] = seg[a - y0 : b - y0, : c1 - x0]
    return out[..., 0] if samples == 1 else out


@dataclass(frozen=True)
class DiskArray:
    """A 2-D array in a raw file, read and written by bands of rows."""

    path: str
    shape: tuple[int, int]
    dtype: str

    @classmethod
    def create(cls, path: str, shape, dtype) -> DiskArray:
        arr = cls(str(path), (int(shape[0]), int(shape[1])), np.dtype(dtype).str)
        with open(path, "wb") as f:
            f.truncate(arr._row_bytes * arr.shape[0])
        return arr

    @property
    def _row_bytes(self) -> int:
        return self.shape[1] * np.dtype(self.dtype).itemsize

    def read(self, r0: int, r1: int) -> np.ndarray:
        r0, r1 = max(0, r0), min(self.shape[0], r1)
        out = np.empty((r1 - r0, self.shape[1]), np.dtype(self.dtype))
        with open(self.path, "rb") as f:
            f.seek(r0 * self._row_bytes)
            f.readinto(out.view(np.uint8))  # type: ignore[arg-type]  # an ndarray is a buffer
        return out

    def write(self, r0: int, rows: np.ndarray) -> None:
        rows = np.ascontiguousarray(rows, dtype=np.dtype(self.dtype))
        with open(self.path, "r+b") as f:
            f.seek(r0 * self._row_bytes)
            f.write(rows.view(np.uint8).data)

    def remove(self) -> None:
        try:
            os.remove(self.path)
        except OSError:
            pass
