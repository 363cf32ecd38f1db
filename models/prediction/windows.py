"""Predictive count distributions for arbitrary windows, from a compact posterior.

For each posterior draw d the expected count in a window [a, b) is Λ_d = ∫_a^b λ_d(t) dt, with
λ_d piecewise constant on the model's bins and zero in closed time: a bin the opening hours cut
carries its rate on its open minutes only, so a bin partly inside the window counts for the open
minutes it shares with the window, a window wholly in closed time has Λ_d = 0 exactly, and
daylight-saving days have 23 or 25 hours. Days after the history get latent
deviations simulated forward from each draw's AR(1) with a fixed seed (and, with the within-day
term, shape weights drawn per day from a generator seeded by the day), so a query always gives the
same answer from the same version. The annual season, if any, is a smooth function of the date.
The predictive count is the mixture over draws of Poisson(Λ_d), summarised exactly by
:mod:`models.prediction.mixture`.

A negative binomial model (``spec.observation == "negbin"``) is the same Poisson mixture with
one more factor inside Λ_d: each bin's rate is multiplied by Gamma(k_d, k_d) noise, k_d the
draw's dispersion for the bin's slot of the day. The noise of a bin comes from a generator seeded
by the version seed and the bin's absolute index (its UTC start divided by the bin width), so a
bin gets the same noise in every query and windows, sub-windows and totals stay consistent. It is
stratified across draws: draw d gets the gamma quantile at u_d = (π(d) + v_d) / D, π a random
permutation of the D draws and v_d uniform on [0, 1), so each u_d is uniform (the law per draw is
exactly the gamma) while the D values fill every 1/D stratum once. A one-bin window is then
within about 1e-4 of the negative binomial CDF the model was fitted with (independent gamma
draws miss it by about 0.5 / sqrt(D), 0.01-0.02 for D = 2000). docs/calibration.md gives the
measurements behind this choice over a per-draw negative binomial with a moment-matched window
dispersion.

This module imports numpy, pandas and scipy only: answering a query never loads PyMC.
"""

from __future__ import annotations

import datetime as dt
import re
import zoneinfo
from collections.abc import Sequence
from dataclasses import dataclass
from typing import NotRequired, TypedDict

import numpy as np
import pandas as pd
from pandas.errors import OutOfBoundsDatetime
from scipy import special

from models.exceptions import InputError, WindowError
from models.prediction.mixture import MixtureSummary, summarise
from models.prediction.posterior import BinTable, CompactPosterior
from models.ratemodel.bases import annual_basis, within_day_basis
from models.ratemodel.binning import check_zone, local_features

__all__ = [
    "ACCEPTED_INSTANTS",
    "DEFAULT_LEVELS",
    "INSTANT_FORM",
    "MAX_HORIZON_DAYS",
    "Forecast",
    "ForecastRow",
    "expected_counts",
    "forecast",
    "iso_local",
    "parse_instant",
    "parse_step",
    "split_range",
]

DEFAULT_LEVELS: tuple[float, ...] = (0.8, 0.95)
#: Furthest a window may end after the last history day, in days (trend extrapolation beyond a
#: year is rarely trustworthy).
MAX_HORIZON_DAYS = 400
_BLOCK_BINS = 256
# Endpoint rows (of every draw) handled together while interpolating: 2 x 32 x 2,000 draws of
# float64 is 1 MB, within a core's L2 cache.
_TILE_ROWS = 32
# Up to this many instants are formatted one by one (see iso_local).
_FEW_INSTANTS = 64
_NS_PER_MINUTE = 60 * 10**9
# Keeps the bin-noise streams apart from the latent forward simulation, which uses the seed alone.
_NOISE_STREAM = 0x6E6F697365
#: Bins whose gamma noise each loaded negative binomial version keeps (at 2,000 draws, 8 MB).
NOISE_CACHE_BINS = 1024
# Beyond this dispersion the gamma noise sd (1/sqrt(k)) is below 1e-4: the bin is Poisson.
_POISSON_DISPERSION = 1e8


#: The ISO 8601 forms :func:`parse_instant` accepts: a date, or a date and time (``T`` or a
#: space between), seconds and a fraction optional, then optionally a UTC offset.
INSTANT_FORM = re.compile(
    r"^[0-9]{4}-[0-9]{2}-[0-9]{2}"
    r"([T ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]{1,9})?)?)?"
    r"(Z|[+-][0-9]{2}:?[0-9]{2})?$"
)
#: What a message says is accepted.
ACCEPTED_INSTANTS = (
    "accepted: ISO 8601 such as 2026-03-09 (midnight), 2026-03-09T09:00, 2026-03-09T09:00:30 "
    "or 2026-03-09T09:00:30.5, optionally followed by a UTC offset (Z, -03:00 or -0300); "
    "without an offset the time is local to the series' zone"
)


def parse_instant(text: str | dt.datetime, *, tz: str | None = None) -> pd.Timestamp:
    """Parse an ISO 8601 instant strictly; a naive value is read as local time in ``tz``.

    Only the forms of :data:`INSTANT_FORM` are read (``2026-03-09``, ``2026-03-09T09:00``,
    ``2026-03-09 09:00:30.5``, each optionally with ``Z``, ``-03:00`` or ``-0300``): anything
    else (``05/04/2026``, ``27/04/2026``, ``April 27 2026 9am``) is refused rather than guessed.
    A local time that daylight saving skips or repeats is refused too: give an offset.

    Examples
    --------
    >>> parse_instant("2026-03-09T09:00", tz="America/Halifax").isoformat()
    '2026-03-09T09:00:00-03:00'
    >>> parse_instant("05/04/2026", tz="UTC")
    Traceback (most recent call last):
    ...
    models.exceptions.WindowError: time '05/04/2026' is not an ISO 8601 date-time; accepted: ...
    """
    if isinstance(text, str):
        if not INSTANT_FORM.match(text.strip()):
            raise WindowError(
                f"time {_short(text)} is not an ISO 8601 date-time; {ACCEPTED_INSTANTS}"
            )
        text = text.strip()
    elif not isinstance(text, dt.datetime):
        raise WindowError(f"time {_short(text)} is not an ISO 8601 date-time; {ACCEPTED_INSTANTS}")
    try:
        stamp = pd.Timestamp(text)
    except OutOfBoundsDatetime as exc:
        raise WindowError(
            f"time {text!r} is outside the dates this service can represent (1678 to 2261)"
        ) from exc
    except (ValueError, TypeError) as exc:
        raise WindowError(
            f"time {text!r} is not a valid calendar date and time; {ACCEPTED_INSTANTS}"
        ) from exc
    if stamp is pd.NaT:
        raise WindowError(f"time {text!r} is not an ISO 8601 date-time; {ACCEPTED_INSTANTS}")
    if stamp.tzinfo is None:
        if tz is None:
            raise WindowError(
                f"time {text!s} has no UTC offset and no zone was given; add an offset "
                "(e.g. 2026-03-09T09:00-03:00) or a zone"
            )
        check_zone(tz)
        try:
            stamp = stamp.tz_localize(tz, nonexistent="raise", ambiguous="raise")
        except Exception as exc:  # pandas raises NonExistentTimeError / AmbiguousTimeError
            raise WindowError(
                f"local time {text!s} in {tz} does not exist or is ambiguous (daylight-saving "
                "change); give a UTC offset"
            ) from exc
    return stamp


def _short(value: object) -> str:
    """``repr`` of a value for a message, cut when very long."""
    text = repr(value)
    return text if len(text) <= 60 else f"{text[:40]}...{text[-10:]} ({len(text)} characters)"


_DAYS_STEP = re.compile(r"^\s*[0-9]+\s*d\s*$")


def parse_step(text: str) -> pd.Timedelta:
    """Parse a window step such as ``15min``, ``30min``, ``1h`` or ``1d`` (whole minutes).

    Examples
    --------
    >>> parse_step("1d") == pd.Timedelta(days=1)
    True
    """
    if isinstance(text, str) and _DAYS_STEP.match(text):
        text = text.strip()[:-1] + "D"  # pandas deprecates the lowercase day unit
    try:
        step = pd.Timedelta(text)
    except (ValueError, TypeError) as exc:
        raise WindowError(f"step {text!r} is not a duration like 15min, 1h or 1d") from exc
    if step <= pd.Timedelta(0) or step % pd.Timedelta(minutes=1) != pd.Timedelta(0):
        raise WindowError(f"step {text!r} must be a positive whole number of minutes")
    return step


def split_range(
    start: pd.Timestamp, end: pd.Timestamp, step: pd.Timedelta | None
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Cut ``[start, end)`` into consecutive windows of ``step`` (the last may be shorter)."""
    if end <= start:
        raise WindowError(
            f"window end {end.isoformat()} is not after its start {start.isoformat()}"
        )
    if step is None:
        return pd.DatetimeIndex([start]), pd.DatetimeIndex([end])
    starts = pd.date_range(start, end, freq=step, inclusive="left")
    ends = pd.DatetimeIndex(starts[1:].append(pd.DatetimeIndex([end])))
    return starts, ends


def _check_windows(
    posterior: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    horizon_days: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Refuse windows outside what ``posterior`` answers; their starts and ends in nanoseconds."""
    if len(starts) != len(ends):
        raise WindowError(f"{len(starts)} window starts but {len(ends)} ends")
    if len(starts) == 0:
        raise WindowError("no windows requested; give at least one start and end")
    if starts.tz is None or ends.tz is None:
        raise WindowError("window times must carry a UTC offset or zone")
    s_ns, e_ns = starts.as_unit("ns").asi8, ends.as_unit("ns").asi8
    bad = np.flatnonzero(e_ns <= s_ns)
    if bad.size:
        i = int(bad[0])
        raise WindowError(
            f"window {i}: end {ends[i].isoformat()} is not after start {starts[i].isoformat()}",
            window=i,
        )
    first, limit = posterior.memo(
        f"window-bounds-{horizon_days}", lambda: _window_bounds(posterior, horizon_days)
    )
    early = np.flatnonzero(s_ns < first.value)
    if early.size:
        i = int(early[0])
        raise WindowError(
            f"window {i} starts {starts[i].isoformat()}, before the history begins "
            f"({first.isoformat()}); windows must start on or after it",
            window=i,
        )
    late = np.flatnonzero(e_ns > limit.value)
    if late.size:
        i = int(late[0])
        raise WindowError(
            f"window {i} ends {ends[i].isoformat()}, beyond the forecast horizon of {horizon_days} "
            f"days after the history ({limit.isoformat()})",
            window=i,
        )
    return s_ns, e_ns


def _window_bounds(
    posterior: CompactPosterior, horizon_days: int
) -> tuple[pd.Timestamp, pd.Timestamp]:
    """The first instant of the history and the latest window end, local midnights."""
    cal = posterior.calendar
    first = pd.Timestamp(cal.first_day).tz_localize(
        cal.tz, nonexistent="shift_forward", ambiguous=True
    )
    limit_day = posterior.history_end + dt.timedelta(days=horizon_days)
    limit = pd.Timestamp(limit_day).tz_localize(cal.tz, nonexistent="shift_forward", ambiguous=True)
    return first, limit


def expected_counts(
    posterior: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    horizon_days: int = MAX_HORIZON_DAYS,
) -> np.ndarray:
    """Expected count Λ per draw and window, shape ``(draw, window)`` (Fortran-ordered).

    Windows are grouped into clusters of overlapping or touching spans, each laid on the model's
    bin grid in blocks, so memory stays bounded however far apart or long the windows are.
    """
    s_ns, e_ns = _check_windows(posterior, starts, ends, horizon_days)
    bin_ns = posterior.calendar.bin_minutes * _NS_PER_MINUTE
    order = np.argsort(s_ns, kind="stable")
    result = np.empty((len(starts), posterior.n_draws))
    cluster: list[int] = []
    cluster_end = -1
    for i in order:
        if cluster and s_ns[i] > cluster_end:
            _integrate_cluster(posterior, np.asarray(cluster), s_ns, e_ns, bin_ns, result)
            cluster = []
        cluster.append(int(i))
        cluster_end = max(cluster_end, int(e_ns[i])) if len(cluster) > 1 else int(e_ns[i])
    _integrate_cluster(posterior, np.asarray(cluster), s_ns, e_ns, bin_ns, result)
    # A (draw, window) view that keeps each window's draws contiguous, as the mixture wants them.
    return result.T


def _integrate_cluster(
    posterior: CompactPosterior,
    members: np.ndarray,
    s_ns: np.ndarray,
    e_ns: np.ndarray,
    bin_ns: int,
    out: np.ndarray,
) -> None:
    cal = posterior.calendar
    lo, hi = int(s_ns[members].min()), int(e_ns[members].max())
    table = posterior.bin_table
    if not table.covers(lo, hi):
        # Beyond the cached horizon (a caller-set longer horizon): lay the days out afresh.
        _, _, days, _ = local_features(
            pd.DatetimeIndex(np.array([lo, hi - 1], dtype="datetime64[ns]")).tz_localize("UTC"),
            tz=cal.tz,
            bin_minutes=cal.bin_minutes,
        )
        table = BinTable.build(
            cal, posterior.opening, days[0].astype(dt.date), (days[1] + 1).astype(dt.date)
        )
    span = table.span(lo, hi)
    edges = table.edges[span]
    dow, slot, day = table.dow[span], table.slot[span], table.day[span]
    years, holiday, open_share = table.years[span], table.holiday[span], table.open_share[span]
    latent = posterior.latent_by_day(int(day.max()))
    bin_hours = cal.bin_minutes / 60.0
    # Work bin-major, (bin, draw): every gather below then reads whole contiguous rows.
    # Every window start and end is an "endpoint" whose cumulative integral we need: the bins
    # before it, plus the open part of its own bin before it (a bin's rate applies only to its
    # open minutes, so a window inside closed time gets exactly zero).
    points = np.concatenate([s_ns[members], e_ns[members]])
    index = np.clip(np.searchsorted(edges, points, side="right") - 1, 0, len(edges) - 1)
    open_before = table.open_share_before(index + (span.start or 0), points)
    n = len(members)
    offset = np.zeros(posterior.n_draws)
    week = posterior.week_by_cell
    draws = posterior.as_float64
    trend = draws["trend"][None, :]
    holiday_effect = draws["holiday_effect"][None, :]
    holiday_finite = bool(np.isfinite(holiday_effect).all())
    named = posterior.holiday_deviations(table.holiday_names)
    holiday_index = None
    if named is not None and table.holiday_index is not None:
        holiday_index = table.holiday_index[span]
    spec = posterior.spec
    phase = table.phase[span]
    if spec.annual_harmonics:
        draws_annual = np.asarray(posterior.annual, dtype=np.float64).T  # (term, draw)
    if spec.within_day:
        within_basis = within_day_basis(spec.slots_per_day, spec.within_day)
    for b0 in range(0, len(edges), _BLOCK_BINS):
        b1 = min(b0 + _BLOCK_BINS, len(edges))
        block = slice(b0, b1)
        # week + trend + holiday + latent, added in that order; a block without holidays skips
        # adding holiday x effect, which is then exactly zero (the effect draws being finite).
        log_rate = week[dow[block], slot[block]]
        log_rate += years[block, None] * trend
        if not holiday_finite or holiday[block].any():
            log_rate += holiday[block, None] * holiday_effect
            if named is not None and holiday_index is not None:
                on = np.flatnonzero(holiday_index[block] >= 0)
                log_rate[on] += named[holiday_index[block][on]]
        log_rate += latent[day[block]]
        if spec.annual_harmonics:
            log_rate += annual_basis(phase[block], spec.annual_harmonics) @ draws_annual
        if spec.within_day:
            days, first_row = np.unique(day[block], return_inverse=True)
            weights = posterior.within_by_day(days)  # (day, term, draw)
            shape = within_basis[slot[block]]  # (bin, term)
            for term in range(spec.within_day):  # one (bin, draw) temporary at a time
                log_rate += shape[:, term, None] * weights[first_row, term]
        here = np.flatnonzero((index >= b0) & (index < b1))
        local = index[here] - b0
        rate = np.exp(log_rate, out=log_rate)
        # running[k] is the integral up to bin b0 + k: one sequential sum from the cluster's
        # start, so an endpoint after a bin's open part equals the next bin's start exactly.
        running = np.empty((b1 - b0 + 1, posterior.n_draws))
        running[0] = offset
        per_bin = np.multiply(rate, (open_share[block] * bin_hours)[:, None], out=running[1:])
        if spec.observation == "negbin":
            per_bin *= _cached_noise(posterior, edges[block] // bin_ns, slot[block])
        # The running sum row by row: the same sequential additions as np.cumsum along the
        # bins, which walks a (bin, draw) array column by column and costs over twice as much.
        for k in range(1, len(running)):
            np.add(running[k - 1], running[k], out=running[k])
        # An endpoint lies a share f of the way through its bin's open part: its integral is
        # running[l] (1 - f) + running[l + 1] f. Two gathers per endpoint instead of four, and
        # f is exactly 0 or 1 in closed time, so closed time adds exactly nothing.
        shares = open_share[block][local]
        f = np.divide(open_before[here], shares, out=np.zeros(len(here)), where=shares > 0)
        # Starts first: a window's end lies in the same block as its start or a later one, and
        # its row of ``out`` holds the integral up to its start until the end is reached.
        starting = np.searchsorted(here, n)
        _interpolate(running, local[:starting], f[:starting], members[here[:starting]], out)
        ending = slice(starting, None)
        _interpolate(running, local[ending], f[ending], members[here[ending] - n], out, end=True)
        offset = running[-1].copy()


def _interpolate(
    running: np.ndarray,
    local: np.ndarray,
    f: np.ndarray,
    rows: np.ndarray,
    out: np.ndarray,
    *,
    end: bool = False,
) -> None:
    """The integral ``c = running[local] (1 - f) + running[local + 1] f`` at endpoints.

    For window starts ``out[rows] = c``; for ends (``end``), ``out[rows] = max(c - out[rows],
    0)``, the window's integral: rounding could leave a window of closed bins a hair below zero,
    and counts are never negative. Done a tile of rows at a time, so that each tile's gathered
    rows stay in cache between the gathers, the products and the store (whole-array temporaries
    of every endpoint's draws cost more in memory traffic than the arithmetic).
    """
    if len(rows) == 0:
        return
    # An endpoint on a bin's edge (f exactly 0 or 1, as for windows cut on the bin grid) has
    # c = running[local + f] exactly: the product with the zero share is exactly zero when the
    # running sums are finite, which the last row (sums of non-negative terms) tells.
    whole = (f == 0.0) | (f == 1.0)
    if whole.any() and np.isfinite(running[-1]).all():
        edge = local[whole] + (f[whole] == 1.0)
        _at_edges(running, edge, rows[whole], out, end=end)
        partial = ~whole
        local, f, rows = local[partial], f[partial], rows[partial]
        if len(rows) == 0:
            return
    draws = running.shape[1]
    tile = min(_TILE_ROWS, len(rows))
    before, after = np.empty((tile, draws)), np.empty((tile, draws))
    for t0 in range(0, len(rows), tile):
        t1 = min(t0 + tile, len(rows))
        b, a = before[: t1 - t0], after[: t1 - t0]
        np.take(running, local[t0:t1] + 1, axis=0, out=a, mode="clip")
        a *= f[t0:t1, None]
        np.take(running, local[t0:t1], axis=0, out=b, mode="clip")
        b *= (1.0 - f[t0:t1])[:, None]
        b += a
        if end:
            b -= out[rows[t0:t1]]
            np.maximum(b, 0.0, out=b)
        out[rows[t0:t1]] = b


def _at_edges(
    running: np.ndarray, edge: np.ndarray, rows: np.ndarray, out: np.ndarray, *, end: bool
) -> None:
    """:func:`_interpolate` for endpoints on bin edges: ``c = running[edge]``."""
    if not end:
        out[rows] = running[edge]
        return
    tile = min(_TILE_ROWS, len(rows))
    buffer = np.empty((tile, running.shape[1]))
    for t0 in range(0, len(rows), tile):
        t1 = min(t0 + tile, len(rows))
        c = np.take(running, edge[t0:t1], axis=0, out=buffer[: t1 - t0], mode="clip")
        c -= out[rows[t0:t1]]
        np.maximum(c, 0.0, out=c)
        out[rows[t0:t1]] = c


def _cached_noise(
    posterior: CompactPosterior, bin_ids: np.ndarray, slots: np.ndarray
) -> np.ndarray:
    """Gamma noise of each bin, ``(bin, draw)``, from the version's bin-noise cache.

    A bin's noise is fixed by the version seed and the bin's index, so it is computed once (the
    gamma quantiles cost about a millisecond a bin for 2,000 draws) and kept for the
    :data:`NOISE_CACHE_BINS` most recently used bins of each loaded version.
    """
    lock, cache = posterior.noise_cache
    out = np.empty((len(bin_ids), posterior.n_draws))
    with lock:
        missing, found, columns = [], [], []
        for j, bin_id in enumerate(bin_ids.tolist()):
            column = cache.get(bin_id)
            if column is None:
                missing.append(j)
            else:
                cache.move_to_end(bin_id)
                found.append(j)
                columns.append(column)
    if columns:  # one conversion to float64 for all cached bins, not one per bin
        out[found] = np.stack(columns)
    if missing:
        rows = np.asarray(missing)
        # Rounded to float32 as stored, so a bin's noise is the same computed or cached.
        fresh = _bin_noise(posterior, bin_ids[rows], slots[rows]).T.astype(np.float32)
        out[rows] = fresh
        with lock:
            for j, column in zip(rows.tolist(), fresh, strict=True):
                cache[int(bin_ids[j])] = column
            while len(cache) > NOISE_CACHE_BINS:
                cache.popitem(last=False)
    return out


def _bin_noise(posterior: CompactPosterior, bin_ids: np.ndarray, slots: np.ndarray) -> np.ndarray:
    """Gamma(k, k) rate multipliers, shape ``(draw, bin)``, fixed per version and bin.

    ``k`` is the draw's dispersion for the bin's slot of the day.
    """
    if posterior.dispersion is None:
        raise InputError("a negative binomial posterior has no dispersion draws")
    shapes = np.asarray(posterior.dispersion, dtype=np.float64)[:, slots]
    poisson = ~(shapes < _POISSON_DISPERSION)
    shapes = np.where(poisson, 1.0, shapes)
    draws = posterior.n_draws
    levels = np.empty(shapes.shape)
    for j, bin_id in enumerate(bin_ids.tolist()):
        # Bins before 1970 have negative ids; SeedSequence wants non-negative integers.
        entropy = [posterior.seed, _NOISE_STREAM, bin_id % 2**64]
        rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(entropy)))
        levels[:, j] = (rng.permutation(draws) + rng.random(draws)) / draws
    noise = special.gammaincinv(shapes, levels) / shapes
    noise[poisson] = 1.0
    return np.asarray(noise)


class ForecastRow(TypedDict):
    """Predictive count distribution of one window: the one definition of a forecast row.

    ``start``, ``end``: the window ``[start, end)``, ISO 8601 in the series' zone. ``mean``,
    ``sd``: predictive mean and standard deviation of the count. ``p_zero``: P(N = 0).
    ``intervals``: level -> ``[low, high]``, both inclusive, central, holding at least the level.
    ``quantiles``: level -> the smallest count k with P(N <= k) >= level (exact). ``at_least``:
    threshold k -> P(N >= k), present only when thresholds were asked for.
    """

    start: str
    end: str
    mean: float
    sd: float
    p_zero: float
    intervals: dict[str, list[int]]
    quantiles: dict[str, int]
    at_least: NotRequired[dict[str, float]]


@dataclass(frozen=True)
class Forecast:
    """Predictive summaries for a list of windows (and optionally their total)."""

    starts: pd.DatetimeIndex
    ends: pd.DatetimeIndex
    summary: MixtureSummary
    tz: str
    total: MixtureSummary | None = None

    def rows(self) -> list[ForecastRow]:
        """One JSON-ready dict per window."""
        return _rows(self.summary, self.starts, self.ends, self.tz)

    def total_row(self) -> ForecastRow | None:
        """The total over all windows, or None if not requested."""
        if self.total is None:
            return None
        return _rows(self.total, self.starts[:1], self.ends[-1:], self.tz)[0]


def _rows(
    summary: MixtureSummary, starts: pd.DatetimeIndex, ends: pd.DatetimeIndex, tz: str
) -> list[ForecastRow]:
    # Every column is turned into Python values once (``tolist``), never by indexing per window.
    start_text, end_text = iso_local(starts, tz), iso_local(ends, tz)
    means, sds, zeros = summary.mean.tolist(), summary.sd.tolist(), summary.p_zero.tolist()
    intervals = [
        (_key(level), lo.tolist(), hi.tolist()) for level, (lo, hi) in summary.intervals.items()
    ]
    quantiles = [(_key(q), v.tolist()) for q, v in summary.quantiles.items()]
    tails = [(str(k), p.tolist()) for k, p in summary.at_least.items()]
    rows = []
    for i in range(len(start_text)):
        row: ForecastRow = {
            "start": start_text[i],
            "end": end_text[i],
            "mean": means[i],
            "sd": sds[i],
            "p_zero": zeros[i],
            "intervals": {key: [lo[i], hi[i]] for key, lo, hi in intervals},
            "quantiles": {key: v[i] for key, v in quantiles},
        }
        if tails:
            row["at_least"] = {key: p[i] for key, p in tails}
        rows.append(row)
    return rows


def iso_local(instants: pd.DatetimeIndex, tz: str) -> list[str]:
    """ISO 8601 texts of ``instants`` in the zone ``tz``, as ``Timestamp.isoformat`` gives them.

    A few whole-second instants are formatted by the standard library, one by one; many
    whole-second instants at whole-minute offsets (every window the service cuts) all at once by
    numpy; anything else (fractions of a second, offsets in seconds) is left to pandas. ``tz`` is
    an IANA zone name, read through zoneinfo as pandas reads it.

    Examples
    --------
    >>> iso_local(pd.DatetimeIndex(["2026-03-08T07:30Z", "2026-03-08T08:30Z"]), "America/Chicago")
    ['2026-03-08T01:30:00-06:00', '2026-03-08T03:30:00-05:00']
    """
    utc_ns = instants.as_unit("ns").asi8
    if len(utc_ns) <= _FEW_INSTANTS and not np.any(utc_ns % 10**9):
        # A few instants: the standard library is quicker than setting up the vectorised pass
        # (pandas keeps zones as zoneinfo objects, so both read the same zone rules).
        zone = zoneinfo.ZoneInfo(tz)
        return [dt.datetime.fromtimestamp(ns // 10**9, zone).isoformat() for ns in utc_ns.tolist()]
    local = instants.tz_convert(tz)
    wall_ns = local.tz_localize(None).as_unit("ns").asi8
    offset_s = (wall_ns - utc_ns) // 10**9
    if np.any(wall_ns % 10**9) or np.any(offset_s % 60):
        return [stamp.isoformat() for stamp in local]
    walls = np.datetime_as_string((wall_ns // 10**9).astype("datetime64[s]"), unit="s").tolist()
    minutes = offset_s // 60
    signs = np.where(minutes < 0, "-", "+")
    hours, mins = np.divmod(np.abs(minutes), 60)
    names: dict[tuple[str, int, int], str] = {}
    texts = []
    for wall, sign, hour, minute in zip(
        walls, signs.tolist(), hours.tolist(), mins.tolist(), strict=True
    ):
        key = (sign, hour, minute)
        suffix = names.get(key)
        if suffix is None:
            suffix = names[key] = f"{sign}{hour:02d}:{minute:02d}"
        texts.append(wall + suffix)
    return texts


def _key(value: float) -> str:
    return format(value, "g")


def forecast(
    posterior: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    levels: Sequence[float] = DEFAULT_LEVELS,
    quantiles: Sequence[float] = (),
    at_least: Sequence[int] = (),
    total: bool = False,
    horizon_days: int = MAX_HORIZON_DAYS,
) -> Forecast:
    """Predictive count distribution for each window ``[starts[i], ends[i])``.

    Parameters
    ----------
    posterior
        Compact posterior of one series version.
    starts, ends
        Tz-aware window bounds.
    levels
        Central interval levels in (0, 1).
    quantiles
        Quantile levels in (0, 1); reported exactly from the mixture CDF.
    at_least
        Thresholds k for P(N >= k).
    total
        Also summarise the total over all windows (which must not overlap), from the same draws.
    horizon_days
        Latest allowed window end, in days after the history.
    """
    lam = expected_counts(posterior, starts, ends, horizon_days=horizon_days)
    summary = summarise(
        lam, quantiles=tuple(quantiles), levels=tuple(levels), at_least=tuple(at_least)
    )
    total_summary = None
    if total:
        s_ns, e_ns = starts.as_unit("ns").asi8, ends.as_unit("ns").asi8
        order = np.argsort(s_ns)
        if np.any(s_ns[order][1:] < e_ns[order][:-1]):
            raise InputError("a total over windows needs windows that do not overlap")
        total_summary = summarise(
            lam.sum(axis=1, keepdims=True),
            quantiles=tuple(quantiles),
            levels=tuple(levels),
            at_least=tuple(at_least),
        )
    return Forecast(
        starts=starts, ends=ends, summary=summary, tz=posterior.calendar.tz, total=total_summary
    )
