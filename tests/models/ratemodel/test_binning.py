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
