"""The k nearest readings of many targets, grouped by identical neighbourhood.

A moving-neighbourhood method solves one small system per distinct set of k nearest readings.
On a dense grid of targets, neighbouring nodes usually share that set (the plane splits into the
cells of the order-k Voronoi diagram), so grouping targets by their set lets one factorisation
serve all of them, exactly: each target still uses its own k nearest readings.

How the sets are found: targets are binned into squares; for a square with centre ``c`` whose
targets lie within ``h`` of ``c``, every k-nearest reading of every target lies within
``d_k(c) + 2 h`` of ``c`` (triangle inequality, ``d_k(c)`` being the distance from ``c`` to its own
k-th nearest reading). Those candidates are few (about twice k), so the distances from the
square's targets to them, the k smallest of each, and the set (a bit mask over the candidates)
are dense-array work. Identical masks within a square are one set; a set met in two squares is
kept twice (the same exact result, factored twice).

The work runs block by block (a block is a run of squares) on a few threads, and the caller's
function consumes each block as soon as it is found, so no array over all targets x k is held.
All positions are in the method's (anisotropy-transformed) coordinates, metres.
"""

from __future__ import annotations

from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import TypeVar

import numpy as np
from scipy.spatial import cKDTree

from mapper.field.threads import usable_cores

_BLOCK_ELEMENTS = 2**21  # padded target x candidate distances per block (16 MB)
_SPARSE_BLOCK = 2**15  # targets per block when each target is its own square
_FAR = np.iinfo(np.int64).max
_HASH = np.random.default_rng(20261203).integers(1, 2**63, size=64, dtype=np.uint64) | np.uint64(1)
T = TypeVar("T")


@dataclass(frozen=True)
class NeighbourSets:
    """A block of targets grouped by their set of k nearest data.

    The block also keeps the structure it was found with, for methods that share work within a
    square: every target belongs to one square; a square's candidates are sorted by distance
    from its centre, and the first ``core`` candidates of every square are members of every set
    of that square (a common leading block).

    Attributes
    ----------
    target : ndarray, shape (r,), int64
        Indices of the block's targets into the caller's target array, square by square.
    row_square, row_slot : ndarray, shape (r,), int64
        Square of each target (0 .. squares - 1) and its place among the square's targets.
    set_rows : ndarray, shape (r,), int64
        The rows grouped by set: set ``j`` serves rows ``set_rows[start[j]:start[j + 1]]``.
    start : ndarray, shape (S + 1,), int64
        Offsets of each set's rows in ``set_rows``.
    members : ndarray, shape (S, k), int64
        Data indices of each set, in the order of its candidate positions.
    square : ndarray, shape (S,), int64
        Square of each set.
    colpos : ndarray, shape (S, k), int64
        Candidate positions of each set's members in its square, ascending (so the first
        ``core`` are 0 .. core - 1).
    cand : ndarray, shape (squares, c), int64
        Data index of each square's candidates, nearest the centre first; -1 pads.
    centre : ndarray, shape (squares, 2)
        Centre of each square, metres.
    cand_dist : ndarray, shape (r, c)
        Distance from each target to its square's candidates, metres (inf at pads); a consumer
        may overwrite it.
    on_datum : ndarray, shape (r,), int64
        Candidate position of the datum a target coincides with (distance 0), or -1.
    core : ndarray, shape (squares,), int64
        Leading candidates of each square shared by every set of that square, ascending (squares
        are numbered by it).
    """

    target: np.ndarray
    row_square: np.ndarray
    row_slot: np.ndarray
    set_rows: np.ndarray
    start: np.ndarray
    members: np.ndarray
    square: np.ndarray
    colpos: np.ndarray
    cand: np.ndarray
    centre: np.ndarray
    cand_dist: np.ndarray
    on_datum: np.ndarray
    core: np.ndarray

    @property
    def n_sets(self) -> int:
        """Number of distinct sets in the block (factorisations needed)."""
        return int(self.members.shape[0])

    @property
    def count(self) -> np.ndarray:
        """Targets of each set, shape (S,)."""
        return np.diff(self.start)

    def set_of_rows(self) -> np.ndarray:
        """Set of each row, shape (r,)."""
        out = np.empty(self.target.shape[0], np.int64)
        out[self.set_rows] = np.repeat(np.arange(self.n_sets), self.count)
        return out

    def dist(self) -> np.ndarray:
        """Distance from each row's target to the members of its set, shape (r, k), metres."""
        return np.take_along_axis(self.cand_dist, self.colpos[self.set_of_rows()], axis=1)


def worker_count() -> int:
    """Threads for the batched numerics: the usable cores, at most 4."""
    return max(1, min(4, usable_cores()))


def map_nearest_sets(
    data: np.ndarray,
    targets: np.ndarray,
    k: int,
    consume: Callable[[NeighbourSets], T],
    tree: cKDTree | None = None,
    side: float | None = None,
) -> list[T]:
    """Group every target by its k nearest data, and hand each block of sets to ``consume``.

    Parameters
    ----------
    data : ndarray, shape (n, 2)
        Data positions, metres (n >= k).
    targets : ndarray, shape (m, 2)
        Target positions, metres.
    k : int
        Neighbours per target.
    consume : callable
        Called once per block with its :class:`NeighbourSets`, from worker threads (blocks hold
        disjoint targets, so writing results into shared arrays at ``target`` is safe).
    tree : cKDTree, optional
        Tree of ``data`` (built when not given).
    side : float, optional
        Side of the binning squares, metres (default: a fifth of the typical k-th neighbour
        distance); it changes only the speed, never the sets.

    Returns
    -------
    list
        What ``consume`` returned, block by block. Of data tied at the k-th distance, those of
        lower index are taken, on both searches (squares and one tree query per target).
    """
    data = np.ascontiguousarray(data, dtype=float)
    targets = np.ascontiguousarray(targets, dtype=float)
    if targets.shape[0] == 0:
        return []
    tree = cKDTree(data) if tree is None else tree
    side = max(_typical_kth_distance(data, k) / 5.0, 1e-6) if side is None else float(side)
    binned = _bin(targets, side)
    if not _worth_squares(binned[2]):
        # Targets sparser than the squares (a coarse grid): each is its own square, and its k
        # nearest found by the tree are its candidates, all of them members.
        blocks = [(s, min(targets.shape[0], s + _SPARSE_BLOCK)) for s in range(0, targets.shape[0], _SPARSE_BLOCK)]

        def job(bounds: tuple[int, int]) -> T:
            return consume(_single_sets(tree, targets, k, *bounds))
    else:
        squares = _Squares.of(data, targets, k, tree, side, binned)

        def job(bounds: tuple[int, int]) -> T:
            return consume(squares.sets(*bounds))

        blocks = squares.blocks()
    if len(blocks) == 1:
        return [job(blocks[0])]
    with ThreadPoolExecutor(max_workers=worker_count()) as pool:
        return list(pool.map(job, blocks))


def nearest_sets(data: np.ndarray, targets: np.ndarray, k: int, tree: cKDTree | None = None,
                 side: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Every target's set of k nearest data, as set members and the set of each target.

    Returns
    -------
    members : ndarray, shape (S, k), int64
        Data indices of each distinct set.
    set_of : ndarray, shape (m,), int64
        Row of ``members`` used by each target.
    """
    m = np.asarray(targets).shape[0]
    parts = map_nearest_sets(data, targets, k, lambda b: (b.target, b.set_of_rows(), b.members), tree, side)
    set_of = np.empty(m, np.int64)
    offset = 0
    for target, rows_set, _ in parts:
        set_of[target] = rows_set + offset
        offset += _.shape[0]
    members = np.concatenate([p[2] for p in parts]) if parts else np.empty((0, k), np.int64)
    return members, set_of


def nearest_others(tree: cKDTree, ids: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The k nearest data of data ``ids`` themselves, each datum left out of its own list.

    The leave-one-out of every moving-neighbourhood method: position ``i`` predicted from its k
    nearest *other* positions (the data are merged repeats, so no other datum sits at distance 0
    unless two coincide; if the datum itself is not among the k + 1 found, because of ties, the
    farthest of them is dropped instead).

    Parameters
    ----------
    tree : cKDTree
        Tree of the data positions, metres.
    ids : ndarray, shape (m,), int
        Data left out in turn.
    k : int
        Neighbours each.

    Returns
    -------
    dist : ndarray, shape (m, k)
        Distances, metres, nearest first.
    idx : ndarray, shape (m, k), int64
        Data indices.
    """
    ids = np.asarray(ids, dtype=np.int64)
    d, idx = tree.query(tree.data[ids], k=k + 1)
    d, idx = d.reshape(ids.shape[0], k + 1), idx.reshape(ids.shape[0], k + 1)
    keep = idx != ids[:, None]
    keep[keep.all(axis=1), -1] = False
    return d[keep].reshape(ids.shape[0], k), idx[keep].reshape(ids.shape[0], k)


def _bin(targets: np.ndarray, side: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Squares of ``side`` (metres) over the targets: origin (2,), each target's (column, row) key
    (m, 2) and one integer per square (m,)."""
    origin = targets.min(axis=0)
    key = np.floor((targets - origin) / side).astype(np.int64)
    return origin, key, key[:, 0] * (int(key[:, 1].max()) + 1) + key[:, 1]


def _worth_squares(flat: np.ndarray) -> bool:
    """Whether the squares (one integer each per target) hold at least 4 targets on average."""
    return flat.shape[0] >= 4 * np.unique(flat).shape[0]


def _single_sets(tree: cKDTree, targets: np.ndarray, k: int, s: int, e: int) -> NeighbourSets:
    """Targets ``s`` to ``e - 1`` each in a square of its own, its k nearest its candidates."""
    m = e - s
    d, idx = _tied(tree, targets[s:e], k)
    one = np.arange(m)
    return NeighbourSets(
        target=one + s, row_square=one, row_slot=np.zeros(m, np.int64), set_rows=one, start=np.arange(m + 1),
        members=idx, square=one, colpos=np.broadcast_to(np.arange(k), (m, k)), cand=idx, centre=targets[s:e],
        cand_dist=d, on_datum=np.where(d[:, 0] == 0.0, 0, -1), core=np.full(m, k),
    )


def _tied(tree: cKDTree, pts: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The k nearest data of ``pts`` from the tree, readings tied at the k-th distance decided by
    the lower data index (so the sets do not depend on the search's order)."""
    m, n = pts.shape[0], tree.n
    kk = min(k + 1, n)
    d, idx = tree.query(pts, k=kk)
    d, idx = d.reshape(m, kk), idx.reshape(m, kk)
    if kk > k:
        for i in np.flatnonzero(d[:, k - 1] == d[:, k]):
            near = np.asarray(tree.query_ball_point(pts[i], d[i, k - 1] * (1.0 + 1e-12)), dtype=np.int64)
            off = tree.data[near] - pts[i]
            dist = np.sqrt(off[:, 0] * off[:, 0] + off[:, 1] * off[:, 1])
            pick = np.lexsort((near, dist))[:k]
            d[i, :k], idx[i, :k] = dist[pick], near[pick]
    return d[:, :k], idx[:, :k]


def _typical_kth_distance(data: np.ndarray, k: int) -> float:
    """Distance to the k-th nearest datum for data spread evenly over their bounding box, metres."""
    lo, hi = data.min(axis=0), data.max(axis=0)
    area = float(np.prod(np.maximum(hi - lo, 1e-9)))
    return float(np.sqrt(k * area / (np.pi * data.shape[0])))


@dataclass(frozen=True)
class _Squares:
    """Targets binned into squares (sorted by square) and each square's candidate data."""

    data: np.ndarray
    order: np.ndarray  # target index of each sorted row
    pts: np.ndarray  # sorted target positions
    starts: np.ndarray  # first sorted row of each square
    counts: np.ndarray  # targets per square
    ncand: np.ndarray  # candidates per square
    cand_flat: np.ndarray  # candidates of all squares, concatenated
    cand_start: np.ndarray  # offsets into cand_flat
    centre: np.ndarray  # centre of each square
    k: int

    @classmethod
    def of(cls, data, targets, k, tree, side: float, binned) -> _Squares:
        origin, key, flat = binned
        order = np.argsort(flat, kind="stable")
        flat_sorted = flat[order]
        starts = np.flatnonzero(np.r_[True, flat_sorted[1:] != flat_sorted[:-1]])
        counts = np.diff(np.r_[starts, targets.shape[0]])
        pts = targets[order]
        centre = origin + (key[order[starts]] + 0.5) * side
        sq_of = np.repeat(np.arange(starts.shape[0]), counts)
        off = pts - centre[sq_of]
        half = np.zeros(starts.shape[0])
        np.maximum.at(half, sq_of, np.hypot(off[:, 0], off[:, 1]))
        dk = tree.query(centre, k=k, workers=-1)[0][:, -1]
        # Radius d_k(c) + 2h, widened by a hair so rounding cannot drop a candidate on the edge.
        cands = tree.query_ball_point(centre, (dk + 2.0 * half) * (1.0 + 1e-9) + 1e-12, workers=-1,
                                      return_sorted=False)
        ncand = np.fromiter((len(c) for c in cands), dtype=np.int64, count=starts.shape[0])
        # Squares ordered by candidate count, so the blocks cut from them carry little padding.
        perm = np.argsort(ncand, kind="stable")
        ncand, counts, centre = ncand[perm], counts[perm], centre[perm]
        new_starts = np.r_[0, np.cumsum(counts)[:-1]]
        rows = np.repeat(starts[perm] - new_starts, counts) + np.arange(targets.shape[0])
        order, pts, starts = order[rows], pts[rows], new_starts
        cands = [cands[i] for i in perm]
        cand_flat = np.fromiter((i for c in cands for i in c), dtype=np.int64, count=int(ncand.sum()))
        return cls(data, order, pts, starts, counts, ncand, cand_flat, np.r_[0, np.cumsum(ncand)], centre, k)

    def blocks(self) -> list[tuple[int, int]]:
        """Runs of squares whose target x candidate distances stay under the size limit."""
        out, s, n = [], 0, self.starts.shape[0]
        while s < n:
            e, cmax, rows = s + 1, int(self.ncand[s]), int(self.counts[s])
            while e < n:
                c2, r2 = max(cmax, int(self.ncand[e])), rows + int(self.counts[e])
                if c2 * r2 > _BLOCK_ELEMENTS:
                    break
                cmax, rows, e = c2, r2, e + 1
            out.append((s, e))
            s = e
        return out

    def sets(self, s: int, e: int) -> NeighbourSets:
        """The sets of squares ``s`` to ``e - 1``."""
        k, nb = self.k, e - s
        ncand, tcount = self.ncand[s:e], self.counts[s:e]
        cmax = int(ncand.max())
        # Padded candidates of each square (index -1, at infinity), nearest the centre first.
        cvalid = np.arange(cmax)[None, :] < ncand[:, None]
        cidx = np.full((nb, cmax), -1, np.int64)
        cidx[cvalid] = self.cand_flat[self.cand_start[s]:self.cand_start[e]]
        centre = self.centre[s:e]
        cpos = np.full((nb, cmax, 2), np.inf)
        cpos[cvalid] = self.data[cidx[cvalid]]
        with np.errstate(invalid="ignore"):
            near_centre = np.argsort(np.hypot(cpos[..., 0] - centre[:, None, 0], cpos[..., 1] - centre[:, None, 1]),
                                     axis=1, kind="stable")
        cidx = np.take_along_axis(cidx, near_centre, axis=1)
        cpos = np.take_along_axis(cpos, near_centre[..., None], axis=1)
        r0, r1 = int(self.starts[s]), int(self.starts[s] + tcount.sum())
        sq_local = np.repeat(np.arange(nb), tcount)
        slot = np.arange(r1 - r0) - np.repeat(self.starts[s:e] - r0, tcount)
        tpos = self.pts[r0:r1]
        # Squared distances of each target to its square's candidates, (rows, cmax).
        cx, cy = cpos[sq_local, :, 0], cpos[sq_local, :, 1]
        cx -= tpos[:, 0, None]
        cy -= tpos[:, 1, None]
        cx *= cx
        cy *= cy
        d2 = cx
        d2 += cy
        rows = d2.shape[0]
        part = np.argpartition(d2, sorted({0, k - 1, min(k, cmax - 1)}), axis=1)
        near = part[:, :k]
        mask = np.zeros((rows, cmax), bool)
        np.put_along_axis(mask, near, True, axis=1)
        nearest = near[:, 0]
        if k < cmax:  # readings tied at the k-th distance: the lower data index wins, as in _tied
            kth = np.take_along_axis(d2, part[:, k - 1:k], axis=1)
            tied = np.flatnonzero(np.take_along_axis(d2, part[:, k:k + 1], axis=1)[:, 0] == kth[:, 0])
            if tied.size:
                rank = np.where(d2[tied] < kth[tied], -1, np.where(d2[tied] == kth[tied], cidx[sq_local[tied]], _FAR))
                fixed = np.zeros((tied.shape[0], cmax), bool)
                np.put_along_axis(fixed, np.argsort(rank, axis=1, kind="stable")[:, :k], True, axis=1)
                mask[tied] = fixed
        on_datum = np.where(d2[np.arange(rows), nearest] == 0.0, nearest, -1)
        # The leading candidates every target of a square selects (at least those nearer the
        # centre than d_k(c) - 2h, by the triangle inequality; found here, not assumed).
        lead = np.where(mask.all(axis=1), cmax, np.argmin(mask, axis=1))
        core = np.minimum.reduceat(lead, self.starts[s:e] - r0)
        first, inverse = _group_rows(np.column_stack([sq_local.astype(np.uint64), _mask_words(mask)]))
        set_rows = np.argsort(inverse, kind="stable")
        count = np.bincount(inverse, minlength=first.shape[0])
        colpos = np.flatnonzero(mask[first]).reshape(first.shape[0], k) % cmax
        square = sq_local[first]
        members = cidx[square[:, None], colpos]
        # Squares renumbered by core size, so squares of one core size are consecutive.
        by_core = np.argsort(core, kind="stable")
        renumber = np.empty(nb, np.int64)
        renumber[by_core] = np.arange(nb)
        return NeighbourSets(
            target=self.order[r0:r1], row_square=renumber[sq_local], row_slot=slot, set_rows=set_rows,
            start=np.r_[0, np.cumsum(count)], members=members, square=renumber[square], colpos=colpos,
            cand=cidx[by_core], centre=centre[by_core], cand_dist=np.sqrt(d2, out=d2), on_datum=on_datum,
            core=core[by_core],
        )


def _mask_words(mask: np.ndarray) -> np.ndarray:
    """Rows of a boolean mask packed into 64-bit words, shape (rows, ceil(columns / 64))."""
    rows = mask.shape[0]
    packed = np.packbits(mask, axis=1)
    width = -(-packed.shape[1] // 8) * 8
    if width != packed.shape[1]:
        packed = np.concatenate([packed, np.zeros((rows, width - packed.shape[1]), np.uint8)], axis=1)
    return np.ascontiguousarray(packed).view(np.uint64)


def _group_rows(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact grouping of identical rows of a uint64 array.

    Rows are hashed to one integer and grouped by it; every row is then compared in full with its
    group's first row, and a collision (never seen) falls back to an exact row-wise unique.

    Returns
    -------
    first : ndarray, shape (groups,)
        Row index of one member of each group.
    inverse : ndarray, shape (rows,)
        Group of each row.
    """
    with np.errstate(over="ignore"):
        h = (keys * _HASH[: keys.shape[1]]).sum(axis=1, dtype=np.uint64)
    _, first, inverse = np.unique(h, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    if not np.array_equal(keys, keys[first[inverse]]):
        _, first, inverse = np.unique(keys, axis=0, return_index=True, return_inverse=True)
        inverse = inverse.reshape(-1)
    return first, inverse
