"""Bootstrap resamples of a window, assembled from stored granule statistics (no re-read).

A window is a run of granules (fine blocks of consecutive rows, see
:class:`relspan.data.blocks.GranuleTable`), each stored as its count, mean
and co-moment. A bootstrap resample is a multiset of granules; its moments are
the merge of the chosen granules' moments, so no row is read again. For a stack
of ``B`` resamples the merges are one matrix product: with ``w_bi`` the number
of times resample ``b`` draws granule ``i`` (count ``c_i``, mean ``m_i``,
co-moment ``C_i``) and ``d_i = m_i - m`` the granule's offset from the window
mean ``m``,

    N_b = sum_i w_bi c_i,   dbar_b = sum_i w_bi c_i d_i / N_b,
    C_b = sum_i w_bi (C_i + c_i d_i d_i^T) - N_b dbar_b dbar_b^T,

the k-way form of the Chan, Golub & LeVeque (1979) merge about the window
mean (the pairwise update ``C = C_a + C_b + delta delta^T n_a n_b / n`` is its
two-block case). Because the offsets are taken from the window mean, the
subtracted term is of the size of the sampling fluctuation of the mean and
costs no more than rounding.

Schemes (rows are granules; see the granule note for ``g > 1``):

- ``"iid"``: granules drawn independently with replacement (Efron 1979), for
  rows with no time order;
- ``"moving"``: moving blocks of ``b`` consecutive granules, starts uniform
  over the ``k - b + 1`` possible ones, concatenated and cut to ``k``
  granules (Kuensch 1989);
- ``"stationary"``: blocks of geometric length with mean ``b``, starts
  uniform, wrapping around the window's end, cut to ``k`` granules (Politis &
  Romano 1994). The default for time-ordered rows.

Block length: the automatic rule of Politis & White (2004) with the
correction of Patton, Politis & White (2009), applied to each variable's
series of granule means (standardised); the window's block length is the
largest of the per-variable values (so the longest dependence seen in any
variable is kept inside blocks), rounded to a whole number of granules for
moving blocks.

Reproducibility: every window gets its own random stream derived from
``(seed, dataset, plan, window index)`` by :func:`window_seed`, so resamples
are identical however windows are scheduled (serially, in a pool, on Dask,
or read back from the cache).

References
----------
.. [1] B. Efron, "Bootstrap methods: another look at the jackknife", Annals of
       Statistics 7(1), 1-26, 1979.
.. [2] H. R. Kuensch, "The jackknife and the bootstrap for general stationary
       observations", Annals of Statistics 17(3), 1217-1241, 1989.
.. [3] D. N. Politis and J. P. Romano, "The stationary bootstrap", Journal of
       the American Statistical Association 89(428), 1303-1313, 1994.
.. [4] D. N. Politis and H. White, "Automatic block-length selection for the
       dependent bootstrap", Econometric Reviews 23(1), 53-70, 2004.
.. [5] A. Patton, D. N. Politis and H. White, "Correction to 'Automatic
       block-length selection for the dependent bootstrap'", Econometric
       Reviews 28(4), 372-375, 2009.
.. [6] D. N. Politis, "Adaptive bandwidth choice", Journal of Nonparametric
       Statistics 15(4-5), 517-533, 2003 (the flat-top lag window and the
       rule for its bandwidth).
.. [7] T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and a
       pairwise algorithm for computing sample variances", Stanford
       STAN-CS-79-773, 1979.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass

import numpy as np

from relspan.analysis._common import jsonable
from relspan.errors import OptionsError

__all__ = ["SCHEMES", "DEFAULT_RESAMPLES", "DEFAULT_LEVEL", "BlockLength", "GranuleStats",
           "CovarianceResamples", "window_seed", "window_rng", "politis_white_block_length",
           "draw_granules", "draw_blocks", "merge_weighted", "resample_covariances", "stack_covariances",
           "correlation_stack", "scale_stack", "statistic_gradient", "influence_values", "influence_sd",
           "resample_influence_sd", "studentized_interval", "drawn_blocks", "blocks_per_resample", "iter_draw_blocks",
           "iter_drawn_blocks", "draw_chunk", "can_redraw"]

#: resampling schemes
SCHEMES = ("iid", "moving", "stationary")
#: resamples when the spec does not say (enough for 90% percentile intervals; common practice
#: is 499-999 for intervals at 90-95%)
DEFAULT_RESAMPLES = 499
#: level of intervals when the spec does not say
DEFAULT_LEVEL = 0.90
#: granules x resamples held at once in the multiplicity matrix (bounds memory to ~32 MB); the merges
#: of :func:`stack_covariances` take this many resamples at a time, whatever the draws' chunks, so
#: the matrix products (and so every covariance's last bits) stay those of one fixed partition
_CHUNK_CELLS = 4_000_000
#: granule indices drawn at once by :func:`iter_draw_blocks` (2 MB of indices and as much of blocks,
#: and about five times that in passing while a chunk is made and merged): a window's resamples are
#: never all held as indices (499 resamples of 30,013 granules were 120 MB of indices, 236 MB with
#: what was made of them). Smaller chunks give the same draws and covariances, bit for bit; a window
#: of fewer than 500 granules still takes all 499 resamples in one chunk
_DRAW_CELLS = 250_000


def window_seed(seed: int, dataset: str, plan: str, window: int) -> np.random.SeedSequence:
    """The random stream of one window: a :class:`numpy.random.SeedSequence` of the spec seed and names.

    The dataset and plan ids enter through SHA-256 (stable across Python
    runs, unlike ``hash``), so a window's draws depend only on
    ``(seed, dataset, plan, window)``, never on the order windows are run in.
    """
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool) or seed < 0:
        raise OptionsError(f"the resampling seed must be a whole number >= 0; got {seed!r}.",
                           key="seed", fix="Set checks.resampling.seed to a whole number, e.g. 20240501.")
    words = []
    for text in (dataset, plan):
        h = hashlib.sha256(str(text).encode("utf-8")).digest()
        words.extend(int.from_bytes(h[i:i + 4], "little") for i in range(0, 16, 4))
    return np.random.SeedSequence(entropy=int(seed), spawn_key=(*words, int(window)))


def window_rng(seed: int, dataset: str, plan: str, window: int) -> np.random.Generator:
    """A :class:`numpy.random.Generator` (PCG64) on :func:`window_seed`."""
    return np.random.Generator(np.random.PCG64(window_seed(seed, dataset, plan, window)))


@dataclass(frozen=True, slots=True)
class BlockLength:
    """An automatic block length (Politis & White 2004; Patton, Politis & White 2009).

    Attributes
    ----------
    value : float
        The block length used, in granules (>= 1): the largest per-series value.
    per_series : tuple of float
        The rule's value for each series (variable), in granules.
    kind : str
        ``"stationary"`` (mean block length of the stationary bootstrap) or
        ``"moving"`` (moving / circular blocks).
    rule : str
        One sentence stating how it was computed.
    """

    value: float
    per_series: tuple[float, ...]
    kind: str
    rule: str

    def to_dict(self) -> dict:
        return jsonable({"value": self.value, "per_series": list(self.per_series), "kind": self.kind,
                         "rule": self.rule})


def _flat_top(t: np.ndarray) -> np.ndarray:
    a = np.abs(t)
    return np.where(a <= 0.5, 1.0, np.where(a <= 1.0, 2.0 * (1.0 - a), 0.0))


def _flat_top_lags(x: np.ndarray) -> tuple[np.ndarray, int]:
    """Autocovariances of a centred series (divisor n) and the flat-top bandwidth ``M`` (Politis 2003).

    ``M = 2 m_hat``, ``m_hat`` the first lag after which ``K_N`` autocorrelations in
    a row lie within ``2 sqrt(log10 n / n)``; at most ``ceil(sqrt n) + K_N``.
    """
    n = x.shape[0]
    kn = max(5, math.ceil(math.sqrt(math.log10(n))))
    m_max = math.ceil(math.sqrt(n)) + kn
    lags = min(n - 1, m_max + kn)
    f = np.fft.rfft(x, 2 * n)
    acov = np.fft.irfft(f * np.conj(f), 2 * n)[:lags + 1] / n
    rho = acov[1:] / acov[0]
    bound = 2.0 * math.sqrt(math.log10(n) / n)
    small = np.abs(rho) < bound
    m_hat = None
    for m in range(0, lags - kn + 1):  # first m after which kn correlations in a row are small
        if small[m:m + kn].all():
            m_hat = m
            break
    if m_hat is None:
        m_hat = m_max
    return acov, min(2 * max(m_hat, 1), m_max, lags)


def _pw_one(x: np.ndarray, kind: str) -> float:
    """Politis-White block length of one series (Patton-Politis-White 2009 constants)."""
    n = x.shape[0]
    x = x - x.mean()
    var = float(x @ x) / n
    if n < 4 or var <= 0:
        return 1.0
    acov, big_m = _flat_top_lags(x)
    k = np.arange(1, big_m + 1)
    lam = _flat_top(k / big_m)
    g_hat = 2.0 * float(np.sum(lam * k * acov[1:big_m + 1]))
    g0 = float(acov[0] + 2.0 * np.sum(lam * acov[1:big_m + 1]))
    d = 2.0 * g0**2 if kind == "stationary" else (4.0 / 3.0) * g0**2
    if d <= 0:
        return 1.0
    b = (2.0 * g_hat**2 / d) ** (1.0 / 3.0) * n ** (1.0 / 3.0)
    b_max = math.ceil(min(3.0 * math.sqrt(n), n / 3.0))
    return float(min(max(b, 1.0), b_max))


def politis_white_block_length(series, *, kind: str = "stationary") -> BlockLength:
    """Automatic block length for a block bootstrap, from the data.

    Parameters
    ----------
    series : (k,) or (k, n) array_like
        Time-ordered values (for granule statistics: the granule means).
        Each column is standardised; constant columns count as length 1.
    kind : {"stationary", "moving"}
        The bootstrap the length is for.

    Returns
    -------
    BlockLength
        The largest per-column value.

    Notes
    -----
    For each column: autocovariances ``R(j)``; ``m_hat`` the smallest lag
    after which ``K_N = max(5, ceil(sqrt(log10 k)))`` autocorrelations in a
    row lie within ``2 sqrt(log10 k / k)``; bandwidth ``M = 2 m_hat``
    (at most ``ceil(sqrt k) + K_N``); with the flat-top window ``lambda``,
    ``G = sum_{|j|<=M} lambda(j/M) |j| R(j)`` and
    ``g0 = sum_{|j|<=M} lambda(j/M) R(j)``;
    ``b = (2 G^2 / D)^(1/3) k^(1/3)`` with ``D = 2 g0^2`` (stationary) or
    ``(4/3) g0^2`` (moving), as corrected by Patton, Politis & White (2009);
    clipped to ``[1, ceil(min(3 sqrt k, k / 3))]``.

    References
    ----------
    .. [1] D. N. Politis and H. White, Econometric Reviews 23(1), 53-70, 2004.
    .. [2] A. Patton, D. N. Politis and H. White, Econometric Reviews 28(4), 372-375, 2009.
    .. [3] D. N. Politis, Journal of Nonparametric Statistics 15(4-5), 517-533, 2003.
    """
    if kind not in ("stationary", "moving"):
        raise OptionsError(f"kind must be 'stationary' or 'moving'; got {kind!r}.", key="kind",
                           fix="Use kind='stationary' or kind='moving'.")
    x = np.asarray(series, dtype=float)
    if x.ndim == 1:
        x = x[:, None]
    if x.ndim != 2 or x.shape[0] < 1 or not np.all(np.isfinite(x)):
        raise OptionsError(f"series must be a finite (k, n) array; got shape {x.shape}.", key="series",
                           fix="Pass the granule means of the window, in time order.")
    per = tuple(_pw_one(x[:, j], kind) for j in range(x.shape[1]))
    value = max(per)
    rule = (f"Politis & White (2004) automatic block length with the Patton, Politis & White (2009) "
            f"correction, for the {kind} bootstrap, computed on each variable's series of "
            f"{x.shape[0]} granule means; the largest value over variables is used.")
    return BlockLength(value=value, per_series=per, kind=kind, rule=rule)


@dataclass(frozen=True, slots=True, eq=False)
class GranuleStats:
    """The granules of one window: what a resample is merged from.

    Attributes
    ----------
    counts : (k,) float
    means : (k, n) float
        Granule means (any common origin; results use offsets only).
    comoments : (k, n, n) float
    rows_per_granule : int
        ``g`` of the granule table (1: single rows).
    ordered : bool
        True when rows are time-ordered (a block bootstrap applies).
    """

    counts: np.ndarray
    means: np.ndarray
    comoments: np.ndarray
    rows_per_granule: int = 1
    ordered: bool = True

    @classmethod
    def from_table(cls, granules, lo: int, hi: int, *, ordered: bool = True) -> "GranuleStats":
        """Granules ``lo .. hi-1`` of a :class:`relspan.data.blocks.GranuleTable`."""
        t = granules.table
        return cls(t.counts[lo:hi].astype(float), t.means[lo:hi], t.comoments[lo:hi],
                   int(granules.rows_per_granule), ordered)

    @classmethod
    def from_rows(cls, x, *, ordered: bool = True) -> "GranuleStats":
        """One granule per row (small data held in memory)."""
        x = np.asarray(x, dtype=float)
        if x.ndim != 2 or x.shape[0] < 2 or not np.all(np.isfinite(x)):
            raise OptionsError(f"rows must be a finite (T, n) array with T >= 2; got shape {x.shape}.",
                               key="x", fix="Pass the window's rows as a 2-D float array.")
        k, n = x.shape
        return cls(np.ones(k), x.copy(), np.zeros((k, n, n)), 1, ordered)

    @property
    def k(self) -> int:
        return int(self.counts.shape[0])

    @property
    def n(self) -> int:
        return int(self.means.shape[1])

    @property
    def rows(self) -> int:
        return int(round(float(self.counts.sum())))

    def window_moments(self) -> tuple[float, np.ndarray, np.ndarray]:
        """Count, mean and co-moment of the whole window (every granule once)."""
        c, m, cm = merge_weighted(self.counts, self.means, self.comoments, np.ones((1, self.k)))
        return float(c[0]), m[0], cm[0]


def draw_granules(k: int, *, scheme: str, resamples: int, rng: np.random.Generator,
                  block_length: float = 1.0) -> np.ndarray:
    """Granule indices of ``resamples`` bootstrap resamples of a window of ``k`` granules.

    Returns
    -------
    (resamples, k) int64
        Row ``b`` lists the granules of resample ``b`` in the order drawn.
    """
    return draw_blocks(k, scheme=scheme, resamples=resamples, rng=rng, block_length=block_length)[0]


def draw_blocks(k: int, *, scheme: str, resamples: int, rng: np.random.Generator,
                block_length: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """:func:`draw_granules` and, beside it, the block each drawn granule belongs to.

    Returns
    -------
    idx : (resamples, k) int64
        As :func:`draw_granules` (the same draws for the same ``rng`` state).
    block : (resamples, k) int64
        ``block[b, t]`` numbers the block (0, 1, ... within resample ``b``)
        that position ``t`` was copied from; for ``"iid"`` every position is
        a block of its own. The studentised interval
        (:func:`studentized_interval`) sums influence values over these blocks.

    Notes
    -----
    The chunks of :func:`iter_draw_blocks` put together: the same draws, bit
    for bit, as drawing every resample at once. Callers that can work chunk by
    chunk (:func:`resample_covariances`, the studentised intervals) use the
    iterator and never hold the whole ``(resamples, k)`` array.
    """
    parts = list(iter_draw_blocks(k, scheme=scheme, resamples=resamples, rng=rng, block_length=block_length))
    if len(parts) == 1:
        return parts[0][1], parts[0][2]
    return np.concatenate([p[1] for p in parts]), np.concatenate([p[2] for p in parts])


def draw_chunk(k: int, cells: int | None = None) -> int:
    """Resamples per chunk of :func:`iter_draw_blocks` for a window of ``k`` granules (``cells`` // k, >= 1)."""
    return max(1, int(_DRAW_CELLS if cells is None else cells) // max(int(k), 1))


def iter_draw_blocks(k: int, *, scheme: str, resamples: int, rng: np.random.Generator,
                     block_length: float = 1.0, chunk: int | None = None):
    """:func:`draw_blocks` in chunks of resamples: yields ``(start, idx, block)`` in order.

    ``idx`` and ``block`` are rows ``start .. start + len(idx) - 1`` of what
    :func:`draw_blocks` returns, and the generator ``rng`` is left in the same
    state, so every draw is the same, bit for bit, however the resamples are
    chunked (``chunk`` resamples at a time; default :func:`draw_chunk`, about
    :data:`_DRAW_CELLS` granule indices). Memory: one chunk's indices and
    blocks, plus, for the stationary scheme, one bit per granule and resample
    (below).

    How the stream is kept: ``"iid"`` and ``"moving"`` draw one integer per
    granule (or block start) in row order, so a chunk's rows are the next
    integers of the stream. The stationary scheme draws first every
    resample's block breaks (one float32 per granule, all resamples, in row
    order) and only then one uniform start per block, all blocks of all
    resamples in order; a resample's number of blocks is random, so the
    breaks of every resample are drawn first (in chunks, kept as bits)
    and each chunk then takes the next ``blocks in the chunk`` starts of
    the stream: the same starts, in the same order, as one draw of all of
    them.
    """
    if scheme not in SCHEMES:
        raise OptionsError(f"scheme must be one of {', '.join(SCHEMES)}; got {scheme!r}.", key="scheme",
                           fix="Use 'stationary' or 'moving' for time-ordered rows, 'iid' otherwise.")
    if k < 1 or resamples < 1:
        raise OptionsError(f"need at least one granule and one resample; got k={k}, resamples={resamples}.",
                           key="resamples", fix="Ask for at least one resample of a non-empty window.")
    step = draw_chunk(k) if chunk is None else max(1, int(chunk))
    spans = [(b0, min(step, resamples - b0)) for b0 in range(0, resamples, step)]
    if scheme == "iid" or k == 1:
        for b0, nb in spans:
            yield b0, rng.integers(0, k, size=(nb, k)), np.broadcast_to(np.arange(k), (nb, k))
        return
    if scheme == "moving":
        b = int(min(max(round(block_length), 1), k))
        nblk = -(-k // b)
        for b0, nb in spans:
            yield b0, _moving_chunk(rng, k, b, nblk, nb), np.broadcast_to(np.arange(k) // b, (nb, k))
        return
    p = np.float32(1.0 / max(float(block_length), 1.0))
    if len(spans) == 1:                                    # one chunk: no need to keep the breaks
        new = rng.random((resamples, k), dtype=np.float32) < p
        new[:, 0] = True
        yield (0, *_stationary_chunk(rng, new, k))
        return
    # every resample's block breaks first, kept as bits (one bit per granule and resample)
    packed = np.empty((resamples, -(-k // 8)), dtype=np.uint8)
    for b0, nb in spans:
        packed[b0:b0 + nb] = np.packbits(rng.random((nb, k), dtype=np.float32) < p, axis=1)
    packed[:, 0] |= np.uint8(0x80)                         # granule 0 always starts a block
    for b0, nb in spans:                                   # then the starts, chunk by chunk
        new = np.unpackbits(packed[b0:b0 + nb], axis=1, count=k).view(bool)
        yield (b0, *_stationary_chunk(rng, new, k))


def _moving_chunk(rng: np.random.Generator, k: int, b: int, nblk: int, nb: int) -> np.ndarray:
    starts = rng.integers(0, k - b + 1, size=(nb, nblk))
    return (starts[:, :, None] + np.arange(b)).reshape(nb, nblk * b)[:, :k]


def _stationary_chunk(rng: np.random.Generator, new: np.ndarray, k: int):
    """Granule indices and block numbers of a chunk of stationary-bootstrap resamples.

    ``new[b, j]``: granule ``j`` of resample ``b`` starts a block (``new[:, 0]`` all True).
    Granule ``j`` of a block that starts at ``j0`` with drawn start ``s`` is ``(s + j - j0) mod k``;
    with ``0 <= s, j - j0 < k`` the modulo is one subtraction of ``k``. Integers only: the same
    indices as ``(starts[block] + (j - begin)) % k`` with ``begin`` the running block start.
    """
    nb = new.shape[0]
    flat = new.ravel()
    block = np.cumsum(flat, dtype=np.intp) - 1               # running block number within the chunk
    starts = rng.integers(0, k, size=int(block[-1]) + 1)     # the chunk's next starts of the stream
    idx = (starts - np.flatnonzero(flat))[block]             # start minus the block's first position
    idx += np.arange(flat.size)                              # + the position: start + offset, < 2k - 1
    idx -= k * (idx >= k)
    block = block.reshape(nb, k)
    return idx.reshape(nb, k), block - block[:, :1]


def merge_weighted(counts, means, comoments, weights, *, overwrite_weights: bool = False
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Moments of many weighted merges of the same granules, in one matrix product.

    Parameters
    ----------
    counts : (k,) ; means : (k, n) ; comoments : (k, n, n)
        Granule statistics.
    weights : (B, k) array_like
        ``weights[b, i]``: how many times merge ``b`` takes granule ``i`` (0, 1, 2, ...).
    overwrite_weights : bool
        With a float64 ``weights`` array the caller no longer needs, its cells are
        reused for the count-weighted copy (``weights * counts``) instead of a second
        ``(B, k)`` array: the same products, so the same bits, with half the memory.

    Returns
    -------
    counts (B,), means (B, n), comoments (B, n, n)
        See the module notes for the formula (k-way Chan-Golub-LeVeque merge
        about the mean of all granules).
    """
    c = np.asarray(counts, dtype=float)
    m = np.asarray(means, dtype=float)
    cm = np.asarray(comoments, dtype=float)
    w = np.asarray(weights, dtype=float)
    k, n = m.shape
    center = (c @ m) / c.sum()
    d = m - center
    g = (cm + c[:, None, None] * d[:, :, None] * d[:, None, :]).reshape(k, n * n)
    wg = w @ g
    if overwrite_weights and w is weights and w.flags.writeable:
        wc = np.multiply(w, c, out=w)
    else:
        wc = w * c
    del w
    tot = wc.sum(axis=1)
    safe = np.where(tot > 0, tot, 1.0)
    dbar = (wc @ d) / safe[:, None]
    out = wg.reshape(-1, n, n) - tot[:, None, None] * dbar[:, :, None] * dbar[:, None, :]
    out = 0.5 * (out + out.transpose(0, 2, 1))
    return tot, dbar + center, out


def stack_covariances(stats: GranuleStats, idx: np.ndarray, *, ddof: int = 1
                      ) -> tuple[np.ndarray, np.ndarray]:
    """Covariances ``(B, n, n)`` and row counts ``(B,)`` of resamples given as granule indices."""
    return _stack_chunks(stats, [(0, idx)], int(idx.shape[0]), ddof=ddof)


def _stack_chunks(stats: GranuleStats, chunks, b_total: int, *, ddof: int = 1
                  ) -> tuple[np.ndarray, np.ndarray]:
    """:func:`stack_covariances` of resamples given chunk by chunk: ``(start, idx, ...)`` in order.

    The multiplicities are gathered into the merge's own partition (``_CHUNK_CELLS``
    cells, resamples ``0, m, 2m, ...``) whatever the chunks are, so each merge is the
    same matrix product as when every index was given at once.
    """
    k = stats.k
    covs = np.empty((b_total, stats.n, stats.n))
    rows = np.empty(b_total)
    m = max(1, _CHUNK_CELLS // max(k, 1))
    w = None
    filled = 0                      # rows of the current merge's multiplicities already gathered
    m0 = 0                          # the current merge's first resample
    for item in chunks:
        b0, part = item[0], item[1]
        del item
        nb = part.shape[0]
        at = 0
        while at < nb:
            if w is None:
                w = np.zeros((min(m, b_total - m0), k))
            take = min(nb - at, w.shape[0] - filled)
            piece = part[at:at + take]
            flat = (np.arange(take)[:, None] * k + piece).ravel()
            w[filled:filled + take] = np.bincount(flat, minlength=take * k).reshape(take, k)
            del flat, piece
            filled += take
            at += take
            if filled == w.shape[0]:
                tot, _, cm = merge_weighted(stats.counts, stats.means, stats.comoments, w, overwrite_weights=True)
                covs[m0:m0 + filled] = cm / (tot - ddof)[:, None, None]
                rows[m0:m0 + filled] = tot
                m0 += filled
                w, filled = None, 0
        del part
    if m0 != b_total:
        raise ValueError(f"chunks gave {m0} resamples; expected {b_total}")
    return covs, rows


@dataclass(frozen=True, slots=True, eq=False)
class CovarianceResamples:
    """Bootstrap resamples of one window's covariance.

    Attributes
    ----------
    estimate : (n, n) ndarray
        The window's covariance (divisor ``rows - 1``), from the same granules.
    covariances : (B, n, n) ndarray
        One covariance per resample (divisor ``rows_b - 1``).
    rows : (B,) ndarray
        Rows in each resample (equal to the window's rows unless granules differ in size).
    scheme : str
        ``"iid"``, ``"moving"`` or ``"stationary"``.
    block_length : float
        In granules (1 for iid): mean block length (stationary) or block length (moving).
    block_rule : str
        How the block length was chosen (the automatic rule, or "given").
    rows_per_granule : int
    granules : int
        Granules in the window.
    seed : tuple or None
        ``(seed, dataset, plan, window)`` when the stream came from :func:`window_seed`.
    note : str
        What the granule size approximates (empty for single rows).
    draws, blocks : (B, k) int arrays or None
        The granules drawn and their blocks (:func:`draw_blocks`), kept only
        when asked (``keep_draws=True``): a studentised interval needs them.
    """

    estimate: np.ndarray
    covariances: np.ndarray
    rows: np.ndarray
    scheme: str
    block_length: float
    block_rule: str
    rows_per_granule: int
    granules: int
    seed: tuple | None
    note: str
    draws: np.ndarray | None = None
    blocks: np.ndarray | None = None

    @property
    def resamples(self) -> int:
        return int(self.covariances.shape[0])

    def eigh(self, scale: str = "as given") -> tuple[np.ndarray, np.ndarray]:
        """Batched eigendecomposition of every resample: values ``(B, n)`` ascending, vectors ``(B, n, n)``.

        ``scale`` as for :func:`scale_stack` (columns of the vectors are the
        eigenvectors on that scale).
        """
        return np.linalg.eigh(scale_stack(self.covariances, scale))

    def to_dict(self) -> dict:
        """JSON-ready description (the resampled matrices themselves are not written)."""
        return jsonable({"scheme": self.scheme, "resamples": self.resamples,
                         "block_length_granules": self.block_length,
                         "block_length_rows": self.block_length * self.rows_per_granule,
                         "block_rule": self.block_rule, "rows_per_granule": self.rows_per_granule,
                         "granules": self.granules,
                         "seed": None if self.seed is None else list(self.seed), "note": self.note})


def correlation_stack(covs: np.ndarray) -> np.ndarray:
    """Each covariance of a ``(B, n, n)`` stack on its own correlation scale."""
    d = np.sqrt(np.clip(np.diagonal(covs, axis1=1, axis2=2), 0.0, None))
    d = np.where(d > 0, d, 1.0)
    return covs / (d[:, :, None] * d[:, None, :])


def scale_stack(covs: np.ndarray, scale) -> np.ndarray:
    """A covariance stack on the analysis scale.

    ``"as given"`` returns it unchanged; ``"correlation"`` puts each matrix on
    its own correlation scale (a relative tolerance analyses each window, and
    so each resample, that way); an ``(n,)`` array ``d`` divides variable j by
    ``d[j]`` (the common scale across windows: full-sample standard deviations).
    """
    covs = np.asarray(covs, dtype=float)
    if isinstance(scale, str):
        if scale == "as given":
            return covs
        if scale == "correlation":
            return correlation_stack(covs)
        raise OptionsError(f"scale must be 'as given', 'correlation' or an array of scales; got {scale!r}.",
                           key="scale", fix="Use the scale the analysis uses.")
    d = np.asarray(scale, dtype=float)
    if d.shape != covs.shape[-1:] or np.any(d <= 0):
        raise OptionsError(f"scale must hold {covs.shape[-1]} positive numbers.", key="scale",
                           fix="Pass one positive scale (e.g. a standard deviation) per variable.")
    return covs / np.outer(d, d)


def resample_covariances(stats: GranuleStats, *, resamples: int = DEFAULT_RESAMPLES,
                         rng: np.random.Generator, scheme: str | None = None,
                         block_length: float | None = None, seed: tuple | None = None,
                         ddof: int = 1, keep_draws: bool = False) -> CovarianceResamples:
    """Bootstrap resamples of a window's covariance from its granule statistics.

    Parameters
    ----------
    stats : GranuleStats
        The window's granules.
    resamples : int
        Number of resamples ``B``.
    rng : numpy.random.Generator
        The window's stream (e.g. :func:`window_rng`); pass ``seed`` to record it.
    scheme : {"iid", "moving", "stationary"}, optional
        Default: ``"stationary"`` for ordered rows, ``"iid"`` otherwise.
    block_length : float, optional
        In granules; default: :func:`politis_white_block_length` of the granule means.
    seed : tuple, optional
        Recorded on the result (``(seed, dataset, plan, window)``).
    ddof : int
        Covariance divisor ``rows - ddof``.
    keep_draws : bool
        Keep the drawn granules and their blocks on the result (memory: two
        ``(B, k)`` integer arrays), for :func:`studentized_interval`.

    Returns
    -------
    CovarianceResamples

    References
    ----------
    .. [1] B. Efron, Annals of Statistics 7(1), 1-26, 1979.
    .. [2] H. R. Kuensch, Annals of Statistics 17(3), 1217-1241, 1989.
    .. [3] D. N. Politis and J. P. Romano, JASA 89(428), 1303-1313, 1994.
    .. [4] D. N. Politis and H. White, Econometric Reviews 23(1), 53-70, 2004;
           correction by A. Patton, D. N. Politis and H. White, 28(4), 372-375, 2009.
    """
    if not isinstance(resamples, (int, np.integer)) or resamples < 1:
        raise OptionsError(f"resamples must be a whole number >= 1; got {resamples!r}.", key="resamples",
                           fix="Use e.g. 499 resamples for 90% intervals.")
    scheme = scheme or ("stationary" if stats.ordered else "iid")
    if scheme not in SCHEMES:
        raise OptionsError(f"scheme must be one of {', '.join(SCHEMES)}; got {scheme!r}.", key="scheme",
                           fix="Use 'stationary' or 'moving' for time-ordered rows, 'iid' otherwise.")
    if scheme == "iid":
        b, rule = 1.0, "No blocks: granules are drawn independently."
    elif block_length is not None:
        if not (float(block_length) >= 1.0):
            raise OptionsError(f"block_length must be at least 1 granule; got {block_length!r}.",
                               key="block_length", fix="Leave it out for the automatic rule.")
        b, rule = float(block_length), "Block length given."
    else:
        bl = politis_white_block_length(stats.means, kind=scheme)
        b, rule = bl.value, bl.rule
    if scheme == "moving":
        b = float(min(max(round(b), 1), stats.k))
    if keep_draws:
        idx, blocks = draw_blocks(stats.k, scheme=scheme, resamples=int(resamples), rng=rng, block_length=b)
        covs, rows = stack_covariances(stats, idx, ddof=ddof)
    else:   # chunk by chunk: the same draws and covariances, without every index held at once
        idx = blocks = None
        covs, rows = _stack_chunks(stats, iter_draw_blocks(stats.k, scheme=scheme, resamples=int(resamples),
                                                           rng=rng, block_length=b), int(resamples), ddof=ddof)
    tot, _, cm = stats.window_moments()
    note = "" if stats.rows_per_granule == 1 else (
        f"Granules of up to {stats.rows_per_granule} rows are resampled whole: blocks start only at "
        "granule boundaries and the block length is estimated from granule means.")
    return CovarianceResamples(estimate=cm / (tot - ddof), covariances=covs, rows=rows, scheme=scheme,
                               block_length=b, block_rule=rule, rows_per_granule=stats.rows_per_granule,
                               granules=stats.k, seed=seed, note=note,
                               draws=idx if keep_draws else None,
                               blocks=np.ascontiguousarray(blocks) if keep_draws else None)


# --------------------------------------------------------------------------- studentised intervals


def drawn_blocks(res: CovarianceResamples) -> tuple[np.ndarray, np.ndarray] | None:
    """The granules drawn for ``res`` and their blocks (as ``keep_draws=True`` keeps them).

    Kept draws are returned as they are; otherwise, when ``res`` records its
    stream (``res.seed``, as :func:`window_seed` names it), the draws are made
    again from a fresh copy of that stream with the same scheme, block length
    and resamples: :func:`resample_covariances` takes nothing else from the
    stream before :func:`draw_blocks`, so they are the same draws, bit for bit.
    None when neither is available.
    """
    if res.draws is not None and res.blocks is not None:
        return res.draws, res.blocks
    if res.seed is None or len(res.seed) != 4:
        return None
    rng = window_rng(*res.seed)
    idx, blocks = draw_blocks(res.granules, scheme=res.scheme, resamples=res.resamples, rng=rng,
                              block_length=res.block_length)
    return idx, np.ascontiguousarray(blocks)



def iter_drawn_blocks(res: CovarianceResamples, *, chunk: int | None = None):
    """:func:`drawn_blocks` chunk by chunk: ``(start, idx, block)`` as :func:`iter_draw_blocks` yields them.

    Kept draws are sliced; otherwise the draws are made again from a fresh copy of
    ``res``'s recorded stream, one chunk at a time (the whole ``(B, k)`` arrays are
    never held). Yields nothing when neither is available (as :func:`drawn_blocks`
    returns None).
    """
    if res.draws is not None and res.blocks is not None:
        step = draw_chunk(res.granules) if chunk is None else max(1, int(chunk))
        for b0 in range(0, res.draws.shape[0], step):
            yield b0, res.draws[b0:b0 + step], res.blocks[b0:b0 + step]
        return
    if res.seed is None or len(res.seed) != 4:
        return
    yield from iter_draw_blocks(res.granules, scheme=res.scheme, resamples=res.resamples,
                                rng=window_rng(*res.seed), block_length=res.block_length, chunk=chunk)


def can_redraw(res: CovarianceResamples) -> bool:
    """True when :func:`iter_drawn_blocks` has draws to give (kept, or a recorded stream)."""
    return (res.draws is not None and res.blocks is not None) or (res.seed is not None and len(res.seed) == 4)


def statistic_gradient(f, cov, *, step: float | None = None) -> np.ndarray:
    """The symmetric gradient ``G`` of a smooth statistic of a covariance, by central differences.

    ``f(cov + E) = f(cov) + tr(G E) + O(||E||^2)`` for symmetric ``E``; ``step``
    defaults to ``1e-6`` times the largest diagonal entry.
    """
    s = np.asarray(cov, dtype=float)
    n = s.shape[0]
    h = float(step) if step is not None else 1e-6 * max(float(np.max(np.abs(np.diag(s)))), 1e-300)
    g = np.zeros((n, n))
    for i in range(n):
        for j in range(i, n):
            e = np.zeros((n, n))
            e[i, j] = e[j, i] = h
            d = (float(f(s + e)) - float(f(s - e))) / (2.0 * h)
            g[i, j] = g[j, i] = d if i == j else d / 2.0
    return g


def influence_values(stats: GranuleStats, grad) -> np.ndarray:
    """Each granule's share ``U_i`` of the linearised statistic (its empirical influence, summed over its rows).

    ``U_i = tr(G (P_i - c_i S0))`` with ``P_i = C_i + c_i d_i d_i^T`` the
    granule's co-moment about the window mean, ``S0`` the window's
    co-moment over its rows and ``G`` from :func:`statistic_gradient`:
    ``sum_i U_i / N`` is the first-order change of the statistic.
    """
    g = np.asarray(grad, dtype=float)
    c, m, cm = stats.counts, stats.means, stats.comoments
    d = m - (c @ m) / c.sum()
    quad = np.einsum("kij,ij->k", cm, g) + c * np.einsum("ki,ij,kj->k", d, g, d)
    return quad - c * (float(quad.sum()) / float(c.sum()))


def influence_sd(values, counts, *, ordered: bool) -> float:
    """Standard error of a statistic from its influence values (``sqrt(long-run variance) / N``).

    Time-ordered granules: the flat-top lag-window estimate of the long-run
    variance of the influence series (Politis & Romano 1995; bandwidth by
    Politis' 2003 rule, as in :func:`politis_white_block_length`), which
    has no first-order bias, unlike the block bootstrap's own variance;
    when it is not positive, the Bartlett (triangular) window with the same
    bandwidth, which always is. Unordered rows: lag 0 only.
    """
    u = np.asarray(values, dtype=float)
    n_rows = float(np.sum(counts))
    k = u.shape[0]
    u = u - u.mean()
    if not ordered or k < 4:
        return math.sqrt(float(u @ u)) / n_rows
    acov, big_m = _flat_top_lags(u)
    lag = np.arange(1, big_m + 1)
    lrv = float(acov[0] + 2.0 * np.sum(_flat_top(lag / big_m) * acov[1:big_m + 1]))
    if not lrv > 0:
        lrv = float(acov[0] + 2.0 * np.sum((1.0 - lag / (big_m + 1.0)) * acov[1:big_m + 1]))
    return math.sqrt(max(lrv, 0.0) * k) / n_rows


def resample_influence_sd(values, counts, idx, block) -> np.ndarray:
    """The standard error each resample gives itself: its block sums of influence values (``(B,)``).

    For resample ``b`` the drawn granules' influence values are centred at the
    resample's own mean and summed within each drawn block; the variance is
    the sum of squared block sums over ``N_b^2`` (the blockwise studentisation
    of Goetze & Kuensch 1996: blocks are independent given the data).

    A resample made of a single block has no standard error: its one centred
    block sum is zero by construction, and what floating point leaves of it is
    rounding (different on every BLAS kernel). Such resamples get exactly 0,
    so :func:`studentized_interval` leaves them out. (A single stationary or
    circular block of ``k`` granules is a rotation of the window itself: its
    statistic is the estimate, up to rounding, and it carries no information
    about the spread.)
    """
    u = np.asarray(values, dtype=float)[idx]
    c = np.asarray(counts, dtype=float)[idx]
    nb = c.sum(axis=1)
    e = u - c * (u.sum(axis=1) / nb)[:, None]
    b_total, k = idx.shape
    blk = np.asarray(block)
    flat = (np.arange(b_total)[:, None] * k + blk).ravel()
    sums = np.bincount(flat, weights=e.ravel(), minlength=b_total * k).reshape(b_total, k)
    sd = np.sqrt(np.sum(sums**2, axis=1)) / nb
    return np.where(blocks_per_resample(blk) >= 2, sd, 0.0)


def blocks_per_resample(block) -> np.ndarray:
    """How many blocks each resample is made of (``(B,)``), from :func:`draw_blocks`' block numbers."""
    blk = np.asarray(block)
    if blk.ndim != 2 or blk.shape[1] == 0:
        return np.zeros(blk.shape[:1], dtype=np.int64)
    return (blk.max(axis=1) + 1).astype(np.int64)


def studentized_interval(estimate: float, draws, sd: float, sd_draws, *, level: float,
                         resolution: float = 0.0, log: bool = False):
    """Studentised (bootstrap-t) interval ``[t - sd q_hi, t - sd q_lo]``.

    ``q`` are quantiles of ``(draw_b - estimate) / sd_draws[b]`` (Hall 1988;
    Davison & Hinkley 1997, section 5.2.1); for block resamples the resample
    standard errors come from :func:`resample_influence_sd` (Goetze & Kuensch
    1996) and ``sd`` from :func:`influence_sd`. Returns an
    :class:`relspan.analysis.intervals.Interval` with method ``"studentized"``.

    Parameters
    ----------
    resolution : float
        Standard errors at or below it (absolute, on the statistic's scale)
        count as zero: they are not resolved from rounding. Resamples whose
        standard error is zero (or not finite) are left out; when the window's
        own ``sd`` is zero the interval is not available (``low``/``high`` NaN)
        and the caller falls back to another interval.
    log : bool
        For a positive statistic: studentise ``log theta`` instead
        (``(log draw_b - log t) / (sd_draws[b] / draw_b)``, scale ``sd / t``,
        the delta method) and return ``[t exp(-(sd/t) q_hi), t exp(-(sd/t) q_lo)]``,
        which stays positive. Draws at or below ``resolution`` are left out;
        an estimate at or below it gives no interval.

    References
    ----------
    .. [1] P. Hall, "Theoretical comparison of bootstrap confidence intervals",
           Annals of Statistics 16(3), 927-953, 1988.
    .. [2] F. Goetze and H. R. Kuensch, "Second-order correctness of the
           blockwise bootstrap for stationary observations", Annals of
           Statistics 24(5), 1914-1933, 1996.
    .. [3] D. N. Politis and J. P. Romano, "Bias-corrected nonparametric
           spectral estimation", Journal of Time Series Analysis 16(1), 67-103, 1995.
    .. [4] A. C. Davison and D. V. Hinkley, *Bootstrap Methods and their
           Application*, Cambridge University Press, 1997.
    """
    from relspan.analysis.intervals import Interval
    if not (0.0 < float(level) < 1.0):
        raise OptionsError(f"level must be in (0, 1); got {level!r}.", key="level",
                           fix="Use a confidence level such as 0.90.")
    res = max(float(resolution), 0.0)
    if not math.isfinite(res):
        raise OptionsError(f"resolution must be finite; got {resolution!r}.", key="resolution",
                           fix="Pass a small non-negative number on the statistic's scale.")
    t = float(estimate)
    d = np.asarray(draws, dtype=float)
    s = np.asarray(sd_draws, dtype=float)
    sd = float(sd)
    ok = np.isfinite(d) & np.isfinite(s) & (s > res)
    if log:
        ok &= d > res
        usable = t > res and sd > res
    else:
        usable = sd > res
    if ok.sum() < 2 or not usable:
        return Interval(t, np.nan, np.nan, float(level), "studentized", int(ok.sum()))
    a = (1.0 - float(level)) / 2.0
    if log:
        z = (np.log(d[ok]) - math.log(t)) / (s[ok] / d[ok])
        lo, hi = np.quantile(z, [a, 1.0 - a])
        r = sd / t
        return Interval(t, t * math.exp(-r * float(hi)), t * math.exp(-r * float(lo)), float(level),
                        "studentized", int(ok.sum()))
    z = (d[ok] - t) / s[ok]
    lo, hi = np.quantile(z, [a, 1.0 - a])
    return Interval(t, t - sd * float(hi), t - sd * float(lo), float(level), "studentized", int(ok.sum()))
    z = (d[ok] - t) / s[ok]
    a = (1.0 - float(level)) / 2.0
    lo, hi = np.quantile(z, [a, 1.0 - a])
    return Interval(t, t - sd * float(hi), t - sd * float(lo), float(level), "studentized", int(ok.sum()))
