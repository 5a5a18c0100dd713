"""Crossings of two sets of line segments in bulk, with numpy: candidate pairs from a grid of
buckets, orientation signs where a floating-point filter proves them, and each crossing point in
double-double arithmetic, so that a point equals the one GEOS's overlay computes for the same two
segments, bit for bit. Pairs whose configuration the filter cannot settle (touching, collinear,
nearly so, or closer than a guard distance without crossing) are marked for the caller to hand
to GEOS, as are pieces where one segment is crossed twice at nearly the same point.

References
----------
Dekker, T. J. (1971). A floating-point technique for extending the available precision.
*Numerische Mathematik* 18, 224-242. https://doi.org/10.1007/BF01397083

Hida, Y., Li, X. S. & Bailey, D. H. (2001). Algorithms for quad-double precision floating
point arithmetic. *Proceedings of the 15th IEEE Symposium on Computer Arithmetic*, 155-162.
https://doi.org/10.1109/ARITH.2001.930115

O'Rourke, J. (1998). *Computational Geometry in C*, 2nd ed., Cambridge University Press,
§7.2 (segment-segment intersection).

Liang, Y.-D. & Barsky, B. A. (1984). A new concept and method for line clipping. *ACM
Transactions on Graphics* 3(1), 1-22. https://doi.org/10.1145/357332.357333

Shewchuk, J. R. (1997). Adaptive precision floating-point arithmetic and fast robust geometric
predicates. *Discrete & Computational Geometry* 18, 305-363. https://doi.org/10.1007/PL00009321
"""
from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

#: Dekker's splitter for IEEE double precision, 2**27 + 1 (Dekker 1971).
_SPLIT = 134217729.0

#: An orientation sign counts as proven when the determinant exceeds this share of the sum of
#: its two products' magnitudes: a thousand times the bound beyond which the sign of the
#: floating-point determinant is that of the exact one (Shewchuk 1997 proves about 3.3e-16;
#: GEOS uses 1e-15), so a proven sign is the exact sign whatever GEOS's own filter does.
_SIGN_MARGIN = 1e-12

#: The guard distance is this share of the largest coordinate magnitude: 2**26 units in the last
#: place of the coordinates, against the one or two by which a computed crossing point can miss
#: the exact one. Features closer than it to each other (a vertex near the other line, two
#: crossings of one segment) are left to GEOS, so that the overlay's noding of a piece pair
#: without such features can only give the crossings computed here.
GUARD_SHARE = 2.0 ** -26

#: At most this many grid buckets (int64 counts of 32 MiB).
_MAX_CELLS = 1 << 22

#: ``b``'s segments are taken this many at a time, which bounds the working memory (a few
#: hundred bytes per segment of a range) whatever the size of the input.
_CHUNK_SEGMENTS = 1 << 18


# --------------------------------------------------------------------------------------------
# Double-double arithmetic (hi + lo pairs), vectorised
# --------------------------------------------------------------------------------------------
def _dd_add(ah, al, bh, bl):
    """Sum of two double-doubles, with the exact two-sum of both parts (Knuth's TwoSum,
    renormalised; the accurate addition of Hida, Li & Bailey 2001)."""
    s = ah + bh
    t = al + bl
    e = s - ah
    f = t - al
    s_err = (bh - e) + (ah - (s - e))
    t_err = (bl - f) + (al - (t - f))
    e = s_err + t
    h_ = s + e
    h_lo = e + (s - h_)
    e = t_err + h_lo
    zh = h_ + e
    return zh, e + (h_ - zh)


def _dd_sub(ah, al, bh, bl):
    return _dd_add(ah, al, -1.0 * bh, -1.0 * bl)


def _product_error(a, b, p):
    """The rounding error of the double product ``p = a * b``: ``a`` and ``b`` split in halves
    by ``_SPLIT`` and the partial products summed (Dekker 1971, the exact product)."""
    c = _SPLIT * a
    a_hi = c - (c - a)
    a_lo = a - a_hi
    c = _SPLIT * b
    b_hi = c - (c - b)
    b_lo = b - b_hi
    return (((a_hi * b_hi - p) + a_hi * b_lo) + a_lo * b_hi) + a_lo * b_lo


def _dd_mul(ah, al, bh, bl):
    """Product of two double-doubles: Dekker's exact product of the high parts plus the cross
    terms, renormalised (Dekker 1971)."""
    p = ah * bh
    c = _product_error(ah, bh, p) + (ah * bl + al * bh)
    zh = p + c
    return zh, c + (p - zh)


def _dd_div(ah, al, bh, bl):
    """Quotient of two double-doubles: a double quotient corrected by one Dekker product."""
    q = ah / bh
    prod = q * bh
    u = _product_error(q, bh, prod)
    c = ((((ah - prod) - u) + al) - q * bl) / bh
    u = q + c
    return u, (q - u) + c


def crossing_points(p1x, p1y, p2x, p2y, q1x, q1y, q2x, q2y):
    """Crossing point of the lines through ``p1 p2`` and ``q1 q2`` (arrays), in double-double.

    The lines in homogeneous coordinates are the cross products of their points, and the
    crossing is the cross product of the two lines (O'Rourke 1998, §7.2: segment intersection
    by the parametric equations, here in their homogeneous form), evaluated in double-double
    arithmetic and rounded to double at the end: the operations, in the order GEOS 3.13 uses
    (``CGAlgorithmsDD::intersection``), so the point is the overlay's to the last bit. Parallel
    lines give non-finite values.
    """
    z = np.zeros_like(p1x)
    px = _dd_sub(p1y, z, p2y, z)
    py = _dd_sub(p2x, z, p1x, z)
    pw = _dd_sub(*_dd_mul(p1x, z, p2y, z), *_dd_mul(p2x, z, p1y, z))
    qx = _dd_sub(q1y, z, q2y, z)
    qy = _dd_sub(q2x, z, q1x, z)
    qw = _dd_sub(*_dd_mul(q1x, z, q2y, z), *_dd_mul(q2x, z, q1y, z))
    x = _dd_sub(*_dd_mul(*py, *qw), *_dd_mul(*qy, *pw))
    y = _dd_sub(*_dd_mul(*qx, *pw), *_dd_mul(*px, *qw))
    w = _dd_sub(*_dd_mul(*px, *qy), *_dd_mul(*qx, *py))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        xh, xl = _dd_div(*x, *w)
        yh, yl = _dd_div(*y, *w)
        return xh + xl, yh + yl


# --------------------------------------------------------------------------------------------
# Segments of lines cut into pieces
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Segments:
    """The segments of single-part lines: segment ``v`` runs from vertex ``v`` to ``v + 1`` of
    all parts' vertices in a row, for every ``v`` that is not the last vertex of its part.

    Pieces are numbered as :func:`strikeline.picks.lines._cut_into_pieces` numbers them: part
    by part, each part in consecutive runs of ``max_segments`` segments.
    """

    x: np.ndarray  # vertex coordinates, contiguous
    y: np.ndarray
    first: np.ndarray  # first vertex of each part
    valid: np.ndarray  # bool per segment index 0 .. len(x) - 2
    piece_first: np.ndarray  # first piece of each part
    n_pieces: int
    max_segments: int

    @property
    def x0(self):
        return self.x[:-1]

    @property
    def y0(self):
        return self.y[:-1]

    @property
    def x1(self):
        return self.x[1:]

    @property
    def y1(self):
        return self.y[1:]

    def piece(self, seg: np.ndarray) -> np.ndarray:
        """The piece of each segment index in ``seg``."""
        part = np.searchsorted(self.first, seg, side="right") - 1
        return self.piece_first[part] + (seg - self.first[part]) // self.max_segments


def segment_table(xy: np.ndarray, first: np.ndarray, n: np.ndarray, max_segments: int) -> Segments:
    """Segments of parts whose vertices are ``xy[first[i]:first[i] + n[i]]`` (in a row)."""
    valid = np.ones(max(len(xy) - 1, 0), bool)
    last = first + n - 1
    valid[last[last < len(valid)]] = False
    n_pieces = np.maximum(1, -(-np.maximum(n - 1, 0) // max_segments))
    return Segments(np.ascontiguousarray(xy[:, 0]), np.ascontiguousarray(xy[:, 1]),
                    np.asarray(first, np.int64), valid,
                    (np.cumsum(n_pieces) - n_pieces).astype(np.int64), int(n_pieces.sum()),
                    int(max_segments))


# --------------------------------------------------------------------------------------------
# Candidate pairs: buckets of a regular grid
# --------------------------------------------------------------------------------------------
def _cell(v, origin, inv_h, n):
    """Bucket index along one axis (clipped to the grid), a monotone function of ``v``."""
    t = (v - origin) * inv_h
    np.floor(t, out=t)
    np.clip(t, 0, n - 1, out=t)
    return t.astype(np.int64)


def _clipped(idx, x0, y0, x1, y1, rect):
    """The segments ``idx`` clipped to the rectangle ``rect`` (Liang & Barsky 1984): those that
    meet it, with the ends of their part inside (an end inside stays exactly as it was)."""
    dx, dy = x1 - x0, y1 - y0
    t0, t1 = np.zeros(len(idx)), np.ones(len(idx))
    out = np.zeros(len(idx), bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        for p, q in ((-dx, x0 - rect[0]), (dx, rect[2] - x0),
                     (-dy, y0 - rect[1]), (dy, rect[3] - y0)):
            r = q / p
            t0 = np.where(p < 0, np.maximum(t0, r), t0)
            t1 = np.where(p > 0, np.minimum(t1, r), t1)
            out |= (p == 0) & (q < 0)
    k = np.flatnonzero(~out & (t0 <= t1))
    t0, t1, dx, dy = t0[k], t1[k], dx[k], dy[k]
    x0, y0, x1, y1 = x0[k], y0[k], x1[k], y1[k]
    return (idx[k], np.where(t0 > 0, x0 + t0 * dx, x0), np.where(t0 > 0, y0 + t0 * dy, y0),
            np.where(t1 < 1, x0 + t1 * dx, x1), np.where(t1 < 1, y0 + t1 * dy, y1))


def _entries(x0, y0, x1, y1, valid, pad: float, grid, occupied=None):
    """Bucket entries of the valid segments: one per bucket its padded box touches.

    A box spanning at most 2 x 2 buckets (nearly every segment) gives its corner buckets; a
    longer segment is cut into chunks no longer than a bucket, each giving every bucket of its
    own padded box. Each entry carries a code: bit 0 set where its bucket is the first column of
    its (chunk's) box, bit 1 where it is the first row; a pair of boxes is reported only from the
    bucket where both bits are set in one of the two codes (the lower-left bucket of the
    overlap of their bucket ranges), so once per pair of chunks. With ``occupied`` (a flag
    per bucket), entries in other buckets are dropped. Returns segment index, bucket, code,
    whether any segment was cut into chunks, and the padded boxes of all the segments.
    """
    gx, gy, inv_h, nx, ny = grid
    box = (np.minimum(x0, x1) - pad, np.minimum(y0, y1) - pad,
           np.maximum(x0, x1) + pad, np.maximum(y0, y1) + pad)
    ix0, iy0 = _cell(box[0], gx, inv_h, nx), _cell(box[1], gy, inv_h, ny)
    ix1, iy1 = _cell(box[2], gx, inv_h, nx), _cell(box[3], gy, inv_h, ny)
    wide, tall = ix1 != ix0, iy1 != iy0
    small = valid & (ix1 - ix0 <= 1) & (iy1 - iy0 <= 1)
    segs, cells, codes = [], [], []
    for cx, cy, extra, code in ((ix0, iy0, None, 3), (ix1, iy0, wide, 2),
                                (ix0, iy1, tall, 1), (ix1, iy1, wide & tall, 0)):
        cell = cy * nx + cx
        m = small if extra is None else small & extra
        if occupied is not None:
            m = m & occupied[cell]
        k = np.flatnonzero(m)
        segs.append(k)
        cells.append(cell[k])
        codes.append(np.full(len(k), code, np.int8))
    big = np.flatnonzero(valid & ~small)
    if len(big):
        h = 1.0 / inv_h
        # Only the part inside the grid (which holds every point within the guard distance of
        # a segment of ``a``) is cut into chunks: a long line far beyond it costs nothing.
        rect = (gx - pad, gy - pad, gx + nx * h + pad, gy + ny * h + pad)
        big, bx0, by0, bx1, by1 = _clipped(big, x0[big], y0[big], x1[big], y1[big], rect)
        ext = np.maximum(np.abs(bx1 - bx0), np.abs(by1 - by0))
        k = np.maximum(1, np.ceil(ext / h)).astype(np.int64)
        seg = np.repeat(np.arange(len(k)), k)
        j = np.arange(len(seg)) - np.repeat(np.cumsum(k) - k, k)
        kk = k[seg].astype(np.float64)
        dx, dy = (bx1 - bx0)[seg], (by1 - by0)[seg]
        last = j == k[seg] - 1
        ax = np.where(j == 0, bx0[seg], bx0[seg] + dx * (j / kk))
        ay = np.where(j == 0, by0[seg], by0[seg] + dy * (j / kk))
        ex = np.where(last, bx1[seg], bx0[seg] + dx * ((j + 1) / kk))
        ey = np.where(last, by1[seg], by0[seg] + dy * ((j + 1) / kk))
        cx0 = _cell(np.minimum(ax, ex) - pad, gx, inv_h, nx)
        cy0 = _cell(np.minimum(ay, ey) - pad, gy, inv_h, ny)
        cx1 = _cell(np.maximum(ax, ex) + pad, gx, inv_h, nx)
        cy1 = _cell(np.maximum(ay, ey) + pad, gy, inv_h, ny)
        wx = cx1 - cx0 + 1
        count = wx * (cy1 - cy0 + 1)
        e = np.repeat(np.arange(len(count)), count)
        r = np.arange(len(e)) - np.repeat(np.cumsum(count) - count, count)
        ex_, ey_ = cx0[e] + r % wx[e], cy0[e] + r // wx[e]
        cell = ey_ * nx + ex_
        code = ((ex_ == cx0[e]).astype(np.int8) | ((ey_ == cy0[e]).astype(np.int8) << 1))
        m = np.ones(len(cell), bool) if occupied is None else occupied[cell]
        segs.append(big[seg[e[m]]])
        cells.append(cell[m])
        codes.append(code[m])
    return (np.concatenate(segs), np.concatenate(cells), np.concatenate(codes), bool(len(big)),
            box)


class _Buckets:
    """A regular grid of square buckets over ``a``'s extent holding ``a``'s valid segments.

    The buckets are the size of the 90th percentile of ``a``'s segments (at least the median of
    ``b``'s), so that nearly every segment's padded box spans at most 2 x 2 of them.
    """

    def __init__(self, a: Segments, b: Segments, guard: float):
        self.guard = guard
        self.ia = ia = np.flatnonzero(a.valid)
        ax0, ay0, ax1, ay1 = a.x0[ia], a.y0[ia], a.x1[ia], a.y1[ia]
        gx = float(np.minimum(ax0, ax1).min()) - guard
        gy = float(np.minimum(ay0, ay1).min()) - guard
        gx1 = float(np.maximum(ax0, ax1).max()) + guard
        gy1 = float(np.maximum(ay0, ay1).max()) + guard
        ext_a = np.maximum(np.abs(ax1 - ax0), np.abs(ay1 - ay0))
        sample = np.flatnonzero(b.valid)[::max(1, len(b.valid) // 100_000)]  # enough for a median
        ext_b = np.maximum(np.abs(b.x[sample + 1] - b.x[sample]),
                           np.abs(b.y[sample + 1] - b.y[sample]))
        size = max(float(np.quantile(ext_a, 0.9)), float(np.median(ext_b)))
        size = max(size + 2.0 * guard, np.sqrt((gx1 - gx) * (gy1 - gy) / _MAX_CELLS), 4.0 * guard)
        nx = int((gx1 - gx) // size) + 1
        ny = int((gy1 - gy) // size) + 1
        self.grid = (gx, gy, 1.0 / size, nx, ny)
        self.seg, cell, self.code, self.cut, self.box = _entries(
            ax0, ay0, ax1, ay1, np.ones(len(ia), bool), guard, self.grid)
        # int32 bucket tables: fewer entries than 2**31 (the grid has at most 2**22 buckets, a
        # chunk at most 9 entries) and half the memory of int64 ones.
        self.counts = np.bincount(cell, minlength=nx * ny).astype(np.int32)
        self.starts = np.cumsum(self.counts, dtype=np.int64).astype(np.int32) - self.counts
        self.occupied = self.counts > 0  # a small array to look up every segment of b in
        self.order = np.argsort(cell).astype(np.int32)

    def pairs(self, b: Segments, lo: int, hi: int):
        """Pairs ``(i, j)`` of segments of ``a`` and of ``b``'s segments ``lo .. hi - 1`` whose
        boxes, padded by the guard distance, overlap: each once, without sorting (see
        :func:`_entries`). Every pair closer than the guard distance is among them."""
        eb_seg, b_cell, b_code, b_cut, b_box = _entries(
            b.x[lo:hi], b.y[lo:hi], b.x[lo + 1:hi + 1], b.y[lo + 1:hi + 1], b.valid[lo:hi],
            self.guard, self.grid, self.occupied)
        c = self.counts[b_cell]
        eb = np.repeat(np.arange(len(b_cell)), c)
        ea = self.order[np.repeat(self.starts[b_cell], c) + np.arange(len(eb))
                        - np.repeat(np.cumsum(c) - c, c)]
        once = (self.code[ea] | b_code[eb]) == 3
        i, j = self.seg[ea[once]], eb_seg[eb[once]]
        if self.cut or b_cut:  # chunks of one segment pair may meet in several buckets
            key = np.unique(i * np.int64(hi - lo) + j)
            i, j = key // (hi - lo), key % (hi - lo)
        a_box = self.box
        k = np.flatnonzero((a_box[0][i] <= b_box[2][j]) & (b_box[0][j] <= a_box[2][i]))
        i, j = i[k], j[k]
        k = np.flatnonzero((a_box[1][i] <= b_box[3][j]) & (b_box[1][j] <= a_box[3][i]))
        return self.ia[i[k]], j[k] + lo


# --------------------------------------------------------------------------------------------
# Classification of candidate pairs
# --------------------------------------------------------------------------------------------
def _side(pax, pay, pbx, pby, qx, qy, length, guard):
    """Which side of the line ``pa -> pb`` point ``q`` is on: +1 left, -1 right, 0 where that
    is not proven or ``q`` lies within ``guard`` of the line.

    The determinant is the floating-point orientation filter's (Shewchuk 1997; the form GEOS
    uses): ``(pa - q) x (pb - q)``, twice the signed area of the triangle; its magnitude is the
    segment's length times the point's distance from the line.
    """
    left = (pax - qx) * (pby - qy)
    right = (pay - qy) * (pbx - qx)
    det = left - right
    sure = np.abs(det) > np.maximum(_SIGN_MARGIN * (np.abs(left) + np.abs(right)), guard * length)
    return np.where(sure, np.sign(det), 0.0)


@dataclass(frozen=True)
class Crossings:
    """Proper crossings the overlay of each piece pair gives, and the piece pairs left to GEOS.

    ``a_piece``, ``b_piece``, ``x``, ``y``: one row per crossing, sorted by piece pair, then by
    the segment of ``a`` and of ``b``. ``flagged``: int64 keys ``a_piece * n_b_pieces +
    b_piece`` (sorted, unique) of the pairs whose overlay must be computed by GEOS; none of
    their crossings is among the rows.
    """

    a_piece: np.ndarray
    b_piece: np.ndarray
    x: np.ndarray
    y: np.ndarray
    flagged: np.ndarray


def _classify(a: Segments, b: Segments, i, j, guard: float) -> dict:
    """The candidate pairs ``(i, j)`` settled or not (see :func:`segment_crossings`)."""
    p1x, p1y, p2x, p2y = a.x[i], a.y[i], a.x[i + 1], a.y[i + 1]
    q1x, q1y, q2x, q2y = b.x[j], b.y[j], b.x[j + 1], b.y[j + 1]
    len_p = np.hypot(p2x - p1x, p2y - p1y)
    len_q = np.hypot(q2x - q1x, q2y - q1y)
    s_pq1 = _side(p1x, p1y, p2x, p2y, q1x, q1y, len_p, guard)
    s_pq2 = _side(p1x, p1y, p2x, p2y, q2x, q2y, len_p, guard)
    s_qp1 = _side(q1x, q1y, q2x, q2y, p1x, p1y, len_q, guard)
    s_qp2 = _side(q1x, q1y, q2x, q2y, p2x, p2y, len_q, guard)
    apart = ((s_pq1 == s_pq2) & (s_pq1 != 0)) | ((s_qp1 == s_qp2) & (s_qp1 != 0))
    proper = (s_pq1 * s_pq2 < 0) & (s_qp1 * s_qp2 < 0)
    odd = ~apart & ~proper
    out = {"odd_i": i[odd], "odd_j": j[odd]}
    k = np.flatnonzero(proper)
    p1x, p1y, p2x, p2y = p1x[k], p1y[k], p2x[k], p2y[k]
    q1x, q1y, q2x, q2y = q1x[k], q1y[k], q2x[k], q2y[k]
    x, y = crossing_points(p1x, p1y, p2x, p2y, q1x, q1y, q2x, q2y)
    with np.errstate(invalid="ignore"):
        inside = (np.isfinite(x) & np.isfinite(y)
                  & (x >= np.minimum(p1x, p2x)) & (x <= np.maximum(p1x, p2x))
                  & (y >= np.minimum(p1y, p2y)) & (y <= np.maximum(p1y, p2y))
                  & (x >= np.minimum(q1x, q2x)) & (x <= np.maximum(q1x, q2x))
                  & (y >= np.minimum(q1y, q2y)) & (y <= np.maximum(q1y, q2y)))
    out.update(i=i[k], j=j[k], x=x, y=y, inside=inside, len_p=len_p[k], len_q=len_q[k],
               along_p=(x - p1x) * (p2x - p1x) + (y - p1y) * (p2y - p1y),
               along_q=(x - q1x) * (q2x - q1x) + (y - q1y) * (q2y - q1y))
    return out


def segment_crossings(a: Segments, b: Segments, guard: float, *, workers: int = 1) -> Crossings:
    """Proper crossings of ``a``'s and ``b``'s segments, and the piece pairs left to GEOS.

    A candidate pair (boxes padded by ``guard`` overlap) is settled here when the four
    orientation signs are proven and every end point lies farther than ``guard`` from the other
    segment's line: both ends of one segment on one side of the other's line means no contact
    (and a gap wider than ``guard``); ends on both sides of each other's lines means a proper
    crossing (O'Rourke 1998, §7.2), whose point :func:`crossing_points` computes. Anything else
    - a touch, an end on the other segment, a collinear stretch, a near miss - marks its piece
    pair for GEOS, as does a computed point outside either segment's box and a segment crossed
    twice, at points very close together, by segments of one other piece.

    ``b``'s segments are handled in consecutive ranges of at most 2**18, ``workers`` at a time
    on a thread pool (numpy releases the GIL in its loops); the result does not depend on
    ``workers``.
    """
    n_b = np.int64(b.n_pieces)
    empty = np.empty(0, np.int64)
    if not a.valid.any() or not b.valid.any():
        return Crossings(empty, empty, np.empty(0), np.empty(0), empty)
    buckets = _Buckets(a, b, guard)
    n_seg = len(b.valid)
    n_chunks = max(1 if workers <= 1 else 2 * workers, -(-n_seg // _CHUNK_SEGMENTS))
    bounds = np.linspace(0, n_seg, n_chunks + 1).astype(np.int64)

    def work(c):
        i, j = buckets.pairs(b, int(bounds[c]), int(bounds[c + 1]))
        return _classify(a, b, i, j, guard)

    if workers <= 1:
        parts = [work(c) for c in range(n_chunks)]
    else:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            parts = list(pool.map(work, range(n_chunks)))
    r = {name: np.concatenate([p[name] for p in parts]) for name in parts[0]}
    i, j, x, y = r["i"], r["j"], r["x"], r["y"]
    pair = a.piece(i) * n_b + b.piece(j)
    flag_keys = [a.piece(r["odd_i"]) * n_b + b.piece(r["odd_j"]), pair[~r["inside"]]]
    # A segment crossed twice in one piece pair: the overlay splits it at both points, each
    # off the line by up to a unit in the last place. The part up to one point stays clear of
    # the other crossing segment when the points lie farther apart than 2**-16 of that
    # segment's length (its ends are beyond the guard distance, which bounds its angle).
    for seg, along, other in ((i, r["along_p"], r["len_q"]), (j, r["along_q"], r["len_p"])):
        o = np.lexsort((along, seg, pair))
        same = (pair[o][1:] == pair[o][:-1]) & (seg[o][1:] == seg[o][:-1])
        gap = np.hypot(np.diff(x[o]), np.diff(y[o]))
        close = same & ~(gap > 2.0 ** -16 * np.maximum(other[o][1:], other[o][:-1]))
        flag_keys.append(pair[o][1:][close])
    flagged = np.unique(np.concatenate(flag_keys))
    keep = ~np.isin(pair, flagged)
    order = np.lexsort((j[keep], i[keep], pair[keep]))
    pair = pair[keep][order]
    return Crossings(pair // n_b, pair % n_b, x[keep][order], y[keep][order], flagged)
