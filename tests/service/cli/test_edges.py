"""The CLI right at the edges (issue 11), on a store of synthetic series with closed hours.

Numbers are checked against direct library calls (themselves tested against scipy and hand
integrals in tests/models/prediction/test_windows.py) or against the opening hours themselves;
here the point is that long ranges are answered, closed time is zero, outputs are plain and
consistent, and bad input gets one line naming it.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import io
import json
import logging
import threading
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from models.prediction.windows import expected_counts
from models.ratemodel.binning import OpeningHours
from models.store import FileStore
from service.cli import main
from service.cli.app import build_parser, package_version
from service.cli.common import progress_lines, quiet_arviz_nan_note, quiet_library_warnings
from tests.conftest import synthetic_posterior

TZ = "America/Chicago"
HOURS = OpeningHours.parse("Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00")
HISTORY_END = "2026-03-02"  # synthetic_posterior: 28 days from Monday 2026-02-02
STAFF = ["--handle-time", "240", "--answer-within", "60", "--target", "0.8"]


def is_open(stamps: pd.Series | pd.DatetimeIndex) -> np.ndarray:
    """Whether each instant lies inside HOURS, read off the local wall clock."""
    local = pd.DatetimeIndex(pd.to_datetime(stamps, utc=True)).tz_convert(TZ)
    minute = np.asarray(local.hour * 60 + local.minute)
    weekday = np.asarray(local.day_of_week) < 5
    return np.where(weekday, (minute >= 390) & (minute < 1260), (minute >= 480) & (minute < 1080))


def wholly_closed(starts: pd.Series, minutes: int) -> np.ndarray:
    """Whether each window of ``minutes`` from ``starts`` is closed throughout (HOURS change
    state on the half hour only, so its quarter-hours tell)."""
    stamps = pd.DatetimeIndex(pd.to_datetime(starts, utc=True))
    quarters = [is_open(stamps + pd.Timedelta(minutes=m)) for m in range(0, minutes, 15)]
    return ~np.any(quarters, axis=0)


@pytest.fixture(scope="module")
def store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    hours = np.arange(24)
    day = 1.0 + 9.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    table = 6 * np.array([1.0, 1.1, 1.05, 1.0, 1.3, 0.6, 0.5])[:, None] * day[None, :]
    desk = synthetic_posterior(
        table,
        draws=60,
        opening=HOURS,
        latent_rho=0.6,
        latent_sd=0.2,
        latent_last=0.1,
        dispersion=10.0,
    )
    root = tmp_path_factory.mktemp("edges")
    manifest = {
        "data": {"first_day": "2026-02-02", "end_day": HISTORY_END, "tz": TZ},
        "diagnostics": {"ok": True},
    }
    FileStore(root).publish("desk", desk, manifest=manifest)
    night = synthetic_posterior(
        np.full((7, 48), 4.0), bin_minutes=30, opening=OpeningHours.parse("daily 18:00-08:00")
    )
    FileStore(root).publish("night", night, manifest=manifest)
    return root


def run(capsys: pytest.CaptureFixture[str], store: Path, *args: str) -> tuple[int, str, str]:
    code = main([*args, "--store", str(store)])
    out, err = capsys.readouterr()
    return code, out, err


def forecast_json(capsys, store, *args: str) -> dict:  # type: ignore[no-untyped-def, type-arg]
    code, out, err = run(capsys, store, "forecast", "--series", "desk", *args, "--format", "json")
    assert code == 0, err
    return json.loads(out)  # type: ignore[no-any-return]


class TestLongRanges:
    """A week at 15, 30 and 60 minutes, and 400 days at one day, with closed hours."""

    @pytest.mark.parametrize(("step", "minutes"), [("15min", 15), ("30min", 30), ("1h", 60)])
    def test_a_week_of_windows_is_answered_with_closed_time_zero(
        self, capsys, store, step: str, minutes: int
    ) -> None:
        doc = forecast_json(
            capsys, store, "--start", "2026-03-02", "--end", "2026-03-09", "--step", step, "--total"
        )
        windows = doc["windows"]
        assert len(windows) == (7 * 24 - 1) * 60 // minutes  # Sunday 8 March has 23 hours
        closed = wholly_closed(pd.Series([w["start"] for w in windows]), minutes)
        assert closed.sum() > 0
        for window, shut in zip(windows, closed, strict=True):
            if shut:
                assert window["mean"] == 0.0 and window["p_zero"] == 1.0
            else:
                assert window["mean"] > 0.0
        # The total comes from the same draws: its mean is the sum of the windows' means.
        assert doc["total"]["mean"] == pytest.approx(sum(w["mean"] for w in windows), rel=1e-9)

    def test_400_days_at_one_day(self, capsys, store) -> None:
        end = (dt.date.fromisoformat(HISTORY_END) + dt.timedelta(days=400)).isoformat()
        doc = forecast_json(capsys, store, "--start", HISTORY_END, "--end", end, "--step", "1d")
        assert len(doc["windows"]) == 400
        assert all(w["mean"] > 0 for w in doc["windows"])

    @pytest.mark.parametrize(("step", "count"), [("15min", 668), ("30min", 334), ("1h", 167)])
    def test_a_week_of_staffing(self, capsys, store, step: str, count: int) -> None:
        len_minutes = {"15min": 15, "30min": 30, "1h": 60}
        code, out, err = run(
            capsys, store, "staff", "--series", "desk", "--start", "2026-03-02",
            "--end", "2026-03-09", "--step", step, *STAFF, "--format", "json",
        )  # fmt: skip
        assert code == 0, err
        rows = json.loads(out)["intervals"]
        assert len(rows) == count
        closed = wholly_closed(pd.Series([r["start"] for r in rows]), int(len_minutes[step]))
        for row, shut in zip(rows, closed, strict=True):
            if shut:  # nobody is needed while the desk is closed
                assert row["mean_arrivals"] == 0.0
                assert row["plug_in"]["agents"] == 0 and row["assured"]["agents"] == 0

    def test_400_days_of_hourly_staffing(self, capsys, store) -> None:
        end = (dt.date.fromisoformat(HISTORY_END) + dt.timedelta(days=400)).isoformat()
        code, out, err = run(
            capsys, store, "staff", "--series", "desk", "--start", HISTORY_END, "--end", end,
            "--step", "1h", *STAFF, "--format", "csv",
        )  # fmt: skip
        assert code == 0, err
        rows = list(csv.DictReader(io.StringIO(out)))
        assert len(rows) == 400 * 24 - 1  # two 23-hour days (March 2026, 2027) and one of 25
        assert len({r["start"][:10] for r in rows}) == 400


class TestClosedTime:
    def test_the_closed_half_hour_is_zero_and_the_open_half_gets_the_bin(
        self, capsys, store
    ) -> None:
        doc = forecast_json(
            capsys, store, "--start", "2026-03-03T06:00", "--end", "2026-03-03T07:00",
            "--step", "30min",
        )  # fmt: skip
        closed, opened = doc["windows"]
        assert closed["mean"] == 0.0 and closed["p_zero"] == 1.0
        assert closed["intervals"]["0.95"] == [0, 0]
        posterior = FileStore(store).load("desk").posterior
        hour = pd.DatetimeIndex([pd.Timestamp("2026-03-03T06:00", tz=TZ)])
        lam = expected_counts(posterior, hour, hour + pd.Timedelta(hours=1))
        assert opened["mean"] == pytest.approx(float(lam.mean()), rel=1e-9)

    def test_staffing_gives_the_closed_half_hour_no_agents(self, capsys, store) -> None:
        code, out, _ = run(
            capsys, store, "staff", "--series", "desk", "--start", "2026-03-03T06:00",
            "--end", "2026-03-03T07:00", *STAFF, "--format", "json",
        )  # fmt: skip
        assert code == 0
        closed, opened = json.loads(out)["intervals"]
        assert closed["assured"]["agents"] == 0 and closed["plug_in"]["agents"] == 0
        assert opened["assured"]["agents"] >= 1

    def test_simulate_100_replicates_over_a_week_never_in_closed_time(
        self, capsys, store, tmp_path
    ) -> None:
        out_file = tmp_path / "week.csv"
        code, _, err = run(
            capsys, store, "simulate", "--series", "desk", "--start", "2026-03-02",
            "--end", "2026-03-09", "--replicates", "100", "--seed", "1", "--out", str(out_file),
        )  # fmt: skip
        assert code == 0, err
        table = pd.read_csv(out_file)
        assert table["replicate"].nunique() == 100
        assert is_open(table["timestamp"]).all()

    def test_overnight_hours_forecast_the_night_and_zero_by_day(self, capsys, store) -> None:
        code, out, _ = run(
            capsys, store, "forecast", "--series", "night", "--start", "2026-03-03T12:00",
            "--end", "2026-03-04T12:00", "--step", "1h", "--format", "json",
        )  # fmt: skip
        assert code == 0
        means = [w["mean"] for w in json.loads(out)["windows"]]
        # Open 18:00-08:00 at 4 an hour: 12:00-18:00 and 08:00-12:00 closed, the night open.
        assert means == pytest.approx([0.0] * 6 + [4.0] * 14 + [0.0] * 4)


class TestStrictDates:
    @pytest.mark.parametrize("text", ["05/04/2026", "27/04/2026", "April 27 2026 9am"])
    @pytest.mark.parametrize("command", ["forecast", "staff", "simulate"])
    def test_guessable_dates_are_refused_with_the_accepted_forms(
        self, capsys, store, tmp_path, command: str, text: str
    ) -> None:
        extra = {"staff": STAFF, "simulate": ["--out", str(tmp_path / "a.csv")], "forecast": []}
        code, _, err = run(
            capsys, store, command, "--series", "desk", "--start", text,
            "--end", "2026-03-04", *extra[command],
        )  # fmt: skip
        assert code == 2
        assert f"time {text!r} is not an ISO 8601 date-time; accepted:" in err
        assert err.count("\n") == 1

    def test_update_and_fit_use_the_same_parser(self, capsys, store, tmp_path) -> None:
        observed = tmp_path / "today.csv"
        observed.write_text("start,count\n2026-03-03T08:00,9\n")
        code, _, err = run(
            capsys, store, "update", "--series", "desk", "--observed", str(observed),
            "--end", "03/03/2026 17:00",
        )  # fmt: skip
        assert code == 2 and "accepted:" in err
        counts = tmp_path / "c.csv"
        counts.write_text("timestamp\n2026-03-03T08:00-06:00\n")
        code, _, err = run(
            capsys, store, "fit", "--series", "x", "--events", str(counts), "--tz", TZ,
            "--until", "March 4 2026",
        )  # fmt: skip
        assert code == 2 and "accepted:" in err


class TestHistoryInputs:
    @pytest.fixture
    def hourly(self, tmp_path: Path) -> Path:
        starts = pd.date_range("2026-06-01", periods=48, freq="1h", tz=TZ)
        path = tmp_path / "hourly.csv"
        pd.DataFrame({"start": [t.isoformat() for t in starts], "count": 3}).to_csv(
            path, index=False
        )
        return path

    def fit(self, capsys, store, *args: str) -> tuple[int, str]:  # type: ignore[no-untyped-def]
        code, _, err = run(capsys, store, "fit", "--series", "x", "--tz", TZ, *args)
        return code, err

    def test_until_years_after_the_last_arrival_is_refused(self, capsys, tmp_path) -> None:
        events = tmp_path / "e.csv"
        events.write_text("timestamp\n2026-06-01T08:00-05:00\n2026-06-01T09:30-05:00\n")
        code, err = self.fit(capsys, tmp_path, "--events", str(events), "--until", "2030-01-01")
        assert code == 2
        assert "2030-01-01T00:00:00-06:00 is after the end of the last arrival's day" in err
        assert "no later than 2026-06-02T00:00:00-05:00" in err

    def test_until_with_a_counts_file_is_refused(self, capsys, tmp_path, hourly) -> None:
        code, err = self.fit(capsys, tmp_path, "--counts", str(hourly), "--until", "2026-06-02")
        assert code == 2 and "--until applies to --events only" in err

    def test_quarter_hour_bins_on_hourly_rows_are_refused(self, capsys, tmp_path, hourly) -> None:
        code, err = self.fit(capsys, tmp_path, "--counts", str(hourly), "--bin", "15min")
        assert code == 2
        assert "declared bin width 15min does not match the rows" in err
        assert "(line 2 and line 3) are 60 min apart" in err and "use --bin 1h" in err

    def test_rows_finer_than_the_declared_bin_are_refused(self, capsys, tmp_path, hourly) -> None:
        frame = pd.read_csv(hourly)
        half = pd.date_range("2026-06-03", periods=2, freq="30min", tz=TZ)
        extra = pd.DataFrame({"start": [t.isoformat() for t in half], "count": 1})
        pd.concat([frame, extra]).to_csv(hourly, index=False)
        code, err = self.fit(capsys, tmp_path, "--counts", str(hourly), "--bin", "1h")
        assert code == 2
        assert "rows are finer than the declared bin width 1h: line 50 and line 51" in err

    def test_row_numbers_are_the_files_line_numbers(self, capsys, tmp_path, hourly) -> None:
        lines = hourly.read_text().splitlines()
        lines[6] = lines[6].rsplit(",", 1)[0] + ",-2"  # line 7 of the file
        hourly.write_text("\n".join(lines) + "\n")
        code, err = self.fit(capsys, tmp_path, "--counts", str(hourly))
        assert code == 2
        assert f"file {str(hourly)!r}: column 'count' line 7: '-2' is negative" in err

    def test_history_end_is_printed_as_an_exclusive_bound(self, capsys, tmp_path, hourly) -> None:
        # --draws 5 is refused by the sampler after the history line is printed.
        code, err = self.fit(capsys, tmp_path, "--counts", str(hourly), "--draws", "5")
        assert code == 2
        assert "history 2026-06-01 00:00 up to 2026-06-03 00:00 (end exclusive" in err

    @pytest.mark.parametrize(
        ("data", "says"),
        [
            (b"", "is empty"),
            (b"start,count\n2026-06-01T00:00,\xe93\n", "is not UTF-8 text: byte 0xe9 on line 2"),
            (b"st\xe4rt,count\n2026-06-01T00:00,3\n", "is not UTF-8 text: byte 0xe4 on line 1"),
            (b"start;count\n2026-06-01T00:00;3\n", "separated by semicolons"),
        ],
    )
    def test_bad_files_give_one_line_naming_the_file(
        self, capsys, tmp_path, data: bytes, says: str
    ) -> None:
        path = tmp_path / "bad.csv"
        path.write_bytes(data)
        code, err = self.fit(capsys, tmp_path, "--counts", str(path))
        assert code == 2
        assert says in err and str(path) in err
        assert err.count("\n") == 1 and "Traceback" not in err

    @pytest.mark.parametrize("kind", ["missing", "folder", "too long"])
    def test_path_problems_give_one_line(self, capsys, tmp_path, kind: str) -> None:
        path = {
            "missing": str(tmp_path / "nope.csv"),
            "folder": str(tmp_path),
            "too long": "y" * 5000 + ".csv",
        }[kind]
        code, err = self.fit(capsys, tmp_path, "--counts", path)
        assert code == 2
        assert err.count("\n") == 1 and len(err) < 300


class TestStore:
    def test_a_missing_store_folder_is_named(self, capsys, tmp_path) -> None:
        missing = tmp_path / "no-such-store"
        code, _, err = run(
            capsys, missing, "forecast", "--series", "desk", "--start", "2026-03-03",
            "--end", "2026-03-04",
        )  # fmt: skip
        assert code == 5
        assert f"store folder {str(missing)!r} (--store) does not exist" in err

    def test_series_listing_says_the_end_is_exclusive(self, capsys, store) -> None:
        code, out, _ = run(capsys, store, "series")
        assert code == 0
        assert "history 2026-02-02 up to 2026-03-02 (end exclusive)" in out


class TestOutputs:
    def test_csv_with_total_keeps_the_total_row(self, capsys, store) -> None:
        code, out, _ = run(
            capsys, store, "forecast", "--series", "desk", "--start", "2026-03-03T08:00",
            "--end", "2026-03-03T11:00", "--step", "1h", "--total", "--format", "csv",
        )  # fmt: skip
        assert code == 0
        rows = list(csv.DictReader(io.StringIO(out)))
        assert [r["row"] for r in rows] == ["window"] * 3 + ["total"]  # the API's CSV columns
        assert {r["degraded"] for r in rows} == {"False"}
        total = rows[-1]
        assert total["start"] == rows[0]["start"] and total["end"] == rows[2]["end"]
        assert float(total["mean"]) == pytest.approx(sum(float(r["mean"]) for r in rows[:3]), 1e-3)

    def test_staffing_csv_is_plain_csv_with_the_caution_in_a_column(self, capsys, store) -> None:
        code, out, _ = run(
            capsys, store, "staff", "--series", "desk", "--start", "2026-03-03T08:00",
            "--end", "2026-03-03T10:00", *STAFF, "--format", "csv",
        )  # fmt: skip
        assert code == 0
        assert not any(line.startswith("#") for line in out.splitlines())
        rows = list(csv.reader(io.StringIO(out)))
        assert {len(r) for r in rows} == {len(rows[0])}  # every line has the header's fields
        assert rows[0][-1] == "caution"
        assert all("advisory" in r[-1] for r in rows[1:])

    def test_the_staffing_table_says_scheduled_as_csv_and_json_do(self, capsys, store) -> None:
        code, out, _ = run(
            capsys, store, "staff", "--series", "desk", "--start", "2026-03-03T08:00",
            "--end", "2026-03-03T10:00", *STAFF,
        )  # fmt: skip
        assert code == 0
        assert "scheduled mean" in out and "scheduled-h mean" in out
        assert "paid" not in out.lower()

    def test_values_in_messages_are_plain(self, capsys, store, tmp_path) -> None:
        observed = tmp_path / "today.csv"
        observed.write_text("start,count\n2026-03-03T08:00,4\n2026-03-03T09:00,-1\n")
        code, _, err = run(capsys, store, "update", "--series", "desk", "--observed", str(observed))
        assert code == 2
        assert "line 3: '-1' is negative" in err
        assert "np." not in err

    def test_a_whole_day_is_labelled_by_its_date(self, capsys, store) -> None:
        code, out, _ = run(
            capsys, store, "forecast", "--series", "desk", "--start", "2026-03-03",
            "--end", "2026-03-05", "--step", "1d",
        )  # fmt: skip
        assert code == 0
        assert "Tue 2026-03-03  " in out and "Wed 2026-03-04  " in out
        assert "00:00-00:00" not in out

    def test_the_repeated_dst_hour_carries_its_offset(self, capsys, store) -> None:
        # Sunday 1 November 2026, Chicago: 01:00-02:00 happens twice (common practice, no source).
        code, out, _ = run(
            capsys, store, "forecast", "--series", "desk", "--start", "2026-11-01T00:00",
            "--end", "2026-11-01T03:00", "--step", "1h",
        )  # fmt: skip
        assert code == 0
        labels = [line.split("  ")[0] for line in out.splitlines()[2:6]]
        assert labels == [
            "Sun 2026-11-01 00:00-01:00 (UTC-05:00)",
            "Sun 2026-11-01 01:00 (UTC-05:00)-01:00 (UTC-06:00)",
            "Sun 2026-11-01 01:00 (UTC-06:00)-02:00",
            "Sun 2026-11-01 02:00-03:00",
        ]


class TestHelpAndVersion:
    def test_every_option_with_a_default_states_it(self) -> None:
        parser = build_parser()
        commands = next(
            a for a in parser._actions if isinstance(a, argparse._SubParsersAction)
        ).choices
        missing = []
        for name, command in commands.items():
            command.format_help()  # every help text renders
            formatter = command._get_formatter()
            for action in command._actions:
                flag = action.nargs == 0 or isinstance(action, argparse._HelpAction)
                if not action.option_strings or action.required or flag:
                    continue
                if "default" not in formatter._get_help_string(action).lower():
                    missing.append(f"{name} {action.option_strings[0]}")
        assert missing == []

    @pytest.mark.parametrize(
        ("command", "option", "shown"),
        [
            ("forecast", "--levels", "(default: 0.8,0.95)"),
            ("forecast", "--format", "(default: table)"),
            ("staff", "--meet-probability", "(default: 0.9)"),
            ("backtest", "--horizon", "(default: 7)"),
            ("simulate", "--replicates", "(default: 1)"),
            ("fit", "--draws", "(default 1000)"),
        ],
    )
    def test_named_defaults_appear_in_help(self, capsys, command, option, shown) -> None:
        with pytest.raises(SystemExit):
            main([command, "--help"])
        text = " ".join(capsys.readouterr().out.split())
        text = text[text.index("options:") :]
        after = text[text.index(option + " ") :]
        assert shown in after[:300]

    def test_version(self, capsys) -> None:
        with pytest.raises(SystemExit) as done:
            main(["--version"])
        assert done.value.code == 0
        assert capsys.readouterr().out.strip() == f"ratecast {package_version()}"


class TestQuietFit:
    def test_only_the_known_library_notices_are_silenced(self) -> None:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            quiet_library_warnings()
            warnings.warn("PyTensor could not link to a BLAS installation.", UserWarning, 1)
            warnings.warn("\nArviZ is undergoing a major refactor ...", FutureWarning, 1)
            with pytest.raises(UserWarning, match="something else"):
                warnings.warn("something else", UserWarning, 1)
        assert logging.getLogger("pytensor.tensor.blas").getEffectiveLevel() == logging.ERROR

    def test_arviz_nan_note_is_dropped_and_other_notes_kept(self) -> None:
        import arviz

        seen: list[str] = []

        class Keep(logging.Handler):
            def emit(self, record: logging.LogRecord) -> None:
                seen.append(record.getMessage())

        handler = Keep()
        arviz._log.addHandler(handler)
        try:
            quiet_arviz_nan_note()
            arviz._log.warning("Array contains NaN-value.")
            arviz._log.warning("a note the edge test keeps")
        finally:
            arviz._log.removeHandler(handler)
        assert seen == ["a note the edge test keeps"]

    def test_progress_lines_appear_while_the_work_runs(self) -> None:
        stream = io.StringIO()
        release = threading.Event()
        lines_seen_during_work: list[int] = []

        def work() -> None:
            with progress_lines("fitting x", every=0.01, stream=stream):
                deadline = time.monotonic() + 30
                while stream.getvalue().count("\n") < 2 and time.monotonic() < deadline:
                    time.sleep(0.005)
                lines_seen_during_work.append(stream.getvalue().count("\n"))
                release.wait(5)

        worker = threading.Thread(target=work)
        worker.start()
        while not lines_seen_during_work and worker.is_alive():
            time.sleep(0.005)
        release.set()
        worker.join()
        assert lines_seen_during_work[0] >= 2  # written before the work finished
        assert stream.getvalue().startswith("fitting x: still running, 0:00 elapsed\n")
