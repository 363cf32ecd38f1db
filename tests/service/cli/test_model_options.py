"""The model options of ``ratecast fit`` / ``backtest`` and the spec they build (no fitting)."""

from __future__ import annotations

import datetime as dt

import pytest

from service.cli.app import build_parser
from service.cli.common import model_spec
from service.cli.fitting import print_left_out


def spec_of(*options: str, bin_minutes: int = 60, joint: bool = False):  # type: ignore[no-untyped-def]
    args = build_parser().parse_args(
        ["fit", "--series", "x", "--counts", "c.csv", "--tz", "UTC", *options]
    )
    return model_spec(args, bin_minutes=bin_minutes, holidays=None, joint=joint)


def test_daily_series_leave_unusual_days_out_and_load_the_latent_by_default() -> None:
    daily = spec_of(bin_minutes=1440)
    assert (daily.unusual_days, daily.latent_by_weekday) == ("leave-out", True)
    hourly = spec_of()
    assert (hourly.unusual_days, hourly.latent_by_weekday) == ("keep", False)
    assert hourly.observation == "negbin"


def test_daily_bins_with_the_latent_get_poisson_days_by_default() -> None:
    # The negative binomial day and the daily latent are both day-level noise and sampled badly
    # together (docs/calibration.md, "Daily series"): auto gives daily bins Poisson days.
    assert spec_of(bin_minutes=1440).observation == "poisson"
    assert spec_of("--no-latent", bin_minutes=1440).observation == "negbin"
    assert spec_of(bin_minutes=30).observation == "negbin"
    assert spec_of("--observation", "negbin", bin_minutes=1440).observation == "negbin"
    assert spec_of("--observation", "poisson").observation == "poisson"


def test_the_choices_can_be_forced_either_way() -> None:
    kept = spec_of("--unusual-days", "keep", "--latent-by-weekday", "off", bin_minutes=1440)
    assert (kept.unusual_days, kept.latent_by_weekday) == ("keep", False)
    forced = spec_of("--unusual-days", "leave-out", "--latent-by-weekday", "on")
    assert (forced.unusual_days, forced.latent_by_weekday) == ("leave-out", True)
    # Without a daily latent there is nothing to load; groups have no loadings.
    assert not spec_of("--no-latent", bin_minutes=1440).latent_by_weekday
    assert not spec_of(bin_minutes=1440, joint=True).latent_by_weekday


def test_a_bad_choice_is_refused_naming_the_allowed_ones(capsys) -> None:
    with pytest.raises(SystemExit) as exit_info:
        spec_of("--unusual-days", "drop")
    assert exit_info.value.code == 2
    err = capsys.readouterr().err
    assert "--unusual-days" in err and "'drop'" in err and "leave-out" in err and "keep" in err
    assert "auto" in err


def test_the_fit_names_the_days_it_left_out(capsys) -> None:
    print_left_out(())
    assert capsys.readouterr().out == ""
    days = tuple(dt.date(2025, 1, 1) + dt.timedelta(days=7 * k) for k in range(14))
    print_left_out(days)
    out = capsys.readouterr().out
    assert out.startswith("left out 14 unusual day(s) of history")
    assert "2025-01-01, 2025-01-08" in out and "and 2 more" in out
    assert "2025-03-26" not in out and "--unusual-days keep" in out


def test_daily_series_get_an_effect_per_named_holiday_by_default() -> None:
    assert spec_of(bin_minutes=1440).holiday_effects == "named"
    assert spec_of().holiday_effects == "shared"
    # A group has one holiday effect per series.
    assert spec_of(bin_minutes=1440, joint=True).holiday_effects == "shared"
    assert spec_of("--holiday-effects", "shared", bin_minutes=1440).holiday_effects == "shared"
    assert spec_of("--holiday-effects", "named").holiday_effects == "named"
