"""The compact posterior that prediction needs, extracted from a fit.

Prediction never touches PyMC or the full trace: it needs, per draw, the log rate of each weekly
cell, the trend slope, the holiday effect, the AR(1) parameters and the latent deviation of each
history day. Stored as float32 these are a few MB for a series.
"""

from __future__ import annotations

import datetime as dt
import io
import threading
import weakref
import zlib
from collections import OrderedDict
from collections.abc import Callable, Hashable
from dataclasses import dataclass
from typing import Any

import numpy as np

from models.exceptions import CorruptArtefact
from models.ratemodel.binning import OpeningHours, bin_grid
from models.ratemodel.design import Calendar
from models.ratemodel.spec import ModelSpec

__all__ = ["BinTable", "CompactPosterior", "weekday_loading"]

_ARRAYS = ("week_log_rate", "trend", "holiday_effect", "latent", "latent_rho", "latent_sd")
#: Future days of latent path simulated once per loaded version (queries beyond extend it).
_CACHED_FUTURE_DAYS = 401
#: Arrays only some models have; a store written before they existed simply lacks them.
_OPTIONAL_ARRAYS = (
    "dispersion",
    "annual",
    "within_day",
    "within_day_sd",
    "latent_loading",
    "holiday_named",
    "holiday_spread",
)
# Keeps the future within-day weights apart from the other seeded streams.
_WITHIN_STREAM = 0x7368617065
# Keeps the deviations of holidays the history never held apart from the other streams.
_HOLIDAY_STREAM = 0x686F6C69


@dataclass(frozen=True)
class CompactPosterior:
    """Posterior draws in the form prediction uses.

    Attributes
    ----------
    week_log_rate
        ``(draw, dow, slot)`` log arrivals per hour at the trend origin, no holiday, no deviation.
    trend, holiday_effect, latent_rho, latent_sd
        ``(draw,)``; zeros where the term is off.
    latent
        ``(draw, day)`` latent daily deviation over the history days.
    calendar, spec, opening
        How instants map to model coordinates, the model description, and opening hours
        (closed bins forecast zero arrivals).
    seed
        Seeds the forward simulation of future latent deviations, so a query always gets the same
        answer from the same version.
    dispersion
        ``(draw, slot)`` negative binomial dispersion k (gamma noise shape) of each slot of the
        day for ``spec.observation == "negbin"``; None for a Poisson model.
    annual
        ``(draw, annual_term)`` Fourier coefficients of the annual season, or None without one.
    within_day, within_day_sd
        ``(draw, day, within_term)`` within-day shape weights of the history days and
        ``(draw, within_term)`` their sds, or None without the term. Future days draw their
        weights from Normal(0, sd) with a generator seeded by :attr:`seed` and the day index.
    latent_loading
        ``(draw, day_kind)`` loading of each kind of day (the weekdays, then holidays:
        ``models.ratemodel.design.DAY_KINDS``) on the latent AR(1) state
        (``spec.latent_by_weekday``), or None: every day 1. ``latent`` already holds the
        loaded deviation of each history day; future days are the loading of their weekday times
        the AR(1) state carried forward.
    holiday_named, holiday_spread
        ``(draw, holiday_name)`` each named holiday's deviation from ``holiday_effect`` (the
        names in ``calendar.holiday_names``) and ``(draw,)`` their sd, or None (one shared
        effect). A holiday the history did not hold draws its deviation from Normal(0, spread)
        with a generator seeded by :attr:`seed` and its name (:meth:`holiday_deviations`).
    """

    week_log_rate: np.ndarray
    trend: np.ndarray
    holiday_effect: np.ndarray
    latent: np.ndarray
    latent_rho: np.ndarray
    latent_sd: np.ndarray
    calendar: Calendar
    spec: ModelSpec
    opening: OpeningHours | None
    seed: int
    dispersion: np.ndarray | None = None
    annual: np.ndarray | None = None
    within_day: np.ndarray | None = None
    within_day_sd: np.ndarray | None = None
    latent_loading: np.ndarray | None = None
    holiday_named: np.ndarray | None = None
    holiday_spread: np.ndarray | None = None

    @property
    def n_draws(self) -> int:
        """Number of posterior draws."""
        return int(self.week_log_rate.shape[0])

    @property
    def n_days(self) -> int:
        """Number of history days."""
        return int(self.latent.shape[1])

    @property
    def history_end(self) -> dt.date:
        """Local date after the last history day."""
        return self.calendar.first_day + dt.timedelta(days=self.n_days)

    @property
    def as_float64(self) -> dict[str, np.ndarray]:
        """The draws in float64, converted once while the version is in use (queries reuse them)."""
        return _cached(
            self,
            "float64",
            lambda: {name: np.asarray(getattr(self, name), dtype=np.float64) for name in _ARRAYS},
        )

    def latent_through(self, last_day: int) -> np.ndarray:
        """Latent deviation per draw for days ``0..last_day``, ``(draw, last_day + 1)``.

        Days after the history are simulated forward from each draw's AR(1) with innovations drawn
        day by day from a generator seeded by :attr:`seed` (row k = history day n_days + k), so a
        longer query extends the same path and every query sees the same future.
        """
        return self.latent_by_day(last_day).T

    def latent_by_day(self, last_day: int) -> np.ndarray:
        """The same path day-major, ``(last_day + 1, draw)`` (rows contiguous for gathers)."""
        path = self._latent_path_cache
        if last_day >= path.shape[0]:
            path = _extend_latent(self, last_day + 1)
        return path[: last_day + 1]

    def within_by_day(self, days: np.ndarray) -> np.ndarray:
        """Within-day shape weights of day indices ``days``, ``(len(days), within_term, draw)``.

        History days come from the fit; a later day gets Normal(0, sd) weights from a generator
        seeded by :attr:`seed` and the day index, so every query sees the same future.
        """
        if self.within_day is None or self.within_day_sd is None:
            raise CorruptArtefact("this posterior has no within-day term")
        known = _cached(
            self,
            "within_by_day",
            lambda: np.ascontiguousarray(
                np.transpose(np.asarray(self.within_day, dtype=np.float64), (1, 2, 0))
            ),
        )
        days = np.asarray(days, dtype=np.int64)
        out = np.empty((len(days), known.shape[1], self.n_draws))
        past = days < self.n_days
        out[past] = known[days[past]]
        sd = np.asarray(self.within_day_sd, dtype=np.float64).T
        for j in np.flatnonzero(~past):
            entropy = [self.seed, _WITHIN_STREAM, int(days[j])]
            rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(entropy)))
            out[j] = sd * rng.standard_normal(sd.shape)
        return out

    def memo(self, key: str, build: Callable[[], Any]) -> Any:
        """``build()`` once while this version is in use: per-version values of the query path
        (kept with the version's other caches, for the most recently used versions)."""
        return _cached(self, key, build)

    @property
    def noise_cache(self) -> tuple[threading.Lock, OrderedDict[int, np.ndarray]]:
        """Per-bin gamma noise already computed for this version (see :mod:`models.prediction.windows`),
        with the lock that guards it."""
        return _cached(self, "noise", lambda: (threading.Lock(), OrderedDict()))  # type: ignore[no-any-return]

    @property
    def week_by_cell(self) -> np.ndarray:
        """Weekly log rates cell-major, ``(dow, slot, draw)`` in float64 (for row gathers)."""
        return _cached(
            self,
            "week_by_cell",
            lambda: np.ascontiguousarray(np.moveaxis(self.as_float64["week_log_rate"], 0, -1)),
        )

    def holiday_deviations(self, names: tuple[str, ...]) -> np.ndarray | None:
        """``(len(names), draw)`` float64 deviation of each named holiday from the common
        holiday effect, or None for a posterior with one shared effect (kept per version and
        names)."""
        if self.holiday_named is None or self.holiday_spread is None:
            return None

        def build() -> np.ndarray:
            fitted = {name: i for i, name in enumerate(self.calendar.holiday_names)}
            named = np.asarray(self.holiday_named, dtype=np.float64)
            spread = np.asarray(self.holiday_spread, dtype=np.float64)
            rows = []
            for name in names:
                if name in fitted:
                    rows.append(named[:, fitted[name]])
                else:  # never in the history: a new member of the holidays' population
                    key = [self.seed, _HOLIDAY_STREAM, zlib.crc32(name.encode())]
                    rows.append(spread * np.random.default_rng(key).standard_normal(len(spread)))
            return np.array(rows).reshape(len(names), self.n_draws)

        return _cached(self, ("holidays", names), build)  # type: ignore[no-any-return]

    @property
    def bin_table(self) -> BinTable:
        """Every bin from the first history day to the end of the cached horizon, with its model
        coordinates and open share, built once per loaded version so queries skip the calendar
        work (pandas time-zone arithmetic and holiday look-ups)."""
        end = self.history_end + dt.timedelta(days=_CACHED_FUTURE_DAYS)
        return _cached(
            self,
            "bin_table",
            lambda: BinTable.build(self.calendar, self.opening, self.calendar.first_day, end),
        )

    @property
    def _latent_path_cache(self) -> np.ndarray:
        return _cached(
            self, "latent_path", lambda: _extend_latent(self, self.n_days + _CACHED_FUTURE_DAYS)
        )

    def meta(self) -> dict[str, Any]:
        """JSON-ready description (for the manifest)."""
        return {
            "calendar": self.calendar.to_dict(),
            "spec": self.spec.to_dict(),
            "opening_hours": self.opening.text if self.opening else None,
            "seed": self.seed,
            "draws": self.n_draws,
            "history_days": self.n_days,
        }

    def to_bytes(self) -> bytes:
        """Serialise the arrays (``.npz``)."""
        buffer = io.BytesIO()
        arrays = {name: getattr(self, name) for name in _ARRAYS}
        for name in _OPTIONAL_ARRAYS:
            if getattr(self, name) is not None:
                arrays[name] = getattr(self, name)
        np.savez(buffer, **arrays)
        return buffer.getvalue()

    @classmethod
    def from_bytes(cls, payload: bytes, meta: dict[str, Any]) -> CompactPosterior:
        """Inverse of :meth:`to_bytes` plus :meth:`meta`."""
        try:
            with np.load(io.BytesIO(payload), allow_pickle=False) as npz:
                arrays = {name: npz[name] for name in _ARRAYS}
                optional = {name: npz[name] for name in _OPTIONAL_ARRAYS if name in npz.files}
        except (OSError, ValueError, KeyError) as exc:
            raise CorruptArtefact(f"compact draws cannot be read: {exc}") from exc
        spec = ModelSpec.from_dict(meta["spec"])
        opening = meta.get("opening_hours")
        posterior = cls(
            **arrays,
            **optional,
            calendar=Calendar.from_dict(meta["calendar"], holidays=spec.holidays),
            spec=spec,
            opening=OpeningHours.parse(opening) if opening else None,
            seed=int(meta["seed"]),
        )
        posterior.check_shapes()
        return posterior

    def check_shapes(self) -> None:
        """Raise :class:`CorruptArtefact` if the arrays disagree with each other or the spec."""
        d = self.n_draws
        expected = {
            "week_log_rate": (d, 7, self.spec.slots_per_day),
            "trend": (d,),
            "holiday_effect": (d,),
            "latent_rho": (d,),
            "latent_sd": (d,),
        }
        for name, shape in expected.items():
            if getattr(self, name).shape != shape:
                raise CorruptArtefact(
                    f"array {name} has shape {getattr(self, name).shape}, expected {shape}"
                )
        if self.latent.ndim != 2 or self.latent.shape[0] != d:
            raise CorruptArtefact(
                f"array latent has shape {self.latent.shape}, expected ({d}, days)"
            )
        for name in _ARRAYS:
            if not np.isfinite(getattr(self, name)).all():
                raise CorruptArtefact(f"array {name} holds non-finite values")
        if self.spec.observation == "negbin":
            slots = self.spec.slots_per_day
            if self.dispersion is None or self.dispersion.shape != (d, slots):
                found = None if self.dispersion is None else self.dispersion.shape
                raise CorruptArtefact(
                    f"a negative binomial posterior needs array dispersion of shape "
                    f"({d}, {slots}); found {found}"
                )
            # An infinite dispersion is a Poisson bin, so only NaN, zero and negatives are bad.
            if not np.all(self.dispersion > 0):
                raise CorruptArtefact("array dispersion holds values that are not > 0")
        terms = {
            "annual": ((d, 2 * self.spec.annual_harmonics), self.spec.annual_harmonics),
            "within_day": ((d, self.n_days, self.spec.within_day), self.spec.within_day),
            "within_day_sd": ((d, self.spec.within_day), self.spec.within_day),
            "latent_loading": ((d, 8), self.spec.latent_by_weekday),
            "holiday_named": ((d, len(self.calendar.holiday_names)), self.calendar.holiday_names),
            "holiday_spread": ((d,), self.calendar.holiday_names),
        }
        for name, (shape, wanted) in terms.items():
            value = getattr(self, name)
            if not wanted:
                if value is not None:
                    raise CorruptArtefact(f"array {name} is present but the spec has no such term")
                continue
            if value is None or value.shape != shape:
                found = None if value is None else value.shape
                raise CorruptArtefact(f"array {name} has shape {found}, expected {shape}")
            if not np.isfinite(value).all():
                raise CorruptArtefact(f"array {name} holds non-finite values")


#: Versions whose derived arrays (float64 draws, bin table, latent path; a few MB each) are kept.
#: A server with many series queries a few at a time, so a bounded cache keeps memory flat
#: (measured: unbounded, a batch over 1,000 series grew the server by 1.9 GB).
CACHED_VERSIONS = 32
_cache: OrderedDict[int, dict[Hashable, Any]] = OrderedDict()
_cache_lock = threading.Lock()


def _cached(posterior: CompactPosterior, key: Hashable, build: Callable[[], Any]) -> Any:
    """``build()`` once per posterior and key, for the most recently used posteriors only."""
    ident = id(posterior)
    with _cache_lock:
        entry = _cache.get(ident)
        if entry is not None and entry["owner"]() is posterior:
            _cache.move_to_end(ident)
            if key in entry:
                return entry[key]
    value = build()
    with _cache_lock:
        entry = _cache.get(ident)
        if entry is None or entry["owner"]() is not posterior:
            entry = {"owner": weakref.ref(posterior)}
            _cache[ident] = entry
        entry[key] = value
        _cache.move_to_end(ident)
        while len(_cache) > CACHED_VERSIONS:
            _cache.popitem(last=False)
    return value


@dataclass(frozen=True)
class BinTable:
    """Consecutive bins with their coordinates: ``edges`` holds the UTC start of each bin in ns
    plus the end of the last one; ``minute`` is the local wall-clock minute of day each bin
    starts at and ``opening`` the hours behind ``open_share`` (None: always open), so the open
    part of a bin before any instant inside it can be worked out
    (:meth:`open_share_before`)."""

    edges: np.ndarray
    dow: np.ndarray
    slot: np.ndarray
    day: np.ndarray
    years: np.ndarray
    holiday: np.ndarray
    open_share: np.ndarray
    phase: np.ndarray
    minute: np.ndarray | None = None
    opening: OpeningHours | None = None
    bin_minutes: int = 60
    holiday_index: np.ndarray | None = None
    holiday_names: tuple[str, ...] = ()

    @classmethod
    def build(
        cls, calendar: Calendar, opening: OpeningHours | None, first: dt.date, end: dt.date
    ) -> BinTable:
        """Bins of the local days ``first`` (inclusive) to ``end`` (exclusive)."""
        grid = bin_grid(first, end, tz=calendar.tz, bin_minutes=calendar.bin_minutes)
        feats = calendar.features(grid)
        share = np.ones(len(grid))
        if opening is not None:
            share = opening.open_fraction(
                dow=feats.dow, start_minute=feats.minute, bin_minutes=calendar.bin_minutes
            )
        starts = grid.as_unit("ns").asi8
        edges = np.append(starts, starts[-1] + calendar.bin_minutes * 60 * 10**9)
        return cls(
            edges,
            feats.dow,
            feats.slot,
            feats.day,
            feats.years,
            feats.holiday,
            share,
            feats.phase,
            minute=feats.minute,
            opening=None if opening is None or opening.always_open else opening,
            bin_minutes=calendar.bin_minutes,
            holiday_index=feats.holiday_index,
            holiday_names=feats.holiday_names,
        )

    def open_share_before(self, bins: np.ndarray, points: np.ndarray) -> np.ndarray:
        """Share of each bin in ``bins`` (positions in the table) that is open and lies before
        the instant in ``points`` (UTC ns, inside or at the end of the bin), in [0, open_share].

        Without opening hours this is the elapsed fraction of the bin. With them it counts only
        the bin's open minutes, exactly as :attr:`open_share` counts the whole bin, so a window
        inside the closed part of a bin integrates to zero and the whole bin to its open share.
        """
        bin_ns = self.bin_minutes * 60 * 10**9
        elapsed = np.clip((points - self.edges[bins]) / bin_ns, 0.0, 1.0)
        if self.opening is None or self.minute is None:
            return np.asarray(elapsed)
        return self.opening.open_share(
            dow=self.dow[bins],
            start_minute=self.minute[bins],
            elapsed_minutes=elapsed * self.bin_minutes,
            bin_minutes=self.bin_minutes,
        )

    def covers(self, lo: int, hi: int) -> bool:
        """Whether ``[lo, hi)`` (UTC ns) lies inside the table."""
        return bool(self.edges[0] <= lo and hi <= self.edges[-1])

    def span(self, lo: int, hi: int) -> slice:
        """The bins overlapping ``[lo, hi)``."""
        first = int(np.searchsorted(self.edges, lo, side="right")) - 1
        last = int(np.searchsorted(self.edges, hi, side="left"))
        return slice(max(first, 0), min(last, len(self.edges) - 1))


def _extend_latent(posterior: CompactPosterior, days: int) -> np.ndarray:
    """Day-major latent path ``(days, draw)``: history, then the seeded forward simulation."""
    known = np.ascontiguousarray(posterior.as_float64["latent"].T)
    extra = days - posterior.n_days
    if extra <= 0:
        return known
    if not posterior.spec.latent_daily:
        return np.concatenate([known, np.zeros((extra, posterior.n_draws))], axis=0)
    shocks = np.random.default_rng(posterior.seed).standard_normal((extra, posterior.n_draws))
    rho = posterior.as_float64["latent_rho"]
    sd = posterior.as_float64["latent_sd"]
    future = np.empty((extra, posterior.n_draws))
    loading = weekday_loading(posterior, np.arange(posterior.n_days - 1, days))
    state = known[-1] / loading[0]  # the AR(1) state behind the last history day's deviation
    for k in range(extra):
        state = rho * state + sd * shocks[k]
        future[k] = state * loading[k + 1]
    return np.concatenate([known, future], axis=0)


def weekday_loading(posterior: CompactPosterior, days: np.ndarray) -> np.ndarray:
    """``(len(days), draw)`` loading of each day index's kind (weekday or holiday) on the latent
    state (ones without ``spec.latent_by_weekday``)."""
    if posterior.latent_loading is None:
        return np.ones((len(days), posterior.n_draws))
    kinds = posterior.calendar.day_kinds(np.asarray(days))
    return np.asarray(posterior.latent_loading, dtype=np.float64).T[kinds]
