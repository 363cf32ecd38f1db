"""A fit plan: every series (and group of related series) a nightly run refits, in one TOML file.

Entries inherit ``[defaults]`` and override any of it; the whole plan is checked before anything
is fitted, and every bad entry is reported with its name and field. Example::

    store = "/srv/ratecast/store"          # optional; a folder or s3://bucket/prefix; default:
                                           # RATECAST_STORE or ./store

    [defaults]
    zone = "America/Chicago"               # IANA time zone
    bin = "1h"                             # 15min, 30min, 1h or 1d
    opening = "Mon-Fri 07:00-19:00"        # optional, as for ratecast fit --open
    holidays = "US"                        # optional, COUNTRY or COUNTRY:SUBDIVISION
    special_days = ["2026-12-24"]          # optional extra dates

    [defaults.model]                       # as the model options of ratecast fit
    observation = "negbin"                 # or "poisson"
    trend = true
    latent = true
    annual = 0
    within_day = 0
    unusual_days = "auto"                  # "leave-out", "keep"; auto: leave-out for 1d bins
    latent_by_weekday = "auto"             # "on", "off"; auto: on for 1d bins (single series)
    holiday_effects = "auto"               # "named", "shared"; auto: named for 1d bins (single)

    [defaults.sampling]                    # as the sampling options of ratecast fit
    draws = 1000
    tune = 1000
    chains = 4
    seed = 20261202
    sampler = "pymc"
    retry = true                           # refit once with stronger settings if the gate refuses

    [[series]]
    name = "desk-a"
    counts = "data/desk-a.csv"             # columns start,count (relative to this file)

    [[series]]
    name = "desk-b"
    events = "data/desk-b.parquet"         # one row per arrival
    time_column = "arrived"                # default "timestamp"
    zone = "America/Denver"

    [[group]]                              # fitted jointly, each member published
    name = "north"
    members = [
        { name = "queue-a", counts = "data/qa.csv" },
        { name = "queue-b", counts = "data/qb.csv" },
    ]
"""

from __future__ import annotations

import datetime as dt
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from models.exceptions import InputError, RatecastError
from models.fitting.options import FitOptions
from models.ratemodel.binning import OpeningHours, check_zone, parse_bin_width
from models.ratemodel.spec import (
    HOLIDAY_EFFECTS,
    MAX_ANNUAL_HARMONICS,
    MAX_WITHIN_DAY,
    OBSERVATIONS,
    UNUSUAL_DAYS,
)
from models.store import check_series_name
from service.defaults import (
    AUTO,
    DEFAULT_HOLIDAY_EFFECTS,
    DEFAULT_LATENT_BY_WEEKDAY,
    DEFAULT_OBSERVATION,
    DEFAULT_UNUSUAL_DAYS,
)

__all__ = ["Member", "Plan", "PlanEntry", "PlanError", "load_plan", "parse_plan"]


_PLACE_KEYS = {"zone", "bin", "opening", "holidays", "special_days", "model", "sampling", "until"}
_MODEL_KEYS = {
    "observation": str,
    "trend": bool,
    "latent": bool,
    "annual": int,
    "within_day": int,
    "unusual_days": str,
    "latent_by_weekday": str,
    "holiday_effects": str,
}
_SAMPLING_KEYS = {
    "draws": int,
    "tune": int,
    "chains": int,
    "seed": int,
    "sampler": str,
    "retry": bool,
}
_SOURCE_KEYS = {"events", "counts", "time_column"}


class PlanError(InputError):
    """A plan with one or more bad entries; ``problems`` lists each as ``entry: field: why``."""

    def __init__(self, path: str, problems: list[str]) -> None:
        self.problems = list(problems)
        listing = "; ".join(self.problems[:20])
        more = f" (and {len(self.problems) - 20} more)" if len(self.problems) > 20 else ""
        super().__init__(
            f"fit plan {path} has {len(self.problems)} problem(s), nothing was fitted: "
            f"{listing}{more}"
        )


@dataclass(frozen=True)
class Member:
    """One series' input: a file of arrival rows (``events``) or of counts per bin (``counts``)."""

    name: str
    path: str
    kind: str  # "events" or "counts"
    time_column: str = "timestamp"


@dataclass(frozen=True)
class PlanEntry:
    """One task of a plan: a single series, or a group fitted jointly."""

    name: str
    group: bool
    members: tuple[Member, ...]
    zone: str
    bin: str | None
    opening: str | None
    holidays: str | None
    special_days: tuple[str, ...]
    until: str | None
    model: dict[str, Any]
    sampling: dict[str, Any]

    def settings(self) -> dict[str, Any]:
        """Everything but the input files: part of the key that decides "unchanged"."""
        return {
            "group": self.group,
            "members": [(m.name, m.kind, m.time_column) for m in self.members],
            "zone": self.zone,
            "bin": self.bin,
            "opening": self.opening,
            "holidays": self.holidays,
            "special_days": list(self.special_days),
            "until": self.until,
            "model": dict(sorted(self.model.items())),
            "sampling": dict(sorted(self.sampling.items())),
        }

    def fit_options(self) -> FitOptions:
        """Sampling settings: the plan's over :class:`~models.fitting.options.FitOptions`."""
        return FitOptions(progressbar=False, **self.sampling)


@dataclass(frozen=True)
class Plan:
    """A validated plan."""

    path: str
    entries: tuple[PlanEntry, ...]
    store: str | None = None
    series: tuple[str, ...] = field(default=())


def load_plan(path: str | Path) -> Plan:
    """Read and validate the plan at ``path``.

    Raises
    ------
    PlanError
        If the file is not valid TOML or any entry is bad; every problem is listed.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError(str(path), [f"cannot be read: {exc.__class__.__name__}: {exc}"]) from None
    return parse_plan(text, path=path)


def parse_plan(text: str, *, path: str | Path = "<plan>") -> Plan:
    """Validate a plan given as TOML text; relative input paths are taken from ``path``'s folder."""
    path = Path(path)
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlanError(str(path), [f"not valid TOML: {exc}"]) from None
    problems: list[str] = []
    base = path.parent
    top_unknown = set(raw) - {"store", "defaults", "series", "group"}
    problems += [
        f"top level: unknown key {k!r} (allowed: store, defaults, series, group)"
        for k in sorted(top_unknown)
    ]
    store = raw.get("store")
    if store is not None and not isinstance(store, str):
        problems.append(f"top level: store {store!r} must be a folder path or URL string")
    defaults = raw.get("defaults", {})
    if not isinstance(defaults, dict):
        problems.append("defaults: must be a table")
        defaults = {}
    problems += [
        f"defaults: unknown key {k!r} (allowed: {', '.join(sorted(_PLACE_KEYS))})"
        for k in sorted(set(defaults) - _PLACE_KEYS)
    ]
    entries: list[PlanEntry] = []
    seen: dict[str, str] = {}
    for kind in ("series", "group"):
        items = raw.get(kind, [])
        if not isinstance(items, list):
            problems.append(f"{kind}: must be an array of tables ([[{kind}]])")
            continue
        for position, item in enumerate(items, start=1):
            label = f"{kind} #{position}"
            if not isinstance(item, dict):
                problems.append(f"{label}: must be a table")
                continue
            entry, found = _entry(item, kind=kind, label=label, defaults=defaults, base=base)
            problems += found
            if entry is None:
                continue
            for member in entry.members:
                if member.name in seen:
                    problems.append(
                        f"{kind} {entry.name!r}: series {member.name!r} is already in "
                        f"{seen[member.name]}"
                    )
                seen[member.name] = f"{kind} {entry.name!r}"
            entries.append(entry)
    if not entries and not problems:
        problems.append("top level: no [[series]] or [[group]] entries")
    if problems:
        raise PlanError(str(path), problems)
    return Plan(
        path=str(path),
        entries=tuple(entries),
        store=store,
        series=tuple(sorted(seen)),
    )


def _entry(
    item: dict[str, Any], *, kind: str, label: str, defaults: dict[str, Any], base: Path
) -> tuple[PlanEntry | None, list[str]]:
    problems: list[str] = []
    name = item.get("name")
    if not isinstance(name, str):
        return None, [f"{label}: 'name' is missing or not a string"]
    label = f"{kind} {name!r}"
    allowed = _PLACE_KEYS | {"name"} | (_SOURCE_KEYS if kind == "series" else {"members"})
    problems += [
        f"{label}: unknown key {k!r} (allowed: {', '.join(sorted(allowed))})"
        for k in sorted(set(item) - allowed)
    ]
    merged = {**defaults, **{k: v for k, v in item.items() if k in _PLACE_KEYS}}
    for table in ("model", "sampling"):
        merged[table] = {**defaults.get(table, {}), **item.get(table, {})}
    members: list[Member] = []
    if kind == "series":
        members_raw: list[Any] = [item]
    else:
        members_raw = item.get("members", [])
        if not isinstance(members_raw, list) or len(members_raw) < 2:
            problems.append(f"{label}: members must list at least two series")
            members_raw = members_raw if isinstance(members_raw, list) else []
    for position, raw in enumerate(members_raw, start=1):
        where = label if kind == "series" else f"{label} member #{position}"
        member, found = _member(raw, where=where, base=base, single=kind == "series")
        problems += found
        if member is not None:
            members.append(member)
    problems += _check_place(merged, label)
    model = _typed(merged["model"], _MODEL_KEYS, f"{label}: model", problems)
    sampling = _typed(merged["sampling"], _SAMPLING_KEYS, f"{label}: sampling", problems)
    problems += _check_model(model, label, joint=kind == "group")
    problems += _check_sampling(sampling, label)
    if problems:
        return None, problems
    entry = PlanEntry(
        name=name,
        group=kind == "group",
        members=tuple(members),
        zone=merged["zone"],
        bin=merged.get("bin"),
        opening=merged.get("opening"),
        holidays=merged.get("holidays"),
        special_days=tuple(merged.get("special_days", ())),
        until=merged.get("until"),
        model={
            "observation": DEFAULT_OBSERVATION,
            "unusual_days": DEFAULT_UNUSUAL_DAYS,
            "latent_by_weekday": DEFAULT_LATENT_BY_WEEKDAY,
            "holiday_effects": DEFAULT_HOLIDAY_EFFECTS,
            **model,
        },
        sampling=sampling,
    )
    return entry, []


def _member(raw: Any, *, where: str, base: Path, single: bool) -> tuple[Member | None, list[str]]:
    if not isinstance(raw, dict):
        return None, [f"{where}: must be a table with name and events or counts"]
    problems = []
    name = raw.get("name")
    try:
        check_series_name(name)  # type: ignore[arg-type]  # a non-string is refused here
    except InputError as exc:
        problems.append(f"{where}: name: {exc}")
    if not single:
        problems += [
            f"{where}: unknown key {k!r} (allowed: counts, events, name, time_column)"
            for k in sorted(set(raw) - _SOURCE_KEYS - {"name"})
        ]
    sources = [k for k in ("events", "counts") if k in raw]
    if len(sources) != 1:
        problems.append(
            f"{where}: give exactly one of 'events' or 'counts' (got {sources or 'none'})"
        )
        return None, problems
    source = raw[sources[0]]
    time_column = raw.get("time_column", "timestamp")
    if not isinstance(time_column, str) or not time_column:
        problems.append(f"{where}: time_column {time_column!r} must be a column name")
    if not isinstance(source, str) or not source:
        problems.append(f"{where}: {sources[0]} {source!r} must be a file path")
        return None, problems
    path = _resolve(source, base)
    if "://" not in path and not Path(path).is_file():
        problems.append(f"{where}: {sources[0]} file {source!r} does not exist (looked at {path})")
    if problems:
        return None, problems
    return Member(str(name), path, sources[0], time_column), []


def _resolve(source: str, base: Path) -> str:
    if source.startswith("file://"):
        source = source[len("file://") :]
    if "://" in source:
        return source
    candidate = Path(source).expanduser()
    return str(candidate if candidate.is_absolute() else (base / candidate).resolve())


def _check_place(merged: dict[str, Any], label: str) -> list[str]:
    problems = []
    zone = merged.get("zone")
    if zone is None:
        problems.append(f"{label}: zone is missing (set it in [defaults] or the entry)")
    else:
        problems += _catch(lambda: check_zone(zone), f"{label}: zone")
    if merged.get("bin") is not None:
        problems += _catch(lambda: parse_bin_width(merged["bin"]), f"{label}: bin")
    if merged.get("opening") is not None:
        problems += _catch(lambda: OpeningHours.parse(merged["opening"]), f"{label}: opening")
    if merged.get("holidays") is not None:
        from models.ratemodel.spec import HolidayCalendar

        country, _, subdivision = str(merged["holidays"]).partition(":")
        problems += _catch(
            lambda: HolidayCalendar(
                country=country.upper(), subdivision=subdivision.upper() or None
            ),
            f"{label}: holidays",
        )
    days = merged.get("special_days", [])
    if not isinstance(days, list):
        problems.append(f"{label}: special_days must be a list of YYYY-MM-DD dates")
    else:
        for day in days:
            try:
                dt.date.fromisoformat(str(day))
            except ValueError:
                problems.append(f"{label}: special_days: {day!r} is not a YYYY-MM-DD date")
    until = merged.get("until")
    if until is not None and not isinstance(until, str):
        problems.append(f"{label}: until {until!r} must be an ISO 8601 time string")
    return problems


def _catch(check: Any, where: str) -> list[str]:
    try:
        check()
    except RatecastError as exc:
        return [f"{where}: {exc}"]
    return []


def _typed(table: Any, allowed: dict[str, type], where: str, problems: list[str]) -> dict[str, Any]:
    if not isinstance(table, dict):
        problems.append(f"{where}: must be a table")
        return {}
    out = {}
    for key, value in table.items():
        kind = allowed.get(key)
        if kind is None:
            problems.append(f"{where}: unknown key {key!r} (allowed: {', '.join(sorted(allowed))})")
        elif isinstance(value, bool) is not (kind is bool) or not isinstance(value, kind):
            problems.append(f"{where}: {key} {value!r} must be {kind.__name__}")
        else:
            out[key] = value
    return out


def _check_model(model: dict[str, Any], label: str, *, joint: bool) -> list[str]:
    problems = []
    if model.get("observation", DEFAULT_OBSERVATION) not in (AUTO, *OBSERVATIONS):
        problems.append(
            f"{label}: model: observation {model['observation']!r} is not one of "
            f"{', '.join((AUTO, *OBSERVATIONS))}"
        )
    if model.get("unusual_days", DEFAULT_UNUSUAL_DAYS) not in (AUTO, *UNUSUAL_DAYS):
        problems.append(
            f"{label}: model: unusual_days {model['unusual_days']!r} is not one of "
            f"{', '.join((AUTO, *UNUSUAL_DAYS))}"
        )
    if model.get("latent_by_weekday", DEFAULT_LATENT_BY_WEEKDAY) not in (AUTO, "on", "off"):
        problems.append(
            f"{label}: model: latent_by_weekday {model['latent_by_weekday']!r} is not one of "
            "auto, on, off"
        )
    if model.get("holiday_effects", DEFAULT_HOLIDAY_EFFECTS) not in (AUTO, *HOLIDAY_EFFECTS):
        problems.append(
            f"{label}: model: holiday_effects {model['holiday_effects']!r} is not one of "
            f"{', '.join((AUTO, *HOLIDAY_EFFECTS))}"
        )
    if joint and model.get("holiday_effects") == "named":
        problems.append(
            f"{label}: model: holiday_effects 'named' is not available for groups; use auto or "
            "shared"
        )
    if joint and model.get("latent_by_weekday") == "on":
        problems.append(
            f"{label}: model: latent_by_weekday 'on' is not available for groups; use auto or off"
        )
    if not 0 <= model.get("annual", 0) <= MAX_ANNUAL_HARMONICS:
        problems.append(
            f"{label}: model: annual {model['annual']} must be 0..{MAX_ANNUAL_HARMONICS}"
        )
    if not 0 <= model.get("within_day", 0) <= MAX_WITHIN_DAY:
        problems.append(
            f"{label}: model: within_day {model['within_day']} must be 0..{MAX_WITHIN_DAY}"
        )
    if joint and (model.get("annual", 0) or model.get("within_day", 0)):
        problems.append(
            f"{label}: model: annual and within_day are not available for groups; set both to 0"
        )
    return problems


def _check_sampling(sampling: dict[str, Any], label: str) -> list[str]:
    problems = []
    for key, low in (("draws", 10), ("tune", 0), ("chains", 1), ("seed", 0)):
        if key in sampling and sampling[key] < low:
            problems.append(f"{label}: sampling: {key} {sampling[key]} must be >= {low}")
    if sampling.get("sampler", "pymc") not in ("pymc", "nutpie"):
        problems.append(
            f"{label}: sampling: sampler {sampling['sampler']!r} is not one of pymc, nutpie"
        )
    return problems
