"""Bad CLI inputs: each gets one line naming the value and what is allowed, and a non-zero exit.

The cases below are run through ``ratecast`` (in-process, the same ``main`` as the console
script) and their exit codes and exact messages make the table in docs/bad-inputs.md, so the
table stays true: the test fails when the document and the behaviour part. Regenerate it with

    RATECAST_WRITE_DOCS=1 pytest tests/service/cli/test_edges_bad_inputs.py
"""

from __future__ import annotations

import os
import shlex
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from models.ratemodel.binning import OpeningHours
from models.store import FileStore
from service.cli import main
from tests.conftest import synthetic_posterior

DOC = Path(__file__).resolve().parents[3] / "docs" / "bad-inputs.md"
TZ = "America/Chicago"
LONG_PATH = "y" * 5000 + ".csv"
WINDOW = ["--series", "desk", "--start", "2026-03-03T08:00", "--end", "2026-03-03T12:00"]
STAFF = ["--handle-time", "240", "--answer-within", "60", "--target", "0.8"]
HOURLY = ["--counts", "hourly.csv", "--tz", TZ]
EVENTS = ["--events", "events.csv", "--tz", TZ]


@dataclass(frozen=True)
class Case:
    what: str
    argv: tuple[str, ...]

    def shown(self) -> str:
        return "ratecast " + shlex.join(self.argv).replace(
            LONG_PATH, "yyy...yyy.csv (5,004 characters)"
        )


def case(what: str, *argv: str) -> Case:
    return Case(what, argv)


CASES = [
    # ---- times and windows
    case("day-first date", "forecast", *WINDOW[:3], "27/04/2026", "--end", "2026-04-28"),
    case("US-style date", "forecast", *WINDOW[:3], "05/04/2026", "--end", "06/04/2026"),
    case("words", "forecast", *WINDOW[:3], "April 27 2026 9am", "--end", "2026-04-28"),
    case("no such day", "forecast", *WINDOW[:3], "2026-02-30", "--end", "2026-03-04"),
    case("time skipped by DST", "forecast", *WINDOW[:3], "2026-03-08T02:30", "--end", "2026-03-08T04:00"),
    case("reversed window", "forecast", *WINDOW[:3], "2026-03-03T12:00", "--end", "2026-03-03T08:00"),
    case("before the history", "forecast", *WINDOW[:3], "2025-12-01", "--end", "2025-12-02"),
    case("beyond the horizon", "forecast", *WINDOW[:3], "2028-01-01", "--end", "2028-01-02"),
    case("step in seconds", "forecast", *WINDOW, "--step", "7s"),
    case("step not a duration", "forecast", *WINDOW, "--step", "often"),
    case("interval level 1.5", "forecast", *WINDOW, "--levels", "1.5"),
    case("quantile not a number", "forecast", *WINDOW, "--quantiles", "median"),
    case("negative threshold", "forecast", *WINDOW, "--at-least", "-3"),
    case("unknown format", "forecast", *WINDOW, "--format", "xml"),
    case("missing --end", "forecast", "--series", "desk", "--start", "2026-03-03"),
    # ---- store and series
    case("unknown series", "forecast", "--series", "nope", *WINDOW[2:]),
    case("store folder missing", "forecast", *WINDOW, "--store", "missing-store"),
    case("store is a file", "forecast", *WINDOW, "--store", "hourly.csv"),
    case("unknown version", "forecast", *WINDOW, "--version", "v0009"),
    # ---- capacity
    case("plan step 1d", "staff", *WINDOW, *STAFF, "--step", "1d"),
    case("handle time 0", "staff", *WINDOW, "--handle-time", "0", "--answer-within", "60", "--target", "0.8"),
    case("target share 1.5", "staff", *WINDOW, *STAFF[:4], "--target", "1.5"),
    case("shrinkage 1", "staff", *WINDOW, *STAFF, "--shrinkage", "1"),
    case("agents not whole", "staff", *WINDOW, *STAFF, "--agents", "2.5"),
    case("zero replicates", "simulate", *WINDOW, "--replicates", "0", "--out", "a.csv"),
    case("output not .csv/.parquet", "simulate", *WINDOW, "--out", "a.txt"),
    case("observed count -1", "update", "--series", "desk", "--observed", "negative_today.csv"),
    case("observed file lacks count", "update", "--series", "desk", "--observed", "nocount_today.csv"),
    # ---- history: what would silently change it
    case("--until years after the data", "fit", "--series", "x", *EVENTS, "--until", "2030-01-01"),
    case("--until with counts", "fit", "--series", "x", *HOURLY, "--until", "2026-06-02"),
    case("15-minute bins on hourly rows", "fit", "--series", "x", *HOURLY, "--bin", "15min"),
    case("rows finer than --bin", "fit", "--series", "x", "--counts", "halfhourly.csv", "--tz", TZ,
         "--bin", "1h"),
    case("bin width 2h", "fit", "--series", "x", *HOURLY, "--bin", "2h"),
    case("arrival in closed hours", "fit", "--series", "x", *EVENTS, "--open", "Mon-Fri 09:00-17:00"),
    # ---- history files
    case("empty file", "fit", "--series", "x", "--counts", "empty.csv", "--tz", TZ),
    case("header only", "fit", "--series", "x", "--counts", "header.csv", "--tz", TZ),
    case("byte that is not UTF-8", "fit", "--series", "x", "--counts", "bad_byte.csv", "--tz", TZ),
    case("latin-1 header", "fit", "--series", "x", "--counts", "latin1.csv", "--tz", TZ),
    case("semicolon-separated", "fit", "--series", "x", "--counts", "semicolons.csv", "--tz", TZ),
    case("rows longer than the header", "fit", "--series", "x", "--counts", "long_rows.csv", "--tz", TZ),
    case("missing file", "fit", "--series", "x", "--counts", "nope.csv", "--tz", TZ),
    case("5,000-character path", "fit", "--series", "x", "--counts", LONG_PATH, "--tz", TZ),
    case("folder instead of file", "fit", "--series", "x", "--counts", "a-folder", "--tz", TZ),
    case("spreadsheet file", "fit", "--series", "x", "--counts", "counts.xlsx", "--tz", TZ),
    case("fractional count", "fit", "--series", "x", "--counts", "fraction.csv", "--tz", TZ),
    case("rows out of order", "fit", "--series", "x", "--counts", "unsorted.csv", "--tz", TZ),
    case("same bin twice", "fit", "--series", "x", "--counts", "duplicate.csv", "--tz", TZ),
    case("timestamp 'yesterday'", "fit", "--series", "x", "--events", "words.csv", "--tz", TZ),
    case("missing time column", "fit", "--series", "x", "--events", "hourly.csv", "--tz", TZ),
    # ---- fit options
    case("unknown zone", "fit", "--series", "x", "--counts", "hourly.csv", "--tz", "Mars/Base"),
    case("opening and closing at once", "fit", "--series", "x", *HOURLY, "--open", "Mon 10:00-10:00"),
    case("unknown day in hours", "fit", "--series", "x", *HOURLY, "--open", "Funday 09:00-17:00"),
    case("'always' with other clauses", "fit", "--series", "x", *HOURLY, "--open", "always; Sat 09:00-12:00"),
    case("series name with spaces", "fit", "--series", "Front Desk", *HOURLY),
    case("special day not ISO", "fit", "--series", "x", *HOURLY, "--special-days", "2026/01/01"),
    case("13 within-day terms", "fit", "--series", "x", *HOURLY, "--within-day", "13"),
    case("member without a file", "fit-group", "--member", "queue-a", "--tz", TZ),
    case("origin not ISO", "backtest", *HOURLY, "--first-origin", "01/06/2026",
         "--last-origin", "2026-06-02", "--results", "out"),
    case("port 99999", "serve", "--port", "99999"),
    # ---- store locations (a folder, file:// or s3://)
    case("store URL of another protocol", "forecast", *WINDOW, "--store", "gs://bucket/store"),
    case("store file URL on another host", "series", "--store", "file://fileserver/store"),
]  # fmt: skip


def write_files(folder: Path) -> None:
    """The inputs the cases read, in ``folder``."""
    hourly = pd.date_range("2026-06-01", periods=48, freq="1h", tz=TZ)
    frame = pd.DataFrame({"start": [t.isoformat() for t in hourly], "count": 3})
    frame.to_csv(folder / "hourly.csv", index=False)
    half = pd.date_range("2026-06-01", periods=48, freq="30min", tz=TZ)
    pd.DataFrame({"start": [t.isoformat() for t in half], "count": 1}).to_csv(
        folder / "halfhourly.csv", index=False
    )
    (folder / "events.csv").write_text(
        "timestamp\n2026-06-01T08:10-05:00\n2026-06-01T09:30-05:00\n2026-06-01T18:45-05:00\n"
    )
    (folder / "empty.csv").write_bytes(b"")
    (folder / "header.csv").write_text("start,count\n")
    (folder / "bad_byte.csv").write_bytes(b"start,count\n2026-06-01T00:00,\xe93\n")
    (folder / "latin1.csv").write_bytes("début,count\n2026-06-01T00:00,3\n".encode("latin-1"))
    (folder / "semicolons.csv").write_text("start;count\n2026-06-01T00:00;3\n")
    (folder / "long_rows.csv").write_text("start,count\n2026-06-01T00:00,3,1\n")
    (folder / "a-folder").mkdir()
    (folder / "counts.xlsx").write_bytes(b"PK")
    (folder / "fraction.csv").write_text(
        "start,count\n2026-06-01T00:00,1\n2026-06-01T01:00,2\n2026-06-01T02:00,2.5\n"
    )
    (folder / "unsorted.csv").write_text("start,count\n2026-06-01T01:00,1\n2026-06-01T00:00,2\n")
    (folder / "duplicate.csv").write_text(
        "start,count\n2026-06-01T00:00,1\n2026-06-01T01:00,2\n2026-06-01T01:00,2\n"
    )
    (folder / "words.csv").write_text("timestamp\n2026-06-01T08:00\nyesterday\n")
    (folder / "negative_today.csv").write_text(
        "start,count\n2026-03-03T08:00,4\n2026-03-03T09:00,-1\n"
    )
    (folder / "nocount_today.csv").write_text("start,arrivals\n2026-03-03T08:00,4\n")
    table = np.full((7, 24), 5.0)
    desk = synthetic_posterior(
        table, draws=20, opening=OpeningHours.parse("Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00")
    )
    FileStore(folder / "store").publish("desk", desk, manifest={})


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> Iterator[list[tuple[Case, int, str]]]:
    folder = tmp_path_factory.mktemp("bad-inputs")
    write_files(folder)
    here = Path.cwd()
    os.chdir(folder)
    try:
        outcomes = []
        for item in CASES:
            argv = list(item.argv)
            if argv[0] not in ("serve", "fit-group", "backtest") and "--store" not in argv:
                argv += ["--store", "store"]
            captured = _run(argv)
            outcomes.append((item, *captured))
        yield [
            (item, code, err.replace(str(folder), "<work folder>")) for item, code, err in outcomes
        ]
    finally:
        os.chdir(here)


def _run(argv: list[str]) -> tuple[int, str]:
    import contextlib
    import io

    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse's own refusals
            code = int(exc.code or 0)
    return code, err.getvalue()


def render(results: list[tuple[Case, int, str]]) -> str:
    lines = [
        "# Bad inputs and what ratecast says",
        "",
        "Each row is run by `tests/service/cli/test_edges_bad_inputs.py` against a store of a",
        "synthetic series open Mon-Fri 06:30-21:00 and Sat-Sun 08:00-18:00 (America/Chicago, history",
        "2026-02-02 up to 2026-03-02, exclusive), and the test fails when this table and the",
        "program part (regenerate it with `RATECAST_WRITE_DOCS=1 pytest",
        "tests/service/cli/test_edges_bad_inputs.py`). Every refusal is one line on stderr, never",
        "a traceback; nothing here is accepted. Commands other than `serve`, `fit-group` and",
        "`backtest` also get `--store store`.",
        "",
        "Exit codes: 2 bad input, 3 unknown series, 5 store problem (4, a fit refused by the",
        "diagnostics gate, and 1, anything else, need a real fit or a bug).",
        "",
        f"{len(results)} inputs.",
        "",
        "| # | input | command | exit | message (stderr) |",
        "|---|---|---|---|---|",
    ]
    for number, (item, code, err) in enumerate(results, 1):
        cells = [str(number), item.what, f"`{item.shown()}`", str(code), f"`{err.strip()}`"]
        lines.append("| " + " | ".join(c.replace("|", "\\|") for c in cells) + " |")
    return "\n".join(lines) + "\n"


def test_at_least_30_cases() -> None:
    assert len(CASES) >= 30
    assert len({c.what for c in CASES}) == len(CASES)


def test_every_bad_input_is_refused_in_one_line(results) -> None:
    for item, code, err in results:
        assert code in (2, 3, 5), (item.what, code, err)
        assert err.count("\n") == 1, (item.what, err)
        assert "Traceback" not in err and "unexpected error" not in err, (item.what, err)
        assert err.startswith(f"ratecast {item.argv[0]}: error: "), (item.what, err)


def test_the_document_matches_what_the_program_says(results) -> None:
    text = render(results)
    if os.environ.get("RATECAST_WRITE_DOCS"):
        DOC.write_text(text)
    assert DOC.read_text() == text, "docs/bad-inputs.md is stale: regenerate it (see the top)"
