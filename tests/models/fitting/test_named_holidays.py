"""Named holiday effects: names from the calendar, a real PyMC fit that recovers each holiday's
own effect (checked against a statsmodels GLM), forecasts of a holiday, and the stored form.

The fit is small (two years of daily counts, no latent) and runs once per session.
"""

from __future__ import annotations

import datetime as dt

import holidays
import numpy as np
import pandas as pd
import pytest

from models.exceptions import CorruptArtefact, InputError
from models.fitting.build import build_joint_model
from models.fitting.options import FitOptions
from models.fitting.sampling import fit_model
from models.prediction.posterior import CompactPosterior
from models.prediction.windows import forecast
from models.ratemodel.binning import BinnedSeries, bin_grid
from models.ratemodel.design import Calendar, JointData, make_model_data
from models.ratemodel.spec import HolidayCalendar, ModelSpec

US = HolidayCalendar(country="US")
FIRST, DAYS = dt.date(2021, 1, 4), 2 * 364
TRUE_DOW = np.array([0.15, 0.1, 0.1, 0.1, 0.05, -0.25, -0.25])
#: Invented effects (log scale) of some holidays; every other holiday -0.4.
TRUE_NAMED = {
    "Memorial Day": -1.0,
    "Thanksgiving Day": -1.3,
    "Columbus Day": 0.0,
    "Veterans Day": -0.1,
    "Christmas Day": -1.6,
}
OTHER = -0.4
LEVEL = 500.0


def true_log_rate(dates: np.ndarray) -> np.ndarray:
    dow = (dates.astype(np.int64) + 3) % 7  # 1970-01-01 was a Thursday
    names = US.names([d.astype(dt.date) for d in dates])
    effect = np.array([0.0 if n is None else TRUE_NAMED.get(n, OTHER) for n in names])
    return np.log(LEVEL) + TRUE_DOW[dow] + effect


def daily(first: dt.date, counts: np.ndarray) -> BinnedSeries:
    end = first + dt.timedelta(days=len(counts))
    grid = bin_grid(first, end, tz="UTC", bin_minutes=1440)
    return BinnedSeries(grid, counts, np.ones(len(counts)), "UTC", 1440, first, end)


SPEC = ModelSpec(
    bin_minutes=1440,
    time_of_day=False,
    interaction=False,
    trend=False,
    latent_daily=False,
    holidays=US,
    holiday_effects="named",
)


@pytest.fixture(scope="session")
def holiday_fit():  # type: ignore[no-untyped-def]
    # Two years of invented daily counts in which holidays differ.
    dates = np.datetime64(FIRST) + np.arange(DAYS)
    counts = np.random.default_rng(61).poisson(np.exp(true_log_rate(dates)))
    data = make_model_data(daily(FIRST, counts), SPEC)
    options = FitOptions(draws=400, tune=400, chains=2, seed=12, progressbar=False)
    return fit_model(data, SPEC, options=options), counts, dates


class TestNames:
    def test_names_are_the_holidays_packages(self) -> None:
        # Reference: the `holidays` package's own US calendar for 2015 (its names, dates).
        days = [dt.date(2015, 1, 1) + dt.timedelta(days=k) for k in range(365)]
        ours = US.names(days)
        theirs = holidays.country_holidays("US", years=2015)
        assert {d: n for d, n in zip(days, ours, strict=True) if n} == dict(theirs.items())
        assert ours[days.index(dt.date(2015, 7, 3))] == "Independence Day (observed)"

    def test_features_index_each_bin_into_the_sorted_names(self) -> None:
        calendar = Calendar("UTC", 1440, dt.date(2015, 5, 18), dt.date(2015, 6, 1), US)
        grid = bin_grid(dt.date(2015, 5, 18), dt.date(2015, 7, 8), tz="UTC", bin_minutes=1440)
        feats = calendar.features(grid)
        assert feats.holiday_names == (
            "Independence Day",
            "Independence Day (observed)",
            "Memorial Day",
        )
        on = {
            str(d)[:10]: feats.holiday_names[i]
            for d, i in zip(feats.date, feats.holiday_index, strict=True)
            if i >= 0
        }
        assert on == {
            "2015-05-25": "Memorial Day",
            "2015-07-03": "Independence Day (observed)",
            "2015-07-04": "Independence Day",
        }
        np.testing.assert_array_equal(feats.holiday, (feats.holiday_index >= 0).astype(float))

    def test_the_model_data_name_the_holidays_the_history_holds(self) -> None:
        dates = np.datetime64(FIRST) + np.arange(DAYS)
        data = make_model_data(daily(FIRST, np.ones(DAYS, dtype=np.int64)), SPEC)
        seen = {n for n in US.names([d.astype(dt.date) for d in dates]) if n}
        assert data.coords["holiday_name"] == sorted(seen)
        assert data.calendar.holiday_names == tuple(sorted(seen))
        shared = make_model_data(
            daily(FIRST, np.ones(DAYS, dtype=np.int64)), SPEC.with_(holiday_effects="shared")
        )
        assert "holiday_name" not in shared.coords and shared.calendar.holiday_names == ()

    def test_a_bad_choice_and_a_group_are_refused(self) -> None:
        with pytest.raises(InputError, match="holiday_effects 'each' is not one of shared, named"):
            SPEC.with_(holiday_effects="each")
        member = make_model_data(daily(FIRST, np.ones(DAYS, dtype=np.int64)), SPEC)
        with pytest.raises(InputError, match="single-series fits"):
            build_joint_model(JointData(("a", "b"), (member, member)), SPEC)

    def test_the_spec_round_trips_and_shared_specs_read_as_before(self) -> None:
        assert ModelSpec.from_dict(SPEC.to_dict()) == SPEC
        assert "holiday_effects" not in SPEC.with_(holiday_effects="shared").to_dict()


@pytest.mark.slow
class TestNamedFit:
    def test_each_holiday_agrees_with_a_statsmodels_poisson_glm(self, holiday_fit) -> None:
        # Reference: statsmodels GLM (Poisson, log link) with weekday dummies and one dummy per
        # named holiday, unpooled. With about 500 arrivals a day each holiday is measured to a
        # few percent, so the partial pooling moves it little: measured, at most 0.034 (Christmas,
        # the farthest from the others and seen on two weekend days with ~80 arrivals each).
        import statsmodels.api as sm

        fit, counts, dates = holiday_fit
        names = list(fit.data.calendar.holiday_names)
        on = US.names([d.astype(dt.date) for d in dates])
        dow = (dates.astype(np.int64) + 3) % 7
        weekday = pd.get_dummies(pd.Series(dow).astype(str), drop_first=True, dtype=float)
        each = np.array([[float(n == name) for name in names] for n in on])
        glm = sm.GLM(
            counts,
            sm.add_constant(np.column_stack([weekday.to_numpy(), each])),
            family=sm.families.Poisson(),
        ).fit()
        post = fit.idata["posterior"]
        assert post["holiday_named"].dims == ("chain", "draw", "holiday_name")
        ours = (post["holiday_effect"] + post["holiday_named"]).mean(("chain", "draw")).to_numpy()
        np.testing.assert_allclose(ours, glm.params[-len(names) :], atol=0.05)
        # And each holiday's truth lies inside its 99% interval.
        truth = np.array([TRUE_NAMED.get(n, OTHER) for n in names])
        draws = (post["holiday_effect"] + post["holiday_named"]).stack(s=("chain", "draw"))
        lo, hi = np.quantile(
            draws.transpose("s", "holiday_name").to_numpy(), [0.005, 0.995], axis=0
        )
        assert np.all((lo <= truth) & (truth <= hi)), list(zip(names, lo, truth, hi, strict=True))
        assert fit.diagnostics.ok, fit.diagnostics.problems

    def test_a_forecast_of_memorial_day_uses_its_own_effect(self, holiday_fit) -> None:
        fit, _, _ = holiday_fit
        posterior = fit.compact()
        # Memorial Day 2023 (29 May), a Monday, months after the history ends; and the Monday after.
        starts = pd.DatetimeIndex(["2023-05-29", "2023-06-05"]).tz_localize("UTC")
        ends = starts + pd.Timedelta(days=1)
        rows = forecast(posterior, starts, ends, levels=(0.95,)).rows()
        truth = np.exp(true_log_rate(starts.tz_localize(None).to_numpy().astype("datetime64[D]")))
        for row, expected in zip(rows, truth, strict=True):
            assert abs(row["mean"] / expected - 1) < 0.08
            lo, hi = row["intervals"]["0.95"]
            assert lo <= expected <= hi
        # The shared effect (about the mean of all holidays) would put it some 60% too high.
        shared = posterior.holiday_effect.mean()
        assert np.exp(shared - TRUE_NAMED["Memorial Day"]) > 1.5

    def test_the_compact_posterior_keeps_the_names_through_the_store_form(
        self, holiday_fit
    ) -> None:
        fit, _, _ = holiday_fit
        posterior = fit.compact()
        again = CompactPosterior.from_bytes(posterior.to_bytes(), posterior.meta())
        assert again.calendar.holiday_names == fit.data.calendar.holiday_names
        np.testing.assert_array_equal(again.holiday_named, posterior.holiday_named)
        meta = posterior.meta()
        del meta["calendar"]["holiday_names"]
        with pytest.raises(CorruptArtefact, match="holiday_named is present"):
            CompactPosterior.from_bytes(posterior.to_bytes(), meta)

    def test_a_holiday_the_history_never_held_draws_from_the_population(self, holiday_fit) -> None:
        fit, _, _ = holiday_fit
        posterior = fit.compact()
        unseen = posterior.holiday_deviations(("Some New Holiday",))
        assert unseen is not None and unseen.shape == (1, posterior.n_draws)
        # Normal(0, spread) per draw, seeded: the same every time, its scale the spread's.
        np.testing.assert_array_equal(unseen, posterior.holiday_deviations(("Some New Holiday",)))
        z = unseen[0] / posterior.holiday_spread
        assert abs(z.mean()) < 0.15 and abs(z.std() - 1) < 0.1
        seen = posterior.holiday_deviations(("Memorial Day",))
        index = posterior.calendar.holiday_names.index("Memorial Day")
        np.testing.assert_array_equal(seen[0], posterior.holiday_named[:, index])
