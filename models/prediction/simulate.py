"""Arrival streams sampled from the posterior process, for discrete-event simulation.

Method
------
Each replicate picks one posterior draw ``d`` (uniformly, with replacement, seeded). Under draw
``d`` the arrival rate ``lambda_d(t)`` is constant on each piece of the window cut at the model's
bin edges and at every opening or closing time inside a bin, exactly as
:func:`models.prediction.windows.expected_counts` integrates it (a bin open only part of the time
carries its rate on its open minutes only, so a closed piece expects exactly zero arrivals and
none is ever placed in closed time; days after the history carry the draw's simulated latent
deviation). On a piece of length ``h`` with expected count
``Lambda = lambda h`` the replicate gets ``Poisson(Lambda)`` arrivals, placed independently and
uniformly on the piece. For a piecewise-constant rate this *is* the process exactly: it is
Lewis & Shedler's thinning (Naval Research Logistics Quarterly 26(3), 1979) with the rate itself
as the dominating rate, so every candidate is kept and none is drawn in vain.

A replicate's count in any window is therefore distributed as the predictive mixture that
:func:`models.prediction.windows.forecast` summarises, and its times pass the time-rescaling check
(``Lambda_d(t_i) / Lambda_d(end)`` are uniform given the count).
"""

from __future__ import annotations

import datetime as dt
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import numpy.typing as npt
import pandas as pd

from models.exceptions import InputError, WindowError
from models.prediction.posterior import CompactPosterior
from models.prediction.windows import MAX_HORIZON_DAYS, expected_counts
from models.ratemodel.binning import bin_grid, local_features

__all__ = ["MAX_REPLICATES", "SimulatedArrivals", "simulate_arrivals", "write_arrivals"]

IntArray = npt.NDArray[np.int64]

#: Most replicates one call may ask for.
MAX_REPLICATES = 100_000
# Replicates x rate pieces per call: bounds the (replicate, piece) count array to ~160 MB.
_MAX_CELLS = 20_000_000
_NS_PER_MINUTE = 60 * 10**9


@dataclass(frozen=True)
class SimulatedArrivals:
    """Arrival times of several replicates of one window.

    Attributes
    ----------
    times
        UTC instants, sorted by replicate then time.
    replicate
        Replicate number of each arrival (0-based).
    draw
        Posterior draw behind each arrival's replicate.
    replicate_draws
        Posterior draw of every replicate, including those with no arrivals.
    start, end
        The window simulated.
    tz
        Zone for display (the series' zone).
    """

    times: pd.DatetimeIndex
    replicate: IntArray
    draw: IntArray
    replicate_draws: IntArray
    start: pd.Timestamp
    end: pd.Timestamp
    tz: str

    def counts(self) -> IntArray:
        """Arrivals per replicate."""
        return np.bincount(self.replicate, minlength=self.replicate_draws.size).astype(np.int64)

    def frame(self) -> pd.DataFrame:
        """One row per arrival: ``replicate``, ``draw`` and ``timestamp`` (local, tz-aware)."""
        return pd.DataFrame(
            {
                "replicate": self.replicate,
                "draw": self.draw,
                "timestamp": self.times.floor("us").tz_convert(self.tz),  # floor in UTC: local
                # floors are ambiguous in the hour daylight saving repeats
            }
        )


def _pieces(
    posterior: CompactPosterior, start: pd.Timestamp, end: pd.Timestamp
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """``[start, end)`` cut at every model bin edge inside it and at every instant where the
    opening hours open or close inside a bin, so the rate is constant on each piece."""
    tz = posterior.calendar.tz
    bin_minutes = posterior.calendar.bin_minutes
    first_day = start.tz_convert(tz).date()
    last_day = (end - pd.Timedelta(1, "ns")).tz_convert(tz).date()
    edges = bin_grid(first_day, last_day + dt.timedelta(days=1), tz=tz, bin_minutes=bin_minutes)
    marks = edges.as_unit("ns").asi8
    opening = posterior.opening
    if opening is not None and not opening.always_open:
        dow, _, _, minute = local_features(edges, tz=tz, bin_minutes=bin_minutes)
        changes = opening.changes(dow=dow, start_minute=minute, bin_minutes=bin_minutes)
        switches = marks[changes[:, 0].astype(np.int64)] + np.round(
            changes[:, 1] * _NS_PER_MINUTE
        ).astype(np.int64)
        marks = np.union1d(marks, switches)
    lo, hi = start.tz_convert("UTC").value, end.tz_convert("UTC").value
    inside = marks[(marks > lo) & (marks < hi)]
    cuts = np.concatenate([[lo], inside])
    bounds = np.append(inside, hi)
    return (
        pd.DatetimeIndex(cuts.astype("datetime64[ns]")).tz_localize("UTC"),
        pd.DatetimeIndex(bounds.astype("datetime64[ns]")).tz_localize("UTC"),
    )


def simulate_arrivals(
    posterior: CompactPosterior,
    start: pd.Timestamp,
    end: pd.Timestamp,
    *,
    replicates: int = 1,
    seed: int | None = None,
    horizon_days: int = MAX_HORIZON_DAYS,
) -> SimulatedArrivals:
    """Sample arrival times in ``[start, end)`` from the posterior process.

    Parameters
    ----------
    posterior
        Compact posterior of the series.
    start, end
        Tz-aware window bounds.
    replicates
        Independent streams to sample, each from its own randomly chosen posterior draw.
    seed
        Seed of the draw choice, counts and times; default the posterior's seed.
    horizon_days
        Latest allowed window end, in days after the history.

    Returns
    -------
    SimulatedArrivals

    Raises
    ------
    WindowError
        If the window is empty, reversed, naive or outside what the model can answer.
    InputError
        If ``replicates`` is not a whole number in 1..MAX_REPLICATES, or replicates times the
        bins of the window exceed 20 million.
    """
    if isinstance(replicates, bool) or not isinstance(replicates, int | np.integer):
        raise InputError(
            f"replicates must be a whole number 1..{MAX_REPLICATES}; got {replicates!r}"
        )
    if not 1 <= replicates <= MAX_REPLICATES:
        raise InputError(
            f"replicates must be a whole number 1..{MAX_REPLICATES}; got {replicates!r}"
        )
    if start.tzinfo is None or end.tzinfo is None:
        raise WindowError("simulation window times must carry a UTC offset or zone")
    if end <= start:
        raise WindowError(
            f"window end {end.isoformat()} is not after its start {start.isoformat()}"
        )
    piece_starts, piece_ends = _pieces(posterior, start, end)
    if replicates * len(piece_starts) > _MAX_CELLS:
        raise InputError(
            f"{replicates} replicates x {len(piece_starts)} bins is more than {_MAX_CELLS:,} "
            "rate pieces in one call; ask for fewer replicates or a shorter window"
        )
    lam = expected_counts(posterior, piece_starts, piece_ends, horizon_days=horizon_days)
    rng = np.random.default_rng(posterior.seed if seed is None else seed)
    chosen = rng.integers(0, posterior.n_draws, size=int(replicates))
    counts = rng.poisson(lam[chosen])  # (replicate, piece)
    flat = counts.ravel()
    piece = np.tile(np.arange(len(piece_starts)), int(replicates))
    replicate = np.repeat(np.arange(int(replicates)), len(piece_starts))
    s_ns = piece_starts.as_unit("ns").asi8
    length = piece_ends.as_unit("ns").asi8 - s_ns
    which = np.repeat(piece, flat)
    offset = np.floor(rng.random(which.size) * length[which]).astype(np.int64)
    stamps = s_ns[which] + offset
    owner = np.repeat(replicate, flat)
    order = np.lexsort((stamps, owner))
    return SimulatedArrivals(
        times=pd.DatetimeIndex(stamps[order].astype("datetime64[ns]")).tz_localize("UTC"),
        replicate=owner[order].astype(np.int64),
        draw=chosen[owner[order]].astype(np.int64),
        replicate_draws=chosen.astype(np.int64),
        start=start,
        end=end,
        tz=posterior.calendar.tz,
    )


def _iso_with_offset(stamps: pd.DatetimeIndex) -> pd.Index:
    """ISO 8601 with microseconds and a ``+hh:mm`` offset, e.g. 2026-03-03T09:00:01.250000-06:00.

    Formatted with numpy (a zone has few distinct offsets): per-row ``strftime`` took 6 s for
    the 350,000 arrivals of 100 replicates of a week.
    """
    wall = stamps.tz_localize(None).as_unit("us").to_numpy()
    utc = stamps.tz_convert("UTC").tz_localize(None).as_unit("us").to_numpy()
    minutes = ((wall - utc) // np.timedelta64(1, "m")).astype(np.int64)
    kinds, which = np.unique(minutes, return_inverse=True)
    labels = np.array(
        [f"{'+' if m >= 0 else '-'}{abs(m) // 60:02d}:{abs(m) % 60:02d}" for m in kinds.tolist()]
    )
    text = np.char.add(np.datetime_as_string(wall, unit="us"), labels[which])
    return pd.Index(text.astype(object))


def write_arrivals(arrivals: SimulatedArrivals, path: str | os.PathLike[str]) -> Path:
    """Write one row per arrival to ``.csv`` or ``.parquet``, atomically.

    CSV holds ``replicate,draw,timestamp`` with the timestamp as ISO 8601 local time with its UTC
    offset; Parquet holds the same columns with a time-zone-aware timestamp type.

    Returns
    -------
    pathlib.Path
        The path written.
    """
    target = Path(path)
    suffix = target.suffix.lower()
    if suffix not in (".csv", ".parquet"):
        raise InputError(f"output file {target.name!r} must end in .csv or .parquet")
    frame = arrivals.frame()
    target.parent.mkdir(parents=True, exist_ok=True)
    handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", dir=target.parent)
    os.close(handle)
    try:
        if suffix == ".csv":
            frame = frame.assign(
                timestamp=_iso_with_offset(pd.DatetimeIndex(frame["timestamp"])).to_numpy()
            )
            frame.to_csv(temporary, index=False)
        else:
            frame.to_parquet(temporary, index=False)
        Path(temporary).replace(target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target
