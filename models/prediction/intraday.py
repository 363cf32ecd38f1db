"""Intraday update: revise today's and later days' forecast from today's counts so far.

Model
-----
For draw ``d`` the expected count in a window of day ``t`` is ``mu_d(window) exp(z_t)``, with
``mu_d`` the draw's rate without the daily latent deviation and ``z`` the AR(1) of
:mod:`models.prediction.posterior`: ``z_t = rho_d z_{t-1} + sd_d eps``. Today lies ``k >= 1`` days after the
last history day, so before seeing today ``z_t ~ N(m_d, v_d)`` with ``m_d = rho_d^k z_last`` and
``v_d = sd_d^2 (1 + rho_d^2 + ... + rho_d^(2(k-1)))``.

Today's observed windows ``i`` (counts ``y_i``, expected ``mu_di exp(z)`` each) give the likelihood
``prod_i Poisson(y_i; mu_di e^z)``, which depends on ``z`` only through ``Y = sum y_i`` and
``M_d = sum mu_di``: ``exp(Y z - M_d e^z)``. The exact update of the pair (draw, z) is then

1. weight each draw by its marginal likelihood
   ``p(y | d) = prod_i mu_di^y_i / y_i! x integral N(z; m_d, v_d) exp(Y z - M_d e^z) dz``
   (the integral on the grid of step 2), and draw an equal-weight set by systematic resampling
   (Kitagawa 1996); the effective sample size ``(sum w)^2 / sum w^2`` says how much the draws
   were thinned. When every draw has the same weight the set is kept as it is;
2. per kept draw, sample ``z`` from its exact one-dimensional conditional
   ``N(z; m_d, v_d) exp(Y z - M_d e^z)`` (log-concave) by inverse CDF on a fine grid around its
   mode (1025 points, the trapezoid CDF, widened until the density at both ends is below
   ``e^-40`` of the mode);
3. days after today continue the AR(1) from the sampled ``z`` with seeded innovations.

Without a latent term (or a draw with ``sd = 0``) step 2 is void and step 1 alone is the update:
importance weights over draws with systematic resampling. The result is a set of ``(draw,
window)`` expected counts with equal weights, to summarise with :func:`models.prediction.mixture.summarise`.

For a series fitted with negative binomial bins, ``mu_d`` carries the fixed per-bin gamma noise of
:func:`models.prediction.windows.expected_counts`; that noise is not itself updated by today's counts, so the
update is then approximate (exact for Poisson series).

With the within-day shape term
------------------------------
A series fitted with ``within_day = K`` has today's log rate ``log mu_db + z + g_b' c`` in bin
``b``, with ``g_b`` the K within-day cosines at the bin's slot and shape weights
``c ~ N(0, diag(s_d^2))`` independent of ``z``. The morning then also says which *shape* today
has, so a busy morning need not mean a busy evening. The unknowns ``x = (z, c)`` are no longer
one-dimensional, and the update is done by importance sampling per draw:

1. per draw, find the mode of ``log p(x | d) + log p(y | x, d)`` by Fisher scoring in whitened
   coordinates (the observed windows are cut at bin edges, so each piece has one slot), and take
   a Gaussian proposal centred there with the inverse Fisher information widened by
   ``_PROPOSAL_WIDEN``;
2. draw ``_PROPOSALS`` candidates per draw; their importance weights give each draw's marginal
   likelihood (their mean) for the systematic resampling of draws, and within a kept draw one
   candidate is picked with probability proportional to its weight (self-normalised importance
   sampling: consistent as the number of candidates grows; measured against quadrature in the
   tests);
3. today's remaining windows use the picked ``(z, c)`` bin by bin; later days follow the AR(1)
   from ``z`` and draw their own shapes as in any forecast.


Length: about 550 lines of code, over the ~450 the contributor guide aims for: the exact grid
update and the importance-sampling update share their likelihoods and their resampling, and
reading them side by side is how their agreement is checked.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
import numpy.typing as npt
import pandas as pd
from scipy import special

from models.exceptions import CountError, InputError, WindowError
from models.prediction.posterior import CompactPosterior, weekday_loading
from models.prediction.windows import MAX_HORIZON_DAYS, expected_counts
from models.ratemodel.bases import within_day_basis

__all__ = ["IntradayUpdate", "update_forecast"]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

_GRID_POINTS = 1025
# A grid end is far enough out once the log density there is this far below the mode.
_LOG_DROP = 40.0
_DRAW_BLOCK = 512
_MAX_WIDENINGS = 12
#: Candidates per draw, and how much wider than the Laplace approximation they are drawn.
_PROPOSALS = 64
_PROPOSAL_WIDEN = 1.3
_SCORING_STEPS = 50
# Beyond this a negative binomial dispersion is a Poisson count (as in models.prediction.windows).
_POISSON_K = 1e8


@dataclass(frozen=True)
class IntradayUpdate:
    """Updated expected counts and what the update did.

    Attributes
    ----------
    lam
        Updated expected count per (draw, window), equal weights.
    day
        The local date whose counts were used.
    observed_total
        Arrivals observed today.
    expected_before
        Predictive mean of the observed total before the update.
    draw_index
        Posterior draw behind each row of ``lam`` (after resampling).
    effective_sample_size
        ``(sum w)^2 / sum w^2`` of the draw weights (equals the number of draws when the counts
        say nothing to tell the draws apart).
    latent
        Today's latent deviation per row after the update, or ``None`` without a latent term.
    shape
        Today's within-day shape weights per row ``(row, within_term)`` after the update, or
        ``None`` without that term.
    """

    lam: FloatArray
    day: dt.date
    observed_total: int
    expected_before: float
    draw_index: IntArray
    effective_sample_size: float
    latent: FloatArray | None
    shape: FloatArray | None = None


# --------------------------------------------------------------------------- inputs


def _local_day(stamps: pd.DatetimeIndex, tz: str) -> np.ndarray:
    return np.asarray(stamps.tz_convert(tz).date)


def _midnight(day: dt.date, tz: str) -> pd.Timestamp:
    # As models.ratemodel.binning lays days: a midnight that does not exist moves forward.
    naive = pd.DatetimeIndex([pd.Timestamp(day)])
    return naive.tz_localize(tz, nonexistent="shift_forward", ambiguous=True)[0]


def _check_observed(
    posterior: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    counts: npt.ArrayLike,
) -> tuple[IntArray, dt.date]:
    tz = posterior.calendar.tz
    if len(starts) == 0:
        raise InputError("no observed windows; give at least one window of today with its count")
    if len(starts) != len(ends):
        raise WindowError(f"{len(starts)} observed window starts but {len(ends)} ends")
    if starts.tz is None or ends.tz is None:
        raise WindowError("observed window times must carry a UTC offset or zone")
    values = np.asarray(counts, dtype=np.float64)
    if values.shape != (len(starts),):
        raise CountError(
            f"{values.size} observed counts for {len(starts)} observed windows; give one each"
        )
    bad = np.flatnonzero(~np.isfinite(values) | (values < 0) | (values != np.round(values)))
    if bad.size:
        i = int(bad[0])
        raise CountError(f"observed count {i} is {values[i]!r}; allowed: whole numbers >= 0")
    s_ns, e_ns = starts.as_unit("ns").asi8, ends.as_unit("ns").asi8
    reversed_ = np.flatnonzero(e_ns <= s_ns)
    if reversed_.size:
        i = int(reversed_[0])
        raise WindowError(
            f"observed window {i}: end {ends[i].isoformat()} is not after start "
            f"{starts[i].isoformat()}"
        )
    order = np.argsort(s_ns)
    if np.any(s_ns[order][1:] < e_ns[order][:-1]):
        raise WindowError("observed windows overlap; each arrival must be counted once")
    first_days = _local_day(starts, tz)
    last_days = _local_day(ends - pd.Timedelta(1, "ns"), tz)
    days = set(first_days) | set(last_days)
    if len(days) != 1:
        listing = ", ".join(sorted(str(d) for d in days))
        raise WindowError(
            f"observed windows span several local days ({listing} in {tz}); the update uses one "
            "day's counts (today's)"
        )
    today: dt.date = first_days[0]
    if today < posterior.history_end:
        raise WindowError(
            f"observed day {today} is inside the fitted history (which ends before "
            f"{posterior.history_end}); its counts are already in the fit"
        )
    return values.astype(np.int64), today


# --------------------------------------------------------------------------- pieces by day


def _pieces_by_day(
    starts: pd.DatetimeIndex, ends: pd.DatetimeIndex, tz: str
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex, IntArray, np.ndarray]:
    """Cut windows at local midnights: piece starts, ends, owning window and local date."""
    piece_starts: list[pd.Timestamp] = []
    piece_ends: list[pd.Timestamp] = []
    owner: list[int] = []
    dates: list[dt.date] = []
    first = _local_day(starts, tz)
    last = _local_day(ends - pd.Timedelta(1, "ns"), tz)
    for i in range(len(starts)):
        day = first[i]
        start = starts[i]
        while day < last[i]:
            cut = _midnight(day + dt.timedelta(days=1), tz)
            piece_starts.append(start)
            piece_ends.append(cut)
            owner.append(i)
            dates.append(day)
            start, day = cut, day + dt.timedelta(days=1)
        piece_starts.append(start)
        piece_ends.append(ends[i])
        owner.append(i)
        dates.append(day)
    return (
        pd.DatetimeIndex(piece_starts).tz_convert("UTC"),
        pd.DatetimeIndex(piece_ends).tz_convert("UTC"),
        np.asarray(owner, dtype=np.int64),
        np.asarray(dates, dtype="datetime64[D]"),
    )


def _without_latent(posterior: CompactPosterior) -> CompactPosterior:
    """The same posterior with every daily deviation at zero: the ``mu_d`` of the notes."""
    return replace(
        posterior,
        latent=np.zeros_like(posterior.latent),
        latent_loading=None,
        spec=replace(posterior.spec, latent_daily=False, latent_by_weekday=False),
    )


# --------------------------------------------------------------------------- the 1-D update


def _log_density(
    z: FloatArray, m: FloatArray, v: FloatArray, total: int, mass: FloatArray
) -> FloatArray:
    """``log N(z; m, v) + Y z - M e^z`` (v > 0), broadcasting ``m, v, mass`` as columns."""
    return -0.5 * (z - m) ** 2 / v - 0.5 * np.log(2.0 * math.pi * v) + total * z - mass * np.exp(z)


def _mode(m: FloatArray, v: FloatArray, total: int, mass: FloatArray) -> FloatArray:
    """Root of ``g(z) = (z - m) / v + M e^z - Y``, increasing and convex in ``z``.

    Newton's method started right of the root of a convex increasing function moves down to it
    without overshooting. The start ``min(m + v Y, max(m, log(Y / M)))`` is right of the root.
    """
    with np.errstate(divide="ignore"):
        log_ratio = np.log(total) - np.log(mass) if total > 0 else np.full(m.shape, -np.inf)
    z = np.minimum(m + v * total, np.maximum(m, log_ratio))
    for _ in range(200):
        e = mass * np.exp(z)
        step = ((z - m) / v + e - total) / (1.0 / v + e)
        z = z - step
        if np.all(np.abs(step) <= 1e-12 * np.maximum(1.0, np.abs(z))):
            break
    return z


def _conditional(
    m: FloatArray, v: FloatArray, total: int, mass: FloatArray
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Grid, CDF on it, and log normaliser of each draw's conditional of ``z`` (v > 0)."""
    mode = _mode(m, v, total, mass)
    top = _log_density(mode, m, v, total, mass)
    spread = 1.0 / np.sqrt(1.0 / v + mass * np.exp(mode))  # Laplace scale at the mode
    left, right = 12.0 * spread, 12.0 * spread
    for _ in range(_MAX_WIDENINGS):
        short_left = top - _log_density(mode - left, m, v, total, mass) < _LOG_DROP
        short_right = top - _log_density(mode + right, m, v, total, mass) < _LOG_DROP
        if not (short_left.any() or short_right.any()):
            break
        left = np.where(short_left, 2.0 * left, left)
        right = np.where(short_right, 2.0 * right, right)
    u = np.linspace(0.0, 1.0, _GRID_POINTS)
    z = (mode - left)[:, None] + (left + right)[:, None] * u[None, :]
    density = np.exp(_log_density(z, m[:, None], v[:, None], total, mass[:, None]) - top[:, None])
    dz = (left + right) / (_GRID_POINTS - 1)
    cells = 0.5 * (density[:, 1:] + density[:, :-1]) * dz[:, None]
    cdf = np.concatenate([np.zeros((z.shape[0], 1)), np.cumsum(cells, axis=1)], axis=1)
    area = cdf[:, -1]
    return z, cdf / area[:, None], top + np.log(area)


def _sample_from(z: FloatArray, cdf: FloatArray, u: FloatArray) -> FloatArray:
    """Inverse CDF, linear within each grid cell."""
    cell = np.minimum((cdf < u[:, None]).sum(axis=1) - 1, z.shape[1] - 2)
    cell = np.maximum(cell, 0)
    rows = np.arange(z.shape[0])
    c0, c1 = cdf[rows, cell], cdf[rows, cell + 1]
    share = np.where(c1 > c0, (u - c0) / np.where(c1 > c0, c1 - c0, 1.0), 0.5)
    return z[rows, cell] + share * (z[rows, cell + 1] - z[rows, cell])


def _systematic(log_weight: FloatArray, rng: np.random.Generator) -> tuple[IntArray, float]:
    """Systematic resampling indices and the effective sample size of the weights."""
    n = log_weight.size
    finite = np.isfinite(log_weight)
    if not finite.any():
        raise InputError(
            "today's counts are impossible under every posterior draw (arrivals observed where "
            "the model expects none, e.g. in closed hours); check the windows and opening hours"
        )
    w = np.exp(log_weight - log_weight[finite].max())
    w[~finite] = 0.0
    ess = float(w.sum() ** 2 / (w**2).sum())
    if w.min() >= w.max() * (1.0 - 1e-12):
        return np.arange(n), float(n)  # nothing to choose between: keep every draw once
    cumulative = np.cumsum(w / w.sum())
    cumulative[-1] = 1.0
    positions = (rng.random() + np.arange(n)) / n
    return np.searchsorted(cumulative, positions, side="right").astype(np.int64), ess


# --------------------------------------------------------------------------- public


def update_forecast(
    posterior: CompactPosterior,
    observed_starts: pd.DatetimeIndex,
    observed_ends: pd.DatetimeIndex,
    observed_counts: npt.ArrayLike,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    seed: int | None = None,
    horizon_days: int = MAX_HORIZON_DAYS,
) -> IntradayUpdate:
    """Expected counts for ``[starts, ends)`` updated by today's observed counts.

    Parameters
    ----------
    posterior
        Compact posterior of the series.
    observed_starts, observed_ends, observed_counts
        Today's observed windows (tz-aware, within one local day after the history, not
        overlapping) and their arrival counts. Leave out periods not yet observed or missing.
    starts, ends
        Windows to forecast; they must start no earlier than today's local midnight.
    seed
        Seeds resampling, the latent draws and later days' innovations; default: the
        posterior's own seed, so the same inputs give the same answer.
    horizon_days
        Latest allowed window end, in days after the history.

    Returns
    -------
    IntradayUpdate
        ``lam`` has shape ``(draw, window)`` with equal weights: summarise it with
        :func:`models.prediction.mixture.summarise`.

    Raises
    ------
    InputError
        (or a subclass) on bad windows or counts, or counts that no draw can explain.
    """
    counts, today = _check_observed(posterior, observed_starts, observed_ends, observed_counts)
    tz = posterior.calendar.tz
    if len(starts) == 0:
        raise WindowError("no windows to forecast; give at least one start and end")
    if starts.tz is None or ends.tz is None:
        raise WindowError("window times must carry a UTC offset or zone")
    today_start = _midnight(today, tz)
    early = np.flatnonzero(starts.as_unit("ns").asi8 < today_start.value)
    if early.size:
        i = int(early[0])
        raise WindowError(
            f"window {i} starts {starts[i].isoformat()}, before today ({today_start.isoformat()}); "
            "an intraday update forecasts today and later days only"
        )
    rng = np.random.default_rng(posterior.seed if seed is None else seed)
    base = _without_latent(posterior)
    per_window = expected_counts(
        base, observed_starts, observed_ends, horizon_days=horizon_days
    )  # (draw, observed window): mu_di
    mass = per_window.sum(axis=1)
    total = int(counts.sum())
    shape_term = (special.xlogy(counts[None, :], per_window)).sum(axis=1)

    draws = posterior.n_draws
    day_index = (today - posterior.calendar.first_day).days
    ahead = day_index - (posterior.n_days - 1)
    latent_on = posterior.spec.latent_daily
    rho = posterior.latent_rho.astype(np.float64)
    sd = posterior.latent_sd.astype(np.float64)
    if latent_on:
        # Deviations are a weekday's loading times the AR(1) state (ones without loadings).
        load = weekday_loading(posterior, np.array([posterior.n_days - 1, day_index]))
        m = load[1] * rho**ahead * posterior.latent[:, -1].astype(np.float64) / load[0]
        power = rho**2
        # 1 + rho^2 + ... + rho^(2(k-1)), written to stay exact as rho^2 -> 1.
        terms = np.where(
            np.abs(1.0 - power) > 1e-8,
            (1.0 - power**ahead) / np.where(np.abs(1.0 - power) > 1e-8, 1.0 - power, 1.0),
            float(ahead),
        )
        v = (load[1] * sd) ** 2 * terms
    else:
        m, v = np.zeros(draws), np.zeros(draws)
    random = v > 0
    if posterior.spec.within_day or posterior.spec.observation == "negbin":
        return _update_by_sampling(
            posterior,
            observed_starts,
            observed_ends,
            counts,
            today,
            starts,
            ends,
            rng,
            horizon_days,
            level_mean=m,
            level_var=v,
        )

    log_evidence = total * m - mass * np.exp(m)  # exact where z is known (v = 0)
    varied = np.flatnonzero(random)
    for b0 in range(0, varied.size, _DRAW_BLOCK):
        rows = varied[b0 : b0 + _DRAW_BLOCK]
        log_evidence[rows] = _conditional(m[rows], v[rows], total, mass[rows])[2]
    index, ess = _systematic(shape_term + log_evidence, rng)

    chosen_z = m[index]
    pick = np.flatnonzero(random[index])
    u = rng.random(pick.size)
    for b0 in range(0, pick.size, _DRAW_BLOCK):
        rows = pick[b0 : b0 + _DRAW_BLOCK]
        source = index[rows]
        z, cdf, _ = _conditional(m[source], v[source], total, mass[source])
        chosen_z[rows] = _sample_from(z, cdf, u[b0 : b0 + _DRAW_BLOCK])

    lam = _updated_windows(
        base, starts, ends, index, chosen_z, rho[index], sd[index], today, rng, horizon_days,
        loading=_loading_from(posterior, today, index),
    )  # fmt: skip
    prior_scale = np.exp(m + 0.5 * v)
    return IntradayUpdate(
        lam=lam,
        day=today,
        observed_total=total,
        expected_before=float((mass * prior_scale).mean()),
        draw_index=index,
        effective_sample_size=ess,
        latent=chosen_z if latent_on else None,
    )


def _updated_windows(
    base: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    index: IntArray,
    today_z: FloatArray,
    rho: FloatArray,
    sd: FloatArray,
    today: dt.date,
    rng: np.random.Generator,
    horizon_days: int,
    *,
    loading: Callable[[int], FloatArray],
) -> FloatArray:
    tz = base.calendar.tz
    p_starts, p_ends, owner, dates = _pieces_by_day(starts, ends, tz)
    mu = expected_counts(base, p_starts, p_ends, horizon_days=horizon_days)[index]
    offset = (dates - np.datetime64(today, "D")).astype(np.int64)
    days_after = int(offset.max())
    path = _continue_path(today_z, rho, sd, days_after, rng, loading=loading(days_after))
    pieces = mu * np.exp(path[:, offset])
    out = np.zeros((index.size, len(starts)))
    np.add.at(out.T, owner, pieces.T)
    return out


# --------------------------------------------------------------------------- with the shape term


def _flat(posterior: CompactPosterior, *, noise: bool = True) -> CompactPosterior:
    """The posterior with no daily level and no within-day shape: per-bin ``mu_d`` for today.

    ``noise=False`` also drops the fixed per-bin gamma noise of a negative binomial series (the
    observed bins' likelihood integrates their noise out instead).
    """
    spec = replace(posterior.spec, latent_daily=False, latent_by_weekday=False, within_day=0)
    if not noise:
        spec = replace(spec, observation="poisson")
    return replace(
        posterior,
        latent=np.zeros_like(posterior.latent),
        latent_loading=None,
        within_day=None,
        within_day_sd=None,
        dispersion=posterior.dispersion if noise else None,
        spec=spec,
    )


def _pieces_by_bin(
    posterior: CompactPosterior, starts: pd.DatetimeIndex, ends: pd.DatetimeIndex
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex, IntArray, IntArray]:
    """Cut windows at the model's bin edges: piece starts, ends, owning window, slot of day."""
    table = posterior.bin_table
    s_ns, e_ns = starts.as_unit("ns").asi8, ends.as_unit("ns").asi8
    lows: list[np.ndarray] = []
    highs: list[np.ndarray] = []
    owner: list[np.ndarray] = []
    slots: list[np.ndarray] = []
    for i, (lo, hi) in enumerate(zip(s_ns.tolist(), e_ns.tolist(), strict=True)):
        if not table.covers(lo, hi):
            raise WindowError(
                f"window {i} ({starts[i].isoformat()} to {ends[i].isoformat()}) lies beyond the "
                "days an intraday update can reach"
            )
        span = table.span(lo, hi)
        edges = table.edges[span.start : span.stop + 1]
        lows.append(np.maximum(edges[:-1], lo))
        highs.append(np.minimum(edges[1:], hi))
        owner.append(np.full(len(edges) - 1, i, dtype=np.int64))
        slots.append(np.asarray(table.slot[span], dtype=np.int64))

    def stamps(parts: list[np.ndarray]) -> pd.DatetimeIndex:
        return pd.DatetimeIndex(np.concatenate(parts).astype("datetime64[ns]"), tz="UTC")

    return stamps(lows), stamps(highs), np.concatenate(owner), np.concatenate(slots)


@dataclass(frozen=True)
class _Observed:
    """Today's observed windows cut into bin pieces, for the sampling update.

    ``mu`` is ``(draw, piece)`` without level, shape or bin noise; ``design`` the ``(piece, p)``
    rows ``(1, g_b)`` (or ``g_b`` alone, or ``1`` alone); ``owner`` the ``(piece, window)``
    indicator; ``dispersion`` the ``(draw, piece)`` negative binomial k of each piece's slot, or
    None for Poisson counts.
    """

    mu: FloatArray
    design: FloatArray
    owner: FloatArray
    counts: FloatArray
    dispersion: FloatArray | None


def _log_likelihood(
    x: FloatArray, mu: FloatArray, obs: _Observed, dispersion: FloatArray | None
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Log likelihood of today's counts (terms free of the parameters dropped), per window.

    ``x`` is ``(..., p)`` and ``mu``, ``dispersion`` ``(..., piece)`` broadcasting against it.
    A Poisson window has mean ``M = sum_j mu_j exp(a_j' x)``. A negative binomial window has
    that mean and the dispersion matching its variance, ``k = M^2 / sum_j E_j^2 / k_j`` (exact
    for a one-bin window; a moment match for longer ones). Returns the log likelihood ``(...)``,
    and per window the mean ``M``, ``dl/dM`` and the Fisher information ``-E d2l/dM2``, plus the
    piece means ``E``.
    """
    with np.errstate(over="ignore"):
        pieces = mu * np.exp(x @ obs.design.T)
    means = pieces @ obs.owner
    y = obs.counts
    with np.errstate(divide="ignore", invalid="ignore"):
        loglik = special.xlogy(y, means) - means
        slope = np.where(means > 0, y / means - 1.0, -1.0)
        info = np.where(means > 0, 1.0 / means, 0.0)
        if dispersion is not None:
            k = means**2 / ((pieces**2 / dispersion) @ obs.owner)
            # A window of empty bins, or one whose dispersion is beyond any measurable noise,
            # is a Poisson count (as in models.prediction.windows); the NB form would only lose digits.
            negbin = np.isfinite(k) & (k > 0) & (k < _POISSON_K)
            k = np.where(negbin, k, 1.0)
            nb_loglik = (
                special.gammaln(y + k)
                - special.gammaln(k)
                + k * (np.log(k) - np.log(k + means))
                + special.xlogy(y, means)
                - special.xlogy(y, k + means)
            )
            loglik = np.where(negbin, nb_loglik, loglik)
            slope = np.where(negbin, k * (y - means) / (means * (means + k)), slope)
            info = np.where(negbin, k / (means * (means + k)), info)
    total = loglik.sum(axis=-1)
    return np.where(np.isnan(total), -np.inf, total), slope, info, pieces


def _laplace(
    prior_mean: FloatArray,
    prior_sd: FloatArray,
    mu: FloatArray,
    obs: _Observed,
    dispersion: FloatArray | None,
) -> tuple[FloatArray, FloatArray]:
    """Mode (whitened ``u``, ``x = m + sd u``) and whitened Fisher precision per draw.

    Fisher scoring on ``-|u|^2 / 2 + loglik``, each step halved until the objective does not
    fall; a window mean ``M(x)`` contributes ``grad M grad M' * info``.
    """
    draws, dim = prior_mean.shape
    u = np.zeros((draws, dim))
    eye = np.eye(dim)

    def objective(u_: FloatArray) -> FloatArray:
        x = prior_mean + prior_sd * u_
        return -0.5 * (u_**2).sum(axis=1) + _log_likelihood(x, mu, obs, dispersion)[0]

    def scoring(u_: FloatArray) -> tuple[FloatArray, FloatArray]:
        x = prior_mean + prior_sd * u_
        _, slope, info, pieces = _log_likelihood(x, mu, obs, dispersion)
        # d M_i / d x = sum over the window's pieces of E_j a_j: (draw, window, p).
        grad_mean = np.einsum("dj,jp,ji->dip", pieces, obs.design, obs.owner)
        gradient = -u_ + prior_sd * np.einsum("di,dip->dp", slope, grad_mean)
        fisher = np.einsum("dip,di,diq->dpq", grad_mean, info, grad_mean)
        return gradient, eye + prior_sd[:, :, None] * fisher * prior_sd[:, None, :]

    current = objective(u)
    for _ in range(_SCORING_STEPS):
        gradient, precision = scoring(u)
        step = np.linalg.solve(precision, gradient[:, :, None])[:, :, 0]
        scale = np.ones(draws)
        for _ in range(30):
            trial = objective(u + scale[:, None] * step)
            worse = ~(trial >= current - 1e-12)
            if not worse.any():
                break
            scale = np.where(worse, 0.5 * scale, scale)
        u = u + scale[:, None] * step
        current = objective(u)
        if np.all(np.abs(scale[:, None] * step) <= 1e-9):
            break
    return u, scoring(u)[1]


def _update_by_sampling(
    posterior: CompactPosterior,
    observed_starts: pd.DatetimeIndex,
    observed_ends: pd.DatetimeIndex,
    counts: IntArray,
    today: dt.date,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    rng: np.random.Generator,
    horizon_days: int,
    level_mean: FloatArray,
    level_var: FloatArray,
) -> IntradayUpdate:
    """The importance-sampling update of ``(z, c)`` described in the module notes."""
    spec = posterior.spec
    o_starts, o_ends, o_owner, o_slot = _pieces_by_bin(posterior, observed_starts, observed_ends)
    owner = np.zeros((len(o_owner), len(counts)))
    owner[np.arange(len(o_owner)), o_owner] = 1.0
    columns = []
    level = spec.latent_daily and bool(np.any(level_var > 0))
    if level:
        columns.append(np.ones((len(o_slot), 1)))
    if spec.within_day:
        columns.append(within_day_basis(spec.slots_per_day, spec.within_day)[o_slot])
    design = np.hstack(columns) if columns else np.zeros((len(o_slot), 0))
    dispersion = None
    if spec.observation == "negbin" and posterior.dispersion is not None:
        dispersion = np.asarray(posterior.dispersion, dtype=np.float64)[:, o_slot]
    obs = _Observed(
        mu=expected_counts(
            _flat(posterior, noise=False), o_starts, o_ends, horizon_days=horizon_days
        ),
        design=design,
        owner=owner,
        counts=counts.astype(np.float64),
        dispersion=dispersion,
    )
    draws, dim = posterior.n_draws, design.shape[1]
    prior_mean = np.zeros((draws, dim))
    sds = []
    if level:
        prior_mean[:, 0] = level_mean
        sds.append(np.sqrt(level_var)[:, None])
    if spec.within_day:
        sds.append(np.asarray(posterior.within_day_sd, dtype=np.float64))
    prior_sd = np.hstack(sds) if sds else np.zeros((draws, 0))

    log_weight = np.empty((draws, _PROPOSALS))
    candidates = np.empty((draws, _PROPOSALS, dim))
    for b0 in range(0, draws, _DRAW_BLOCK):
        rows = slice(b0, min(b0 + _DRAW_BLOCK, draws))
        mu = obs.mu[rows]
        k = None if obs.dispersion is None else obs.dispersion[rows]
        if dim == 0:  # nothing but the draws to reweight
            log_weight[rows] = _log_likelihood(np.zeros((mu.shape[0], 0)), mu, obs, k)[0][:, None]
            continue
        mode, precision = _laplace(prior_mean[rows], prior_sd[rows], mu, obs, k)
        # Proposal N(mode, widen^2 precision^-1), drawn as u = mode + widen * L'^-1 eps with
        # precision = L L' (Cholesky), so log q = -|eps|^2 / 2 + log det L - p log widen + const.
        chol = np.linalg.cholesky(precision)
        eps = rng.standard_normal((mode.shape[0], _PROPOSALS, dim))
        step = np.linalg.solve(np.swapaxes(chol, 1, 2)[:, None, :, :], eps[:, :, :, None])[..., 0]
        u = mode[:, None, :] + _PROPOSAL_WIDEN * step
        log_q = (
            -0.5 * (eps**2).sum(axis=2)
            + np.log(np.diagonal(chol, axis1=1, axis2=2)).sum(axis=1)[:, None]
            - dim * np.log(_PROPOSAL_WIDEN)
        )
        x = prior_mean[rows, None, :] + prior_sd[rows, None, :] * u
        noise_k = None if k is None else k[:, None, :]
        loglik = _log_likelihood(x, mu[:, None, :], obs, noise_k)[0]
        log_weight[rows] = loglik - 0.5 * (u**2).sum(axis=2) - log_q
        candidates[rows] = x
    top = np.max(log_weight, axis=1, keepdims=True)
    finite_top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        log_evidence = finite_top[:, 0] + np.log(np.exp(log_weight - finite_top).mean(axis=1))
    log_evidence = np.where(np.isfinite(top[:, 0]), log_evidence, -np.inf)
    index, ess = _systematic(log_evidence, rng)
    within = np.exp(log_weight[index] - finite_top[index])
    cumulative = np.cumsum(within, axis=1)
    picks = (cumulative < rng.random(index.size)[:, None] * cumulative[:, -1:]).sum(axis=1)
    chosen = candidates[index, np.minimum(picks, _PROPOSALS - 1)] if dim else None
    today_z = chosen[:, 0] if level and chosen is not None else level_mean[index]
    today_c = None
    if spec.within_day and chosen is not None:
        today_c = chosen[:, 1:] if level else chosen

    lam = _shaped_windows(
        posterior, starts, ends, index, today_z, today_c, today, rng, horizon_days
    )
    return IntradayUpdate(
        lam=lam,
        day=today,
        observed_total=int(counts.sum()),
        expected_before=_expected_before(posterior, observed_starts, observed_ends, horizon_days),
        draw_index=index,
        effective_sample_size=ess,
        latent=today_z if spec.latent_daily else None,
        shape=today_c,
    )


def _expected_before(
    posterior: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    horizon_days: int,
) -> float:
    """Predictive mean of today's observed total as published (before the update)."""
    return float(expected_counts(posterior, starts, ends, horizon_days=horizon_days).sum(1).mean())


def _shaped_windows(
    posterior: CompactPosterior,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    index: IntArray,
    today_z: FloatArray,
    today_c: FloatArray | None,
    today: dt.date,
    rng: np.random.Generator,
    horizon_days: int,
) -> FloatArray:
    """Today's pieces bin by bin with the picked ``(z, c)`` (``c`` None without the shape
    term); later days as published, with the AR(1) continued from ``z``. Unobserved bins keep
    their fixed gamma noise in a negative binomial series."""
    spec = posterior.spec
    tz = posterior.calendar.tz
    out = np.zeros((index.size, len(starts)))
    p_starts, p_ends, owner, dates = _pieces_by_day(starts, ends, tz)
    on_today = dates == np.datetime64(today, "D")
    if on_today.any():
        b_starts, b_ends, b_owner, b_slot = _pieces_by_bin(
            posterior, p_starts[on_today], p_ends[on_today]
        )
        mu = expected_counts(_flat(posterior), b_starts, b_ends, horizon_days=horizon_days)
        log_factor = np.repeat(today_z[:, None], len(b_slot), axis=1)
        if today_c is not None:
            log_factor += today_c @ within_day_basis(spec.slots_per_day, spec.within_day)[b_slot].T
        pieces = mu[index] * np.exp(log_factor)
        np.add.at(out.T, owner[on_today][b_owner], pieces.T)
    later = ~on_today
    if later.any():
        # Later days keep their own (seeded) shapes: the published posterior minus its level.
        base = _without_latent(posterior)
        mu = expected_counts(base, p_starts[later], p_ends[later], horizon_days=horizon_days)
        offset = (dates[later] - np.datetime64(today, "D")).astype(np.int64)
        rho = posterior.latent_rho.astype(np.float64)[index]
        sd = posterior.latent_sd.astype(np.float64)[index]
        days_after = int(offset.max())
        load = _loading_from(posterior, today, index)(days_after)
        path = _continue_path(today_z, rho, sd, days_after, rng, loading=load)
        np.add.at(out.T, owner[later], (mu[index] * np.exp(path[:, offset])).T)
    return out


def _loading_from(
    posterior: CompactPosterior, today: dt.date, index: IntArray
) -> Callable[[int], FloatArray]:
    """``days_after -> (row, days_after + 1)`` weekday loadings of today and the days after it,
    for the picked draws ``index``."""
    first = (today - posterior.calendar.first_day).days

    def rows(days_after: int) -> FloatArray:
        days = first + np.arange(days_after + 1)
        return np.ascontiguousarray(weekday_loading(posterior, days)[:, index].T)

    return rows


def _continue_path(
    today_z: FloatArray,
    rho: FloatArray,
    sd: FloatArray,
    days_after: int,
    rng: np.random.Generator,
    *,
    loading: FloatArray,
) -> FloatArray:
    """The daily deviation from today's on, ``(row, days_after + 1)``; column 0 is today.

    The AR(1) runs on the state behind the deviations (a day's deviation is its weekday's
    ``loading`` times the state). Innovations are drawn day after day, so a longer request
    extends the same path.
    """
    path = np.empty((today_z.size, days_after + 1))
    path[:, 0] = today_z
    state = today_z / loading[:, 0]
    shocks = rng.standard_normal((days_after, today_z.size))
    for k in range(1, days_after + 1):
        state = rho * state + sd * shocks[k - 1]
        path[:, k] = state * loading[:, k]
    return path
