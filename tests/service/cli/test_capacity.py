"""``ratecast staff``, ``update`` and ``simulate`` through main(), on a store of synthetic series.

The numbers are checked against direct library calls (themselves tested against published values
in tests/models/capacity/test_staffing.py and tests/models/prediction/test_intraday.py, or
recomputed here from published formulas); here the point is that the commands pass
the right inputs, print every format, show the caution and fail with exit 2 naming bad values.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.capacity.staffing import STAFFING_CAUTION, ServiceTarget, staff_intervals
from models.prediction.intraday import update_forecast
from models.prediction.windows import expected_counts
from models.store import FileStore
from service.cli import main
from tests.conftest import synthetic_posterior

TZ = "America/Chicago"
STAFF = [
    "staff",
    "--series",
    "desk",
    "--start",
    "2026-03-03T08:00",
    "--end",
    "2026-03-03T12:00",
    "--step",
    "30min",
    "--handle-time",
    "240",
    "--answer-within",
    "20",
    "--target",
    "0.8",
]


@pytest.fixture(scope="module")
def store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    hours = np.arange(24)
    day = 1.0 + 9.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    table = 10 * np.array([1.0, 1.1, 1.05, 1.0, 1.3, 0.6, 0.5])[:, None] * day[None, :]
    posterior = synthetic_posterior(
        table, draws=300, latent_rho=0.6, latent_sd=0.2, latent_last=0.1
    )
    root = tmp_path_factory.mktemp("store")
    FileStore(root).publish("desk", posterior, manifest={})
    return root


def run(capsys: pytest.CaptureFixture[str], store: Path, *args: str) -> tuple[int, str, str]:
    code = main([*args, "--store", str(store)])
    out, err = capsys.readouterr()
    return code, out, err


def stamps(*texts: str) -> pd.DatetimeIndex:
    return pd.DatetimeIndex([pd.Timestamp(t, tz=TZ) for t in texts]).tz_convert("UTC")


def erlang_c_service_level(arrivals: int, agents: int) -> float:
    """SL(20 s) of ``arrivals`` per 30 minutes at AHT 240 s, written out from the formulas in
    ../shared/REFERENCE_VALUES.md ("Queueing"); 0 when the queue is unstable."""
    load = arrivals / 1800 * 240
    if agents <= load:
        return 0.0
    blocking = 1.0
    for k in range(1, agents + 1):
        blocking = load * blocking / (k + load * blocking)
    wait = agents * blocking / (agents - load * (1 - blocking))
    return 1.0 - wait * math.exp(-(agents - load) * 20 / 240)


class TestStaff:
    def test_json_equals_the_library_call(self, capsys, store) -> None:
        code, out, _ = run(
            capsys,
            store,
            *STAFF,
            "--shrinkage",
            "0.3",
            "--meet-probability",
            "0.85",
            "--format",
            "json",
        )
        assert code == 0
        doc = json.loads(out)
        posterior = FileStore(store).load("desk").posterior
        starts = stamps(*(f"2026-03-03T{h:02d}:{m:02d}" for h in range(8, 12) for m in (0, 30)))
        ends = starts + pd.Timedelta(minutes=30)
        plan = staff_intervals(
            expected_counts(posterior, starts, ends),
            interval_seconds=1800,
            target=ServiceTarget(handle_time=240, answer_within=20, share=0.8),
            meet_probability=0.85,
            shrinkage=0.3,
        )
        assert [r["plug_in"]["agents"] for r in doc["intervals"]] == plan.plug_in.agents.tolist()
        assert [r["assured"]["agents"] for r in doc["intervals"]] == plan.assured.agents.tolist()
        assert [r["assured"]["scheduled"] for r in doc["intervals"]] == plan.scheduled(
            plan.assured.agents
        ).tolist()
        assert doc["intervals"][0]["start"] == "2026-03-03T08:00:00-06:00"
        (day,) = doc["days"]
        assert day["day"] == "2026-03-03"
        assert day["assured_paid_hours"] == pytest.approx(plan.assured.agents.sum() * 0.5 / 0.7)
        assert doc["caution"] == STAFFING_CAUTION

    @pytest.mark.parametrize("fmt", ["table", "csv", "json"])
    def test_every_format_carries_the_caution(self, capsys, store, fmt: str) -> None:
        code, out, _ = run(capsys, store, *STAFF, "--format", fmt)
        assert code == 0
        assert "safety-critical settings" in out
        assert "advisory" in out

    def test_csv_miss_probabilities_match_an_independent_erlang_c_computation(
        self, capsys, store
    ) -> None:
        # Staff each interval with its plug-in agents (a miss probability well inside (0, 1)),
        # then recompute P(SL(K, N) < 0.8) here: Erlang B by its recursion and Erlang C and the
        # service level from it (formulas in ../shared/REFERENCE_VALUES.md, "Queueing"; Tijms,
        # A First Course in Stochastic Models, 2003, sec. 5.3), K the Poisson mixture over the
        # posterior draws (scipy.stats.poisson). SL falls as K grows, so the target is missed
        # exactly when K exceeds the largest count k* that still meets it.
        _, out, _ = run(capsys, store, *STAFF, "--format", "json")
        plug_in = [r["plug_in"]["agents"] for r in json.loads(out)["intervals"]]
        agents = ",".join(map(str, plug_in))
        _, out, _ = run(capsys, store, *STAFF, "--format", "csv", "--agents", agents)
        rows = list(csv.DictReader(line for line in io.StringIO(out) if not line.startswith("#")))
        assert len(rows) == 8
        assert [int(r["given_agents"]) for r in rows] == plug_in
        posterior = FileStore(store).load("desk").posterior
        starts = stamps(*(f"2026-03-03T{h:02d}:{m:02d}" for h in range(8, 12) for m in (0, 30)))
        lam = expected_counts(posterior, starts, starts + pd.Timedelta(minutes=30))
        for i, (row, n) in enumerate(zip(rows, plug_in, strict=True)):
            k_star = max(k for k in range(1, 2000) if erlang_c_service_level(k, n) >= 0.8)
            miss = stats.poisson.sf(k_star, lam[:, i]).mean()
            assert 0.05 < miss < 0.95
            assert float(row["given_miss_probability"]) == pytest.approx(miss, abs=2e-6)
            assert float(row["plug_in_miss_probability"]) == pytest.approx(miss, abs=2e-6)

    def test_a_given_staffing_is_evaluated(self, capsys, store) -> None:
        agents = ",".join(["30"] * 8)
        _, out, _ = run(capsys, store, *STAFF, "--agents", agents, "--format", "json")
        rows = json.loads(out)["intervals"]
        assert all(r["given"]["agents"] == 30 for r in rows)
        # Far more agents than the assured staffing: the target is missed with tiny probability.
        assert all(r["given"]["miss_probability"] < 1e-3 for r in rows)

    def test_erlang_a_with_patience(self, capsys, store) -> None:
        _, out, _ = run(capsys, store, *STAFF, "--patience", "60", "--format", "json")
        doc = json.loads(out)
        assert doc["target"]["queue"] == "Erlang A"
        assert all(r["assured"]["agents"] >= r["plug_in"]["agents"] for r in doc["intervals"])

    @pytest.mark.parametrize(
        ("extra", "named"),
        [
            (["--agents", "2"], "agents[0] = 2"),
            (["--step", "45min"], "45min"),
            (["--shrinkage", "1"], "shrinkage"),
            (["--meet-probability", "1.5"], "meet_probability"),
        ],
    )
    def test_bad_input_exits_2_naming_it(self, capsys, store, extra, named) -> None:
        code, _, err = run(capsys, store, *STAFF, *extra)
        assert code == 2
        assert named in err

    def test_bad_handle_time_exits_2(self, capsys, store) -> None:
        args = [*STAFF]
        args[args.index("--handle-time") + 1] = "0"
        code, _, err = run(capsys, store, *args)
        assert code == 2
        assert "handle_time" in err


class TestUpdate:
    def test_json_equals_the_library_call(self, capsys, store, tmp_path) -> None:
        observed = tmp_path / "today.csv"
        observed.write_text("start,count\n2026-03-03T08:00,90\n2026-03-03T09:00,150\n")
        code, out, _ = run(
            capsys, store, "update", "--series", "desk", "--observed", str(observed),
            "--end", "2026-03-03T14:00", "--seed", "4", "--format", "json",
        )  # fmt: skip
        assert code == 0
        doc = json.loads(out)
        posterior = FileStore(store).load("desk").posterior
        starts = stamps(*(f"2026-03-03T{h:02d}:00" for h in range(10, 14)))
        result = update_forecast(
            posterior,
            stamps("2026-03-03T08:00", "2026-03-03T09:00"),
            stamps("2026-03-03T09:00", "2026-03-03T10:00"),
            [90, 150],
            starts,
            starts + pd.Timedelta(hours=1),
            seed=4,
        )
        assert [w["mean"] for w in doc["windows"]] == pytest.approx(result.lam.mean(axis=0))
        assert doc["observed_total"] == 240
        # About twice the expected morning: the rest of the day is raised.
        assert doc["observed_total"] > 1.5 * doc["expected_before"]
        assert all(w["mean"] > 1.5 * w["before"]["mean"] for w in doc["windows"])

    def test_table_and_csv(self, capsys, store, tmp_path) -> None:
        observed = tmp_path / "today.csv"
        observed.write_text("start,end,count\n2026-03-03T08:00-06:00,2026-03-03T08:30-06:00,20\n")
        base = ["update", "--series", "desk", "--observed", str(observed)]
        code, out, _ = run(capsys, store, *base)
        assert code == 0
        assert "20 arrivals observed on 2026-03-03" in out
        assert "probabilistic" in out
        code, out, _ = run(capsys, store, *base, "--step", "2h", "--format", "csv")
        rows = list(csv.DictReader(io.StringIO(out)))
        assert rows[0]["start"] == "2026-03-03T08:30:00-06:00"
        assert "before_mean" in rows[0]

    def test_a_day_inside_the_history_exits_2(self, capsys, store, tmp_path) -> None:
        observed = tmp_path / "old.csv"
        observed.write_text("start,count\n2026-02-20T08:00,9\n")
        code, _, err = run(capsys, store, "update", "--series", "desk", "--observed", str(observed))
        assert code == 2
        assert "inside the fitted history" in err

    def test_missing_count_column_exits_2(self, capsys, store, tmp_path) -> None:
        observed = tmp_path / "bad.csv"
        observed.write_text("start,arrivals\n2026-03-03T08:00,9\n")
        code, _, err = run(capsys, store, "update", "--series", "desk", "--observed", str(observed))
        assert code == 2
        assert "'count'" in err


class TestSimulate:
    @pytest.mark.parametrize("suffix", [".csv", ".parquet"])
    def test_writes_one_row_per_arrival(self, capsys, store, tmp_path, suffix: str) -> None:
        out_file = tmp_path / f"arrivals{suffix}"
        code, out, _ = run(
            capsys, store, "simulate", "--series", "desk", "--start", "2026-03-03T09:00",
            "--end", "2026-03-03T10:00", "--replicates", "4", "--seed", "3", "--out", str(out_file),
        )  # fmt: skip
        assert code == 0
        table = pd.read_csv(out_file) if suffix == ".csv" else pd.read_parquet(out_file)
        assert f"wrote {len(table)} arrivals in 4 replicate(s)" in out
        assert set(table["replicate"]) == {0, 1, 2, 3}
        times = pd.DatetimeIndex(pd.to_datetime(table["timestamp"], utc=True))
        window = stamps("2026-03-03T09:00", "2026-03-03T10:00")
        assert ((times >= window[0]) & (times < window[1])).all()
        # Each replicate's count follows the predictive Poisson mixture over the draws' window
        # integrals (Lewis & Shedler 1979; ../shared/REFERENCE_VALUES.md, "Time-inhomogeneous
        # Poisson process"): mean E[lam], variance E[lam] + Var(lam). The total of the four
        # independent replicates must lie within 4 sd of four times that mean.
        lam = expected_counts(FileStore(store).load("desk").posterior, window[:1], window[1:])[:, 0]
        sd = np.sqrt(4 * (lam.mean() + lam.var()))
        assert abs(len(table) - 4 * lam.mean()) < 4 * sd

    def test_bad_output_name_exits_2(self, capsys, store, tmp_path) -> None:
        code, _, err = run(
            capsys, store, "simulate", "--series", "desk", "--start", "2026-03-03T09:00",
            "--end", "2026-03-03T10:00", "--out", str(tmp_path / "a.txt"),
        )  # fmt: skip
        assert code == 2
        assert "a.txt" in err

    def test_unknown_series_exits_3(self, capsys, store, tmp_path) -> None:
        code, _, err = run(
            capsys, store, "simulate", "--series", "nope", "--start", "2026-03-03T09:00",
            "--end", "2026-03-03T10:00", "--out", str(tmp_path / "a.csv"),
        )  # fmt: skip
        assert code == 3
        assert "nope" in err
