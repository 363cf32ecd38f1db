"""Fit plans are validated whole before anything is fitted; entries inherit the defaults."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from service.defaults import (
    DEFAULT_HOLIDAY_EFFECTS,
    DEFAULT_LATENT_BY_WEEKDAY,
    DEFAULT_OBSERVATION,
    DEFAULT_UNUSUAL_DAYS,
)
from service.plans.schema import PlanError, load_plan, parse_plan


@pytest.fixture
def inputs(tmp_path: Path) -> Path:
    for name in ("a.csv", "b.csv", "c.csv"):
        (tmp_path / name).write_text("start,count\n2026-01-05T00:00,1\n")
    return tmp_path


def write(folder: Path, text: str) -> Path:
    path = folder / "plan.toml"
    path.write_text(text)
    return path


class TestValidPlans:
    def test_entries_inherit_defaults_and_override_them(self, inputs: Path) -> None:
        plan = load_plan(
            write(
                inputs,
                """
[defaults]
zone = "America/Chicago"
opening = "Mon-Fri 07:00-19:00"
[defaults.model]
trend = false
[defaults.sampling]
draws = 300

[[series]]
name = "desk-a"
counts = "a.csv"

[[series]]
name = "desk-b"
counts = "b.csv"
zone = "Europe/Dublin"
[series.sampling]
chains = 2
retry = false
""",
            )
        )
        a, b = plan.entries
        assert (a.zone, b.zone) == ("America/Chicago", "Europe/Dublin")
        assert a.opening == b.opening == "Mon-Fri 07:00-19:00"
        assert (
            a.model
            == b.model
            == {
                "observation": DEFAULT_OBSERVATION,
                "unusual_days": DEFAULT_UNUSUAL_DAYS,
                "latent_by_weekday": DEFAULT_LATENT_BY_WEEKDAY,
                "holiday_effects": DEFAULT_HOLIDAY_EFFECTS,
                "trend": False,
            }
        )
        assert a.sampling == {"draws": 300}
        assert b.sampling == {"draws": 300, "chains": 2, "retry": False}
        assert b.fit_options().chains == 2 and b.fit_options().draws == 300
        assert a.fit_options().retry and not b.fit_options().retry
        # Relative paths are the plan file's folder's.
        assert a.members[0].path == str((inputs / "a.csv").resolve())

    def test_a_group_lists_its_members(self, inputs: Path) -> None:
        plan = load_plan(
            write(
                inputs,
                """
[defaults]
zone = "Pacific/Auckland"
[[group]]
name = "north"
members = [{ name = "queue-a", counts = "a.csv" }, { name = "queue-b", counts = "b.csv" }]
""",
            )
        )
        (entry,) = plan.entries
        assert entry.group and [m.name for m in entry.members] == ["queue-a", "queue-b"]
        assert plan.series == ("queue-a", "queue-b")

    def test_the_key_changes_with_settings_and_inputs(self, inputs: Path) -> None:
        from service.plans.tasks import entry_key

        text = '[defaults]\nzone = "UTC"\n[[series]]\nname = "desk-a"\ncounts = "a.csv"\n'
        first = entry_key(load_plan(write(inputs, text)).entries[0])
        assert entry_key(load_plan(write(inputs, text)).entries[0]) == first
        changed = entry_key(
            load_plan(write(inputs, text + "[series.model]\ntrend = false\n")).entries[0]
        )
        assert changed != first
        (inputs / "a.csv").write_text("start,count\n2026-01-05T00:00,2\n")
        assert entry_key(load_plan(write(inputs, text)).entries[0]) != first


class TestBadPlans:
    def test_every_bad_entry_is_reported_with_its_name_and_field(self, inputs: Path) -> None:
        text = """
[defaults]
zone = "America/Chicago"
opening_hour = "Mon 09:00-17:00"

[[series]]
name = "desk-a"
counts = "a.csv"
zone = "Mars/Olympus"

[[series]]
name = "desk-b"
counts = "missing.csv"
bin = "7min"

[[series]]
name = "desk-c"
events = "c.csv"
counts = "c.csv"

[[series]]
name = "desk-a"
counts = "b.csv"
[series.model]
observation = "gauss"
[series.sampling]
draws = 5

[[group]]
name = "lonely"
members = [{ name = "queue-a", counts = "a.csv" }]
"""
        with pytest.raises(PlanError) as caught:
            parse_plan(text, path=inputs / "plan.toml")
        problems = caught.value.problems
        expected = [
            "defaults: unknown key 'opening_hour'",
            "series 'desk-a': zone: time zone 'Mars/Olympus'",
            "series 'desk-b': counts file 'missing.csv' does not exist",
            "series 'desk-b': bin: bin width '7min'",
            "series 'desk-c': give exactly one of 'events' or 'counts'",
            "series 'desk-a': model: observation 'gauss'",
            "series 'desk-a': sampling: draws 5 must be >= 10",
            "group 'lonely': members must list at least two series",
        ]
        for fragment in expected:
            assert any(p.startswith(fragment) for p in problems), (fragment, problems)

    def test_holiday_effects_are_checked_and_groups_cannot_name_them(self, inputs: Path) -> None:
        text = """
[defaults]
zone = "UTC"
[[series]]
name = "desk-a"
counts = "a.csv"
model = { holiday_effects = "each" }
[[group]]
name = "pair"
members = [{ name = "queue-a", counts = "a.csv" }, { name = "queue-b", counts = "b.csv" }]
model = { holiday_effects = "named" }
"""
        with pytest.raises(PlanError) as caught:
            parse_plan(text, path=inputs / "plan.toml")
        assert caught.value.problems == [
            "series 'desk-a': model: holiday_effects 'each' is not one of auto, shared, named",
            "group 'pair': model: holiday_effects 'named' is not available for groups; use auto "
            "or shared",
        ]

    def test_a_series_in_two_entries_is_refused(self, inputs: Path) -> None:
        text = """
[defaults]
zone = "UTC"
[[series]]
name = "queue-a"
counts = "a.csv"
[[group]]
name = "pair"
members = [{ name = "queue-a", counts = "a.csv" }, { name = "queue-b", counts = "b.csv" }]
"""
        with pytest.raises(PlanError, match="series 'queue-a' is already in series 'queue-a'"):
            parse_plan(text, path=inputs / "plan.toml")

    def test_wrong_types_are_refused_not_coerced(self, inputs: Path) -> None:
        text = """
[defaults]
zone = "UTC"
[defaults.model]
trend = "no"
annual = true
[[series]]
name = "desk-a"
counts = "a.csv"
"""
        with pytest.raises(PlanError) as caught:
            parse_plan(text, path=inputs / "plan.toml")
        assert any("trend 'no' must be bool" in p for p in caught.value.problems)
        assert any("annual True must be int" in p for p in caught.value.problems)

    def test_the_cli_refuses_a_bad_plan_before_fitting(self, inputs: Path) -> None:
        path = write(
            inputs, '[defaults]\nzone = "Nowhere/Town"\n[[series]]\nname = "a"\ncounts = "a.csv"\n'
        )
        done = subprocess.run(
            [
                sys.executable,
                "-m",
                "service.cli",
                "fit-plan",
                str(path),
                "--store",
                str(inputs / "store"),
            ],
            capture_output=True,
            text=True,
            timeout=120,
            check=False,
        )
        assert done.returncode == 2, done.stderr
        (line,) = done.stderr.strip().splitlines()
        assert "nothing was fitted" in line and "Nowhere/Town" in line
        assert not (inputs / "store").exists()

    def test_invalid_toml_names_the_position(self, inputs: Path) -> None:
        with pytest.raises(PlanError, match="not valid TOML"):
            parse_plan("[[series]\nname = 1", path=inputs / "plan.toml")
