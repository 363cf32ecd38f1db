"""Binning of arrival logs and count tables into local-time bins."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from models.exceptions import CountError, InputError, TimestampError
from models.ratemodel.binning import (
    OpeningHours,
    bin_counts,
    bin_events,
    bin_grid,
    check_zone,
    local_features,
    parse_bin_width,
    parse_timestamps,
    read_table,
)

CHICAGO = "America/Chicago"


class TestBinGrid:
    # US daylight saving 2026: starts Sun 8 March, ends Sun 1 November (common practice, no source;
    # cross-checked below against the zone database through zoneinfo).
    def test_spring_forward_day_has_23_hourly_bins(self) -> None:
        grid = bin_grid(dt.date(2026, 3, 8), dt.date(2026, 3, 9), tz=CHICAGO, bin_minutes=60)
        assert len(grid) == 23
        span = pd.Timestamp("2026-03-09", tz=CHICAGO) - pd.Timestamp("2026-03-08", tz=CHICAGO)
        assert span == pd.Timedelta(hours=23)

    def test_fall_back_day_has_25_hourly_and_100_quarter_hour_bins(self) -> None:
        day = dt.date(2026, 11, 1), dt.date(2026, 11, 2)
        assert len(bin_grid(*day, tz=CHICAGO, bin_minutes=60)) == 25
        assert len(bin_grid(*day, tz=CHICAGO, bin_minutes=15)) == 100

    def test_local_features_repeat_the_fall_back_hour(self) -> None:
        grid = bin_grid(dt.date(2026, 11, 1), dt.date(2026, 11, 2), tz=CHICAGO, bin_minutes=60)
        dow, slot, _, _ = local_features(grid, tz=CHICAGO, bin_minutes=60)
        assert slot.tolist()[:4] == [0, 1, 1, 2]
        assert set(dow.tolist()) == {6}  # Sunday


class TestParseTimestamps:
    def test_offsets_are_honoured(self) -> None:
        parsed = parse_timestamps(
            pd.Series(["2026-03-07T23:30:00-06:00", "2026-03-08T03:30:00-05:00"]), tz=CHICAGO
        )
        assert (parsed[1] - parsed[0]) == pd.Timedelta(hours=3)

    def test_naive_times_use_the_zone(self) -> None:
        parsed = parse_timestamps(pd.Series(["2026-07-01 09:00"]), tz=CHICAGO)
        assert parsed[0] == pd.Timestamp("2026-07-01T14:00Z")

    def test_naive_time_in_the_spring_gap_is_refused(self) -> None:
        with pytest.raises(TimestampError, match="spring-forward"):
            parse_timestamps(pd.Series(["2026-03-08 02:30"]), tz=CHICAGO)

    def test_mixed_naive_and_offset_rows_name_the_row(self) -> None:
        with pytest.raises(TimestampError, match="row 2"):
            parse_timestamps(pd.Series(["2026-07-01T09:00-05:00", "2026-07-01 10:00"]), tz=CHICAGO)

    def test_offset_foreign_to_the_zone_is_refused(self) -> None:
        rows = pd.Series(["2026-07-01T09:00-05:00", "2026-07-01T10:00+02:00"])
        with pytest.raises(TimestampError, match=r"row 2.*\+0200"):
            parse_timestamps(rows, tz=CHICAGO)

    def test_one_fixed_offset_such_as_utc_is_fine(self) -> None:
        parsed = parse_timestamps(pd.Series(["2026-07-01T09:00Z", "2026-12-01T09:00Z"]), tz=CHICAGO)
        assert len(parsed) == 2

    def test_unparseable_value_names_row_and_value(self) -> None:
        with pytest.raises(TimestampError, match=r"row 2: 'yesterday'"):
            parse_timestamps(pd.Series(["2026-07-01T09:00Z", "yesterday"]), tz=CHICAGO)

    def test_unknown_zone(self) -> None:
        with pytest.raises(InputError, match="Mars/Olympus"):
            check_zone("Mars/Olympus")


class TestBinEvents:
    def test_counts_and_zeros_and_dst(self) -> None:
        stamps = parse_timestamps(
            pd.Series(
                ["2026-03-08T01:10-06:00", "2026-03-08T01:50-06:00", "2026-03-08T03:05-05:00"]
            ),
            tz=CHICAGO,
        )
        binned = bin_events(stamps, tz=CHICAGO, bin_minutes=60)
        assert len(binned.count) == 23  # a 23-hour day, every hour observed
        assert binned.count.tolist()[:3] == [0, 2, 1]
        assert binned.total == 3

    def test_unsorted_events_name_the_row(self) -> None:
        stamps = parse_timestamps(pd.Series(["2026-07-01T09:00Z", "2026-07-01T08:00Z"]), tz=CHICAGO)
        with pytest.raises(TimestampError, match="row 2"):
            bin_events(stamps, tz=CHICAGO, bin_minutes=60)

    def test_closed_hours_are_unobserved_and_partial_bins_prorated(self) -> None:
        stamps = parse_timestamps(pd.Series(["2026-07-01T07:40-05:00"]), tz=CHICAGO)  # a Wednesday
        hours = OpeningHours.parse("Mon-Fri 07:30-17:00")
        binned = bin_events(stamps, tz=CHICAGO, bin_minutes=60, opening=hours)
        assert len(binned.count) == 10  # 07:00 (half) .. 16:00
        assert binned.exposure[0] == pytest.approx(0.5)
        assert binned.exposure[1:].tolist() == [1.0] * 9

    def test_arrival_in_closed_hours_is_an_error(self) -> None:
        stamps = parse_timestamps(pd.Series(["2026-07-04T10:00-05:00"]), tz=CHICAGO)  # Saturday
        with pytest.raises(InputError, match="declare closed"):
            bin_events(
                stamps,
                tz=CHICAGO,
                bin_minutes=60,
                opening=OpeningHours.parse("Mon-Fri 08:00-17:00"),
            )

    def test_until_cuts_the_last_day(self) -> None:
        stamps = parse_timestamps(pd.Series(["2026-07-01T09:10-05:00"]), tz=CHICAGO)
        until = dt.datetime(2026, 7, 1, 12, 30, tzinfo=check_zone(CHICAGO))
        binned = bin_events(stamps, tz=CHICAGO, bin_minutes=60, until=until)
        assert len(binned.count) == 13
        assert binned.exposure[-1] == pytest.approx(0.5)


class TestBinCounts:
    def frame(self, counts: list[object], starts: list[str] | None = None) -> pd.DataFrame:
        starts = starts or [f"2026-07-01T{h:02d}:00-05:00" for h in range(len(counts))]
        return pd.DataFrame({"start": starts, "count": counts})

    def test_bin_width_inferred_and_gaps_unobserved(self) -> None:
        frame = self.frame(
            [3, 4, 5],
            ["2026-07-01T00:00-05:00", "2026-07-01T00:30-05:00", "2026-07-01T02:00-05:00"],
        )
        binned = bin_counts(frame, tz=CHICAGO)
        assert binned.bin_minutes == 30
        assert len(binned.count) == 3  # the 01:00-02:00 gap is unobserved, not zero

    @pytest.mark.parametrize(
        ("value", "message"),
        [
            (-1, "negative"),
            ("2.5", "whole number"),
            ("n/a", "not a number"),
            (None, "not a number"),
        ],
    )
    def test_bad_counts_name_row_and_value(self, value: object, message: str) -> None:
        with pytest.raises(CountError, match=f"row 2.*{message}"):
            bin_counts(self.frame([1, value, 2]), tz=CHICAGO)

    def test_duplicate_bin(self) -> None:
        starts = ["2026-07-01T00:00-05:00", "2026-07-01T01:00-05:00", "2026-07-01T01:00-05:00"]
        with pytest.raises(InputError, match="duplicate bin: row 3"):
            bin_counts(self.frame([1, 2, 3], starts), tz=CHICAGO)

    def test_unsorted_rows(self) -> None:
        starts = ["2026-07-01T01:00-05:00", "2026-07-01T00:00-05:00"]
        with pytest.raises(TimestampError, match="not in time order: row 2"):
            bin_counts(self.frame([1, 2], starts), tz=CHICAGO)

    def test_misaligned_start(self) -> None:
        starts = ["2026-07-01T00:00-05:00", "2026-07-01T01:10-05:00"]
        with pytest.raises(TimestampError, match="boundary"):
            bin_counts(self.frame([1, 2], starts), tz=CHICAGO, bin_minutes=60)

    def test_missing_column(self) -> None:
        with pytest.raises(InputError, match="no column 'count'"):
            bin_counts(pd.DataFrame({"start": ["2026-07-01T00:00Z"]}), tz=CHICAGO)


class TestOpeningHours:
    def test_parse_ranges_lists_and_wraparound(self) -> None:
        hours = OpeningHours.parse("Fri-Mon 10:00-12:00; Wed 09:00-10:00,13:00-24:00")
        open_days = [i for i, spans in enumerate(hours.spans) if spans]
        assert open_days == [0, 2, 4, 5, 6]
        assert hours.spans[2] == ((540, 600), (780, 1440))

    @pytest.mark.parametrize(
        "text", ["Funday 09:00-10:00", "Mon 10:00-10:00", "Mon 25:00-26:00", "Mon 9-10", ""]
    )
    def test_bad_rules_are_refused_with_the_text(self, text: str) -> None:
        with pytest.raises(InputError):
            OpeningHours.parse(text)


class TestMisc:
    def test_bin_width_labels(self) -> None:
        assert parse_bin_width("15min") == 15
        with pytest.raises(InputError, match=r"'2h'.*15min, 30min, 1h"):
            parse_bin_width("2h")

    def test_read_table_by_suffix(self, tmp_path) -> None:  # type: ignore[no-untyped-def]
        frame = pd.DataFrame({"start": ["2026-07-01T00:00Z"], "count": [3]})
        frame.to_parquet(tmp_path / "c.parquet")
        assert read_table(tmp_path / "c.parquet")["count"].tolist() == [3]
        (tmp_path / "c.xlsx").write_text("x")
        with pytest.raises(InputError, match="suffix"):
            read_table(tmp_path / "c.xlsx")
        assert np.array_equal(read_table(tmp_path / "c.parquet")["count"], [3])


class TestOvernightAndAlwaysOpen:
    def test_overnight_clause_runs_into_the_next_morning(self) -> None:
        hours = OpeningHours.parse("Mon-Fri 18:00-08:00")
        assert hours.spans[0] == ((1080, 1440),)  # Monday: from 18:00 (Sunday is closed)
        assert hours.spans[1] == ((0, 480), (1080, 1440))  # Tuesday: until 08:00, again at 18:00
        assert hours.spans[5] == ((0, 480),)  # Saturday: Friday's night until 08:00
        assert hours.spans[6] == ()

    def test_sunday_night_wraps_to_monday_and_midnight_close_adds_nothing(self) -> None:
        assert OpeningHours.parse("Sun 22:00-02:00").spans[0] == ((0, 120),)
        assert OpeningHours.parse("Sun 22:00-00:00").spans[0] == ()

    def test_overlapping_spans_are_joined(self) -> None:
        hours = OpeningHours.parse("daily 20:00-06:00; Mon 05:00-09:00")
        assert hours.spans[0] == ((0, 540), (1200, 1440))
        # A bin half covered by two overlapping spans is half open, not fully (sum of overlaps).
        twice = OpeningHours.parse("Mon 09:00-09:30, 09:15-09:30")
        assert twice.open_fraction(dow=np.array([0]), start_minute=np.array([540]), bin_minutes=60)[
            0
        ] == pytest.approx(0.5)

    def test_always_keeps_every_minute_open(self) -> None:
        hours = OpeningHours.parse("always")
        assert hours.always_open and hours.text == "always"
        assert OpeningHours.parse("daily 00:00-24:00").always_open

    @pytest.mark.parametrize(
        ("text", "named"),
        [
            ("always; Mon 09:00-10:00", "stands alone"),
            ("Mon 09:00-09:00", "opens and closes at the same time"),
            ("Mon 24:00-02:00", "within 00:00-24:00"),
        ],
    )
    def test_refusals_say_what_is_allowed(self, text: str, named: str) -> None:
        with pytest.raises(InputError, match=named):
            OpeningHours.parse(text)

    def test_overnight_exposure_across_the_start_of_dst(self) -> None:
        # Saturday 7 to Sunday 8 March 2026 in Chicago: 18:00-08:00 is 13 hours of absolute time
        # because 02:00-03:00 does not exist (US DST dates: common practice, no source).
        stamps = parse_timestamps(
            pd.Series(["2026-03-07T19:00-06:00", "2026-03-08T07:30-05:00"]), tz=CHICAGO
        )
        binned = bin_events(
            stamps, tz=CHICAGO, bin_minutes=60, opening=OpeningHours.parse("Sat 18:00-08:00")
        )
        assert binned.exposure.sum() == pytest.approx(13.0)
        assert binned.total == 2


class TestUntil:
    def stamps(self) -> pd.DatetimeIndex:
        return parse_timestamps(
            pd.Series(["2026-07-01T07:40-05:00", "2026-07-01T09:10-05:00"]), tz=CHICAGO
        )

    def test_until_after_the_last_day_is_refused_with_the_allowed_range(self) -> None:
        until = dt.datetime(2030, 1, 1, tzinfo=check_zone(CHICAGO))
        with pytest.raises(
            InputError,
            match=r"2030-01-01T00:00:00-06:00 is after the end of the last arrival's day.*"
            r"allowed: after the last arrival \(2026-07-01T09:10:00-05:00\) and no later than "
            r"2026-07-02T00:00:00-05:00",
        ):
            bin_events(self.stamps(), tz=CHICAGO, bin_minutes=60, until=until)

    def test_until_after_now_is_refused(self) -> None:
        now = dt.datetime(2026, 7, 1, 16, 0, tzinfo=dt.UTC)  # 11:00 in Chicago
        until = dt.datetime(2026, 7, 1, 12, 0, tzinfo=check_zone(CHICAGO))
        with pytest.raises(InputError, match=r"is in the future \(now 2026-07-01T11:00:00-05:00\)"):
            bin_events(self.stamps(), tz=CHICAGO, bin_minutes=60, until=until, now=now)

    def test_a_last_day_that_has_not_ended_needs_until(self) -> None:
        now = dt.datetime(2026, 7, 1, 16, 0, tzinfo=dt.UTC)
        with pytest.raises(InputError, match=r"has not ended yet.*Pass --until"):
            bin_events(self.stamps(), tz=CHICAGO, bin_minutes=60, now=now)
        until = dt.datetime(2026, 7, 1, 10, 30, tzinfo=check_zone(CHICAGO))
        binned = bin_events(self.stamps(), tz=CHICAGO, bin_minutes=60, until=until, now=now)
        assert binned.exposure[-1] == pytest.approx(0.5)

    def test_a_cut_inside_a_partly_open_bin_counts_its_open_minutes(self) -> None:
        # Opens 07:30; cut at 07:45: the 07:00 bin was observed open for 15 minutes (0.25).
        stamps = parse_timestamps(pd.Series(["2026-07-01T07:35-05:00"]), tz=CHICAGO)
        until = dt.datetime(2026, 7, 1, 7, 45, tzinfo=check_zone(CHICAGO))
        binned = bin_events(
            stamps,
            tz=CHICAGO,
            bin_minutes=60,
            opening=OpeningHours.parse("Mon-Fri 07:30-17:00"),
            until=until,
        )
        assert binned.exposure.tolist() == [pytest.approx(0.25)]


class TestDeclaredBinWidth:
    def frame(self, minutes: int, n: int = 6) -> pd.DataFrame:
        starts = pd.date_range("2026-07-01", periods=n, freq=f"{minutes}min", tz=CHICAGO)
        return pd.DataFrame({"start": [t.isoformat() for t in starts], "count": ["3"] * n})

    def test_quarter_hours_declared_on_hourly_rows_are_refused(self) -> None:
        with pytest.raises(
            InputError,
            match=r"declared bin width 15min does not match the rows: the closest rows "
            r"\(row 1 and row 2\) are 60 min apart.*use --bin 1h",
        ):
            bin_counts(self.frame(60), tz=CHICAGO, bin_minutes=15)

    def test_rows_finer_than_the_declared_width_are_refused(self) -> None:
        with pytest.raises(InputError, match=r"rows are finer than the declared bin width 1h.*30"):
            bin_counts(self.frame(30), tz=CHICAGO, bin_minutes=60)

    def test_a_matching_width_is_read(self) -> None:
        assert bin_counts(self.frame(30), tz=CHICAGO, bin_minutes=30).bin_minutes == 30


class TestReadTable:
    def write(self, tmp_path, data: bytes, name: str = "c.csv"):  # type: ignore[no-untyped-def]
        path = tmp_path / name
        path.write_bytes(data)
        return path

    @pytest.mark.parametrize(
        ("data", "message"),
        [
            (b"", "is empty; it needs a header row"),
            (b"\n\n", "holds no header row"),
            (b"start,count\n", r"has a header \(start, count\) but no data rows"),
            (b"start,count\n2026-07-01T00:00Z,\xff3\n", "is not UTF-8 text: byte 0xff on line 2"),
            (b"h\xe9ure,count\n2026-07-01T00:00Z,3\n", "is not UTF-8 text: byte 0xe9 on line 1"),
            (b"start;count\n2026-07-01T00:00Z;3\n", "is separated by semicolons"),
            (b"start\tcount\n2026-07-01T00:00Z\t3\n", "is separated by tabs"),
            (b"start,count\n2026-07-01T00:00Z,3,4\n", "more fields than the header"),
            (b"start,count\n2026-07-01T00:00Z,3\n2026-07-01T01:00Z,3,4\n", "not well-formed CSV"),
        ],
    )
    def test_bad_files_name_the_file_and_what_to_do(self, tmp_path, data, message) -> None:
        path = self.write(tmp_path, data)
        with pytest.raises(InputError, match=message) as caught:
            read_table(path)
        assert str(path) in str(caught.value)

    def test_path_problems(self, tmp_path) -> None:
        with pytest.raises(InputError, match="does not exist"):
            read_table(tmp_path / "missing.csv")
        with pytest.raises(InputError, match="is a folder, not a file"):
            read_table(tmp_path)
        with pytest.raises(InputError, match=r"cannot be opened: File name too long") as caught:
            read_table("x" * 5000 + ".csv")
        assert len(str(caught.value)) < 200  # the path is shortened in the message
        with pytest.raises(InputError, match="not a readable Parquet file"):
            read_table(self.write(tmp_path, b"not parquet", "c.parquet"))

    def test_rows_are_named_by_their_line_in_the_file(self, tmp_path) -> None:
        path = self.write(
            tmp_path, b"\xef\xbb\xbfstart,count\n2026-07-01T00:00Z,1\n\n2026-07-01T01:00Z,2.5\n"
        )
        table = read_table(path)  # byte-order mark allowed, blank line skipped
        assert table.index.tolist() == [2, 4]
        with pytest.raises(CountError, match=r"column 'count' line 4: '2.5' is not a whole"):
            bin_counts(table, tz="UTC")

    def test_parquet_rows_are_counted_from_one(self, tmp_path) -> None:
        pd.DataFrame(
            {"start": ["2026-07-01T00:00Z", "2026-07-01T01:00Z"], "count": [1, -1]}
        ).to_parquet(tmp_path / "c.parquet")
        with pytest.raises(CountError, match=r"row 2: -1 is negative"):
            bin_counts(read_table(tmp_path / "c.parquet"), tz="UTC")
