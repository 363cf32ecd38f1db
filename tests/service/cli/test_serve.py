"""``ratecast serve`` options: what is accepted, and what is refused with a clear message."""

from __future__ import annotations

import os

import pytest

from service.cli.app import build_parser


class TestServeOptions:
    def test_defaults_listen_on_loopback_with_one_worker(
        self, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        monkeypatch.delenv("RATECAST_WORKERS", raising=False)
        args = build_parser().parse_args(["serve"])
        assert (args.host, args.port, args.workers, args.store) == ("127.0.0.1", 8000, 1, None)

    def test_auto_means_one_worker_per_usable_cpu(self) -> None:
        # Reference: the CPUs this process may run on, as the Python standard library reports
        # them (os.sched_getaffinity, Linux; os.cpu_count where it does not exist).
        usable = (
            len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
        )
        args = build_parser().parse_args(["serve", "--workers", "auto"])
        assert args.workers == usable

    def test_auto_counts_all_cpus_where_affinity_is_unknown(
        self, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        monkeypatch.delattr(os, "sched_getaffinity", raising=False)
        monkeypatch.setattr(os, "cpu_count", lambda: 6)
        assert build_parser().parse_args(["serve", "--workers", "auto"]).workers == 6
        monkeypatch.setattr(os, "cpu_count", lambda: None)  # "undetermined" (Python docs)
        assert build_parser().parse_args(["serve", "--workers", "auto"]).workers == 1

    def test_workers_default_comes_from_the_environment(
        self, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        monkeypatch.setenv("RATECAST_WORKERS", "3")
        assert build_parser().parse_args(["serve"]).workers == 3

    @pytest.mark.parametrize(
        ("option", "value", "message"),
        [("--workers", "0", "whole number >= 1 or 'auto'"), ("--port", "70000", "1-65535")],
    )
    def test_bad_values_are_refused_naming_them(
        self, option: str, value: str, message: str, capsys: pytest.CaptureFixture[str]
    ) -> None:
        with pytest.raises(SystemExit) as exit_info:
            build_parser().parse_args(["serve", option, value])
        assert exit_info.value.code == 2
        err = capsys.readouterr().err
        assert f"{option} {value!r}" in err and message in err


def test_serve_limits_have_documented_defaults_and_ranges() -> None:
    # The defaults docs/api.md states; uvicorn's own keep-alive default is also 5 s (from memory).
    args = build_parser().parse_args(["serve"])
    assert (args.keep_alive, args.max_connections, args.max_header_bytes) == (5, 512, 16_384)
    for option, bad in (
        ("--keep-alive", "0"),
        ("--max-connections", "x"),
        ("--max-header-bytes", "10"),
    ):
        with pytest.raises(SystemExit):
            build_parser().parse_args(["serve", option, bad])
