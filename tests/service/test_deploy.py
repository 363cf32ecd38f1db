"""Deployment files, checked by reading them: no container tool runs here.

Each file must parse, each ``ratecast`` command it runs must be accepted by the CLI's own parser,
each HTTP path it probes must be a route of the app, and the pieces must refer to each other
consistently (volumes, labels, env variables, stages).
"""

from __future__ import annotations

import configparser
import json
import os
import re
import shlex
from pathlib import Path
from typing import Any

import pytest
import yaml

from models.store import MemoryStore
from service.cli.app import build_parser
from service.config import Settings
from service.main import create_app

DEPLOY = Path(__file__).resolve().parents[2] / "deploy"
ROOT = DEPLOY.parent
STORE = "/var/lib/ratecast/store"


def app_paths() -> set[str]:
    return set(create_app(store=MemoryStore()).openapi()["paths"])


def check_ratecast_command(argv: list[str]) -> Any:
    """Parse ``ratecast ...`` with the real parser; argparse exits on anything it refuses."""
    assert Path(argv[0]).name == "ratecast", argv
    try:
        return build_parser().parse_args(argv[1:])
    except SystemExit as exc:  # pragma: no cover - only on a broken file
        pytest.fail(f"the CLI refuses {argv}: exit {exc.code}")


def env_file(path: Path) -> dict[str, str]:
    """KEY=VALUE lines as systemd's EnvironmentFile= reads them (quotes removed, # comments)."""
    values = {}
    for line in path.read_text().splitlines():
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        key, sep, value = line.partition("=")
        assert sep and re.fullmatch(r"[A-Z_][A-Z0-9_]*", key), f"bad line in {path.name}: {line!r}"
        values[key] = " ".join(shlex.split(value)) if value else ""
    return values


def unit_file(path: Path) -> dict[str, dict[str, list[str]]]:
    """Sections of a systemd unit; a key may repeat (e.g. EnvironmentFile=), so values are lists."""
    # configparser first, as a syntax check (strict=False: systemd allows repeated keys).
    configparser.ConfigParser(strict=False, interpolation=None).read_string(path.read_text())
    sections: dict[str, dict[str, list[str]]] = {}
    current = None
    for raw in path.read_text().splitlines():
        line = raw.strip()
        if not line or line.startswith(("#", ";")):
            continue
        if line.startswith("["):
            current = sections.setdefault(line.strip("[]"), {})
            continue
        key, sep, value = line.partition("=")
        assert sep and current is not None, f"{path.name}: {raw!r}"
        current.setdefault(key.strip(), []).append(value.strip())
    return sections


def expand(text: str, env: dict[str, str]) -> list[str]:
    """systemd's ExecStart= expansion: ``${VAR}`` as one word becomes exactly one argument."""
    words = shlex.split(text)
    out = []
    for word in words:
        match = re.fullmatch(r"\$\{([A-Z0-9_]+)\}", word)
        if match:
            assert match.group(1) in env, f"{match.group(1)} is not in ratecast.env.example"
            out.append(env[match.group(1)])
        else:
            assert "$" not in word, f"unsupported expansion in {word!r}"
            out.append(word)
    return out


class TestEnvFiles:
    @pytest.mark.parametrize("name", ["ratecast.env.example", "uvicorn.env"])
    def test_every_setting_is_a_known_variable_that_validates(
        self, name: str, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        values = env_file(DEPLOY / name)
        extra = {"RATECAST_WORKERS"} | {k for k in values if k.startswith("RATECAST_REFIT_")}
        for key, value in values.items():
            assert key.startswith("RATECAST_")
            if key not in extra:
                assert key.removeprefix("RATECAST_").lower() in Settings.model_fields, key
                monkeypatch.setenv(key, value)
        Settings(_env_file=None)  # type: ignore[call-arg]  # raises if a value does not validate

    def test_workers_value_is_accepted_by_serve(self) -> None:
        # The file documents "auto" as one worker per CPU this process may run on, as the
        # standard library reports it (os.sched_getaffinity); a number is taken as written.
        workers = env_file(DEPLOY / "uvicorn.env")["RATECAST_WORKERS"]
        args = check_ratecast_command(["ratecast", "serve", "--workers", workers])
        if workers == "auto":
            assert args.workers == len(os.sched_getaffinity(0))
        else:
            assert args.workers == int(workers)


class TestSystemd:
    env = env_file(DEPLOY / "ratecast.env.example")

    def test_api_unit_runs_serve_as_an_unprivileged_user(self) -> None:
        unit = unit_file(DEPLOY / "systemd" / "ratecast-api.service")
        service = unit["Service"]
        assert service["User"] == ["ratecast"]
        assert service["EnvironmentFile"][0] == "/etc/ratecast/ratecast.env"
        [command] = service["ExecStart"]
        args = check_ratecast_command(expand(command, self.env))
        assert args.command == "serve"
        assert unit["Install"]["WantedBy"] == ["multi-user.target"]

    def test_refit_unit_runs_fit_once(self) -> None:
        unit = unit_file(DEPLOY / "systemd" / "ratecast-refit.service")
        service = unit["Service"]
        assert service["Type"] == ["oneshot"] and service["User"] == ["ratecast"]
        [command] = service["ExecStart"]
        args = check_ratecast_command(expand(command, self.env))
        assert args.command == "fit"
        assert args.opening == "Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00"  # one argument

    def test_timer_fires_nightly_and_names_the_refit_unit(self) -> None:
        timer = unit_file(DEPLOY / "systemd" / "ratecast-refit.timer")["Timer"]
        [calendar] = timer["OnCalendar"]
        assert re.fullmatch(r"\*-\*-\* \d{2}:\d{2}:\d{2}", calendar)
        [target] = timer["Unit"]
        assert (DEPLOY / "systemd" / target).exists()


def containerfile_lines() -> list[str]:
    """Instructions of the Containerfile, continuation lines joined, comments dropped."""
    text = (DEPLOY / "Containerfile").read_text().replace("\\\n", " ")
    return [line for line in text.splitlines() if line.strip() and not line.startswith("#")]


class TestContainerfile:
    lines = tuple(containerfile_lines())

    def stages(self) -> dict[str, list[str]]:
        stages: dict[str, list[str]] = {}
        current: list[str] = []
        for line in self.lines:
            if line.startswith("FROM "):
                name = line.split()[-1]
                current = stages.setdefault(name, [line])
            elif current:
                current.append(line)
        return stages

    def test_multi_stage_with_the_api_last(self) -> None:
        stages = self.stages()
        assert list(stages)[-1] == "api"
        for line in self.lines:
            if "--from=" in line:
                assert re.search(r"--from=(\S+)", line).group(1) in stages  # type: ignore[union-attr]

    def test_copied_sources_exist(self) -> None:
        for line in self.lines:
            if line.startswith("COPY ") and "--from=" not in line:
                for source in line.split()[1:-1]:
                    assert (ROOT / source).exists(), source

    def test_api_stage_is_non_root_with_a_healthcheck_on_a_real_route(self) -> None:
        api = self.stages()["api"]
        users = [line.split()[1] for line in api if line.startswith("USER ")]
        assert users and users[-1].split(":")[0] not in ("root", "0")
        [health] = [line for line in api if line.startswith("HEALTHCHECK ")]
        path = re.search(r"http://127\.0\.0\.1:8000(/[^'\"]+)", health).group(1)  # type: ignore[union-attr]
        assert path in app_paths()
        [cmd] = [line for line in api if line.startswith("CMD ")]
        args = check_ratecast_command(json.loads(cmd.removeprefix("CMD ")))
        assert args.command == "serve" and args.host == "0.0.0.0" and args.port == 8000

    def test_store_location_matches_the_kubernetes_mounts(self) -> None:
        assert any(f"RATECAST_STORE={STORE}" in line for line in self.lines)


class TestKubernetes:
    def documents(self) -> dict[str, dict[str, Any]]:
        docs = {}
        for path in sorted((DEPLOY / "k8s").glob("*.yaml")):
            for doc in yaml.safe_load_all(path.read_text()):
                docs[doc["kind"]] = doc
        return docs

    def test_kustomization_lists_every_manifest(self) -> None:
        listed = set(self.documents()["Kustomization"]["resources"])
        on_disk = {p.name for p in (DEPLOY / "k8s").glob("*.yaml")} - {"kustomization.yaml"}
        assert listed == on_disk

    def test_api_and_refit_share_one_claim(self) -> None:
        docs = self.documents()
        claim = docs["PersistentVolumeClaim"]["metadata"]["name"]
        assert docs["PersistentVolumeClaim"]["spec"]["accessModes"] == ["ReadWriteMany"]
        api = docs["Deployment"]["spec"]["template"]["spec"]
        refit = docs["CronJob"]["spec"]["jobTemplate"]["spec"]["template"]["spec"]
        for pod in (api, refit):
            claims = [v["persistentVolumeClaim"]["claimName"] for v in pod["volumes"]
                      if "persistentVolumeClaim" in v]  # fmt: skip
            assert claims == [claim]
        [api_store] = [m for m in api["containers"][0]["volumeMounts"] if m["mountPath"] == STORE]
        [refit_store] = [
            m for m in refit["containers"][0]["volumeMounts"] if m["mountPath"] == STORE
        ]
        assert api_store["readOnly"] is True and not refit_store.get("readOnly", False)
        assert api_store["subPath"] == refit_store["subPath"]

    def test_containers_run_real_commands_as_non_root(self) -> None:
        docs = self.documents()
        api = docs["Deployment"]["spec"]["template"]["spec"]
        refit = docs["CronJob"]["spec"]["jobTemplate"]["spec"]["template"]["spec"]
        expected = {"serve": api, "fit": refit}
        for command, pod in expected.items():
            assert pod["securityContext"]["runAsNonRoot"] is True
            [container] = pod["containers"]
            assert check_ratecast_command(container["command"]).command == command
            assert container["securityContext"]["allowPrivilegeEscalation"] is False
            for item in container.get("env", []):
                assert "value" not in item or isinstance(item["value"], str), item

    def test_probes_hit_real_routes_on_a_named_port(self) -> None:
        docs = self.documents()
        [container] = docs["Deployment"]["spec"]["template"]["spec"]["containers"]
        ports = {p["name"] for p in container["ports"]}
        for probe in ("startupProbe", "livenessProbe", "readinessProbe"):
            get = container[probe]["httpGet"]
            assert get["path"] in app_paths() and get["port"] in ports
        assert container["readinessProbe"]["httpGet"]["path"] == "/v1/health/ready"

    def test_service_selects_the_api_pods(self) -> None:
        docs = self.documents()
        pod_labels = docs["Deployment"]["spec"]["template"]["metadata"]["labels"]
        service = docs["Service"]["spec"]
        assert service["selector"].items() <= pod_labels.items()
        assert docs["Deployment"]["spec"]["selector"]["matchLabels"].items() <= pod_labels.items()
        [container] = docs["Deployment"]["spec"]["template"]["spec"]["containers"]
        assert service["ports"][0]["targetPort"] in {p["name"] for p in container["ports"]}

    def test_refit_schedule_is_a_cron_expression(self) -> None:
        cron = self.documents()["CronJob"]["spec"]
        assert len(cron["schedule"].split()) == 5
        assert cron["concurrencyPolicy"] == "Forbid"
