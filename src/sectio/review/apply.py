"""Hand edits applied to label maps: pure functions, no I/O.

A grain label map has a label > 0 on every pixel; a particle label map has 0 for the
matrix. In both, a region left out of the field by hand is written as label 0 and listed
in the ``left_out`` mask that travels with the map (for grains 0 already means "left
out"; for particles the mask tells matrix from left-out pixels).

Points and strokes are in image pixel coordinates ``[x, y]`` = ``[column, row]`` of the
measured image (after any info strip was cropped), so an edit file does not depend on how
the page was zoomed.

Edits (``op``):

``join``  ``points: [[x, y], [x, y]]``
    The two grains (or particles) under the points become one: the boundary between them
    is erased.
``cut`` / ``split``  ``line: [[x, y], ...]``
    A boundary is drawn along the stroke: every grain (particle) the stroke crosses from
    side to side is divided along it. Pixels of the stroke join the side they are closest to.
``exclude``  ``polygon: [[x, y], ...]``, optional ``reason``
    The region is left out of the field: no test line, count or area is taken there.
``twin`` / ``grain_boundary``  ``points: [[x, y], [x, y]]``
    The boundary between the two grains is a twin boundary (left out of the grain size,
    its length kept) or a grain boundary (a twin mark on it is withdrawn).
``delete``  ``point: [x, y]``
    The particle under the point is matrix.
``add``  ``polygon: [[x, y], ...]``
    The polygon is a new particle.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

GRAIN_OPS = ("join", "cut", "exclude", "twin", "grain_boundary")
PARTICLE_OPS = ("join", "split", "exclude", "delete", "add")


class EditError(InputError, ValueError):
    """An edit cannot be applied (a point outside the image, a stroke that cuts nothing)."""


@dataclass
class EditedLabels:
    """A label map after edits, with what each edit did."""

    labels: np.ndarray
    left_out: np.ndarray  # bool, pixels left out of the field
    twin_pairs: list[tuple[int, int]] = field(default_factory=list)
    twin_length_px: float = 0.0
    effects: list[str] = field(default_factory=list)  # one line per edit


# -- geometry ----------------------------------------------------------------------------
def _xy(p, shape, what: str) -> tuple[int, int]:
    """(row, col) of a point ``[x, y]``; refused outside the image."""
    try:
        x, y = float(p[0]), float(p[1])
    except (TypeError, ValueError, IndexError):
        raise EditError(f"{what}: a point must be [x, y] in pixels, got {p!r}.") from None
    r, c = int(np.floor(y)), int(np.floor(x))
    if not (0 <= r < shape[0] and 0 <= c < shape[1]):
        raise EditError(f"{what}: the point [{x:g}, {y:g}] is outside the "
                        f"{shape[1]} x {shape[0]} pixel image.")
    return r, c


def _points(pts, shape, what: str, *, at_least: int) -> list[tuple[int, int]]:
    if not isinstance(pts, list) or len(pts) < at_least:
        raise EditError(f"{what}: needs at least {at_least} points [x, y].")
    if len(pts) > 100_000:
        raise EditError(f"{what}: more than 100000 points; draw a simpler shape.")
    return [_xy(p, shape, what) for p in pts]


def stroke_mask(line, shape) -> np.ndarray:
    """Pixels of a polyline ``[[x, y], ...]``, 8-connected (it separates 4-connected sides)."""
    from skimage.draw import line as draw_line

    rc = _points(line, shape, "cut", at_least=2)
    m = np.zeros(shape, bool)
    for (r0, c0), (r1, c1) in zip(rc[:-1], rc[1:], strict=True):
        rr, cc = draw_line(r0, c0, r1, c1)
        m[rr, cc] = True
    return m


def polygon_mask(polygon, shape) -> np.ndarray:
    """Pixels inside a polygon ``[[x, y], ...]`` (pixel centres inside, plus its outline)."""
    from skimage.draw import polygon as draw_polygon
    from skimage.draw import polygon_perimeter

    rc = _points(polygon, shape, "polygon", at_least=3)
    r = np.array([p[0] for p in rc], float) + 0.5
    c = np.array([p[1] for p in rc], float) + 0.5
    m = np.zeros(shape, bool)
    rr, cc = draw_polygon(r, c, shape=shape)
    m[rr, cc] = True
    rr, cc = polygon_perimeter(r.astype(int), c.astype(int), shape=shape, clip=True)
    m[rr, cc] = True
    return m


# -- single edits -----------------------------------------------------------------------
def _label_at(labels, p, what: str) -> int:
    r, c = _xy(p, labels.shape, what)
    return int(labels[r, c])


def join_labels(labels: np.ndarray, a: int, b: int) -> np.ndarray:
    """Label ``b`` becomes ``a`` (in place); returns the map."""
    if a != b and a > 0 and b > 0:
        labels[labels == b] = a
    return labels


def _touching(labels: np.ndarray, a: int, b: int) -> int:
    """Number of 4-neighbour pixel pairs with labels a and b (the shared boundary length)."""
    n = 0
    for x, y in ((labels[:, 1:], labels[:, :-1]), (labels[1:], labels[:-1])):
        n += int(np.count_nonzero(((x == a) & (y == b)) | ((x == b) & (y == a))))
    return n


def cut_labels(labels: np.ndarray, line, *, min_piece_px: int = 10) -> int:
    """Divide every region the stroke crosses from side to side; in place.

    Returns the number of new regions. The region (label > 0) is split into its
    4-connected pieces without the stroke's pixels; the largest piece keeps the label,
    each other piece of at least ``min_piece_px`` pixels gets a new one, and the stroke's
    pixels take the label of the nearest piece of their own region.
    """
    from scipy import ndimage as ndi

    m = stroke_mask(line, labels.shape)
    touched = [int(v) for v in np.unique(labels[m]) if v > 0]
    next_label = int(labels.max()) + 1
    made = 0
    for g in touched:
        # The whole region, in its bounding box (it may reach beyond the stroke's box).
        rows, cols = np.nonzero(labels == g)
        br0, br1, bc0, bc1 = rows.min(), rows.max() + 1, cols.min(), cols.max() + 1
        sub = labels[br0:br1, bc0:bc1]
        reg = sub == g
        cut = m[br0:br1, bc0:bc1] & reg
        pieces, n = ndi.label(reg & ~cut)
        if n < 2:
            continue
        sizes = np.bincount(pieces.ravel())
        sizes[0] = 0
        big = [i for i in np.argsort(sizes)[::-1] if sizes[i] >= min_piece_px]
        if len(big) < 2:
            continue
        new_of_piece = np.zeros(n + 1, np.int64)
        new_of_piece[1:] = g
        for i in big[1:]:
            new_of_piece[i] = next_label
            next_label += 1
            made += 1
        # Stroke pixels and small crumbs take the label of the nearest big piece.
        keep = np.isin(pieces, big)
        idx = ndi.distance_transform_edt(~keep, return_distances=False, return_indices=True)
        nearest = pieces[idx[0], idx[1]]
        sub[reg] = new_of_piece[nearest[reg]]
    return made


def exclude_region(labels: np.ndarray, left_out: np.ndarray, polygon) -> int:
    """Leave the polygon out of the field (label 0); in place. Returns its pixel count."""
    m = polygon_mask(polygon, labels.shape)
    labels[m] = 0
    left_out |= m
    return int(np.count_nonzero(m))


def add_particle(labels: np.ndarray, left_out: np.ndarray, polygon) -> int:
    """The polygon (outside left-out regions) becomes a new particle; in place."""
    m = polygon_mask(polygon, labels.shape) & ~left_out
    new = int(labels.max()) + 1
    labels[m] = new
    return new


# -- a list of edits --------------------------------------------------------------------
def apply_edits(labels: np.ndarray, edits: list[dict], *, kind: str) -> EditedLabels:
    """Apply ``edits`` in order to a copy of ``labels`` (``kind`` "grains" or "particles").

    Twin marks are applied last, as a post-step: the two grains on either side of a twin
    boundary are counted as one grain for the grain size, and the length of the boundary
    is kept in ``twin_length_px``.
    """
    ops = GRAIN_OPS if kind == "grains" else PARTICLE_OPS
    lab = np.array(labels, dtype=np.int64, copy=True)
    left_out = np.zeros(lab.shape, bool)
    out = EditedLabels(lab, left_out)
    twins: dict[frozenset, tuple[int, int]] = {}
    for i, e in enumerate(edits):
        what = f"edit {i + 1} ({e.get('op') if isinstance(e, dict) else e!r})"
        if not isinstance(e, dict) or e.get("op") not in ops:
            raise EditError(f"{what}: not an edit of {kind}; the edits are {', '.join(ops)}.")
        op = e["op"]
        if op == "join":
            pts = _points(e.get("points"), lab.shape, what, at_least=2)
            ids = [int(lab[r, c]) for r, c in pts]
            ids = [v for v in ids if v > 0]
            for v in ids[1:]:
                join_labels(lab, ids[0], v)
            out.effects.append(f"join: {len(set(ids))} regions -> 1")
        elif op in ("cut", "split"):
            n = cut_labels(lab, e.get("line"))
            out.effects.append(f"{op}: {n} new region(s)")
        elif op == "exclude":
            n = exclude_region(lab, left_out, e.get("polygon"))
            out.effects.append(f"exclude: {n} pixels left out")
        elif op in ("twin", "grain_boundary"):
            a, b = (_label_at(lab, p, what) for p in (e.get("points") or [None, None])[:2])
            if op == "twin":
                twins[frozenset((a, b))] = (a, b)
            else:
                twins.pop(frozenset((a, b)), None)
            out.effects.append(f"{op}: grains {a} and {b}")
        elif op == "delete":
            v = _label_at(lab, e.get("point"), what)
            if v > 0:
                lab[lab == v] = 0
            out.effects.append("delete: 1 particle" if v > 0 else "delete: nothing there")
        elif op == "add":
            add_particle(lab, left_out, e.get("polygon"))
            out.effects.append("add: 1 particle")
    for a, b in twins.values():
        if a > 0 and b > 0 and a != b and np.any(lab == a) and np.any(lab == b):
            out.twin_length_px += _touching(lab, a, b)
            join_labels(lab, a, b)
            out.twin_pairs.append((a, b))
    return out
