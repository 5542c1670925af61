"""The deployment files: they parse, agree with each other and with the settings, and the
app starts with the environment they give it.

Docker, Kubernetes and systemd do not run here, so the files are checked statically;
the environment of the Kubernetes manifests is then given to a real ``foldwise serve``
against the local PostgreSQL.
"""

from __future__ import annotations

import json
import re
import shlex
from pathlib import Path
from typing import Any

import httpx
import pytest
import yaml

from service.config import Settings
from tests.faults._server import free_port, running

ROOT = Path(__file__).resolve().parents[2]
DEPLOY = ROOT / "deploy"
K8S = DEPLOY / "kubernetes"

# Environment variables the files may set that are not Foldwise settings.
OTHER_ENV = {"PYTHONDONTWRITEBYTECODE", "PYTHONUNBUFFERED", "PIP_NO_CACHE_DIR"}
OTHER_ENV |= {"PIP_DISABLE_PIP_VERSION_CHECK", "FORWARDED_ALLOW_IPS"}
PLACEHOLDER = "REPLACE_ME"
MIB = 1024 * 1024


# ---------------------------------------------------------------------- readers
def _yaml_docs(path: Path) -> list[dict[str, Any]]:
    return [d for d in yaml.safe_load_all(path.read_text()) if d is not None]


def _k8s(kind: str) -> dict[str, Any]:
    found = [d for p in sorted(K8S.glob("*.yaml")) for d in _yaml_docs(p) if d["kind"] == kind]
    assert len(found) == 1, f"expected one {kind} in {K8S}, found {len(found)}"
    return found[0]


def _compose() -> dict[str, Any]:
    doc: dict[str, Any] = yaml.safe_load((DEPLOY / "compose.yaml").read_text())
    return doc


def _app_services(compose: dict[str, Any]) -> dict[str, dict[str, Any]]:
    return {
        name: svc
        for name, svc in compose["services"].items()
        if svc.get("build", {}).get("dockerfile") == "deploy/Containerfile"
    }


def _unit(path: Path) -> dict[str, list[tuple[str, str]]]:
    """A systemd unit as section → [(key, value)], keeping repeated keys."""
    sections: dict[str, list[tuple[str, str]]] = {}
    current: list[tuple[str, str]] | None = None
    for n, raw in enumerate(path.read_text().splitlines(), 1):
        line = raw.strip()
        if not line or line.startswith(("#", ";")):
            continue
        if line.startswith("[") and line.endswith("]"):
            current = sections.setdefault(line[1:-1], [])
            continue
        assert current is not None, f"line {n} outside a section: {raw!r}"
        key, sep, value = line.partition("=")
        assert sep, f"line {n} is not KEY=VALUE: {raw!r}"
        current.append((key.strip(), value.strip()))
    return sections


def _values(pairs: list[tuple[str, str]], key: str) -> list[str]:
    return [v for k, v in pairs if k == key]


def _env_file(path: Path) -> dict[str, str]:
    out = {}
    for line in path.read_text().splitlines():
        if line.strip() and not line.lstrip().startswith("#"):
            key, _, value = line.partition("=")
            out[key.strip()] = value.strip()
    return out


def _containerfile() -> list[tuple[str, str]]:
    """Instructions as (INSTRUCTION, arguments), continuation lines joined."""
    text = (DEPLOY / "Containerfile").read_text()
    lines = [ln for ln in text.splitlines() if not ln.lstrip().startswith("#")]
    joined = re.sub(r"\\\n", " ", "\n".join(lines))
    out = []
    for line in joined.splitlines():
        if line.strip():
            word, _, rest = line.strip().partition(" ")
            out.append((word.upper(), rest.strip()))
    return out


def _containerfile_env() -> dict[str, str]:
    env = {}
    for word, rest in _containerfile():
        if word == "ENV":
            for item in shlex.split(rest):
                key, _, value = item.partition("=")
                env[key] = value
    return env


def _check_env(env: dict[str, str], where: str) -> None:
    """Every FOLDWISE_* name is a Settings field, others are known; values validate."""
    fields = set(Settings.model_fields)
    settings = {}
    for name, value in env.items():
        if name.startswith("FOLDWISE_"):
            field = name.removeprefix("FOLDWISE_").lower()
            assert field in fields, f"{where}: {name} is not a setting of service.config.Settings"
            settings[field] = value
        else:
            assert name in OTHER_ENV, f"{where}: unexpected variable {name}"
    Settings(**settings)  # ValidationError names the bad value


def _quantity(text: object) -> float:
    """A Kubernetes CPU or memory quantity as a number (cores or bytes)."""
    s = str(text)
    units = {"m": 1e-3, "Ki": 1024.0, "Mi": 1024.0**2, "Gi": 1024.0**3}
    for suffix, factor in units.items():
        if s.endswith(suffix):
            return float(s[: -len(suffix)]) * factor
    return float(s)


def _nginx_size(text: str) -> int:
    m = re.fullmatch(r"(\d+)([kKmMgG]?)", text)
    assert m, f"cannot read nginx size {text!r}"
    factor = {"": 1, "k": 1024, "m": MIB, "g": 1024 * MIB}[m.group(2).lower()]
    return int(m.group(1)) * factor


def _container(deployment: dict[str, Any]) -> dict[str, Any]:
    containers = deployment["spec"]["template"]["spec"]["containers"]
    assert len(containers) == 1
    c: dict[str, Any] = containers[0]
    return c


def _resolve_port(container: dict[str, Any], port: int | str) -> int:
    if isinstance(port, int):
        return port
    named = {p["name"]: p["containerPort"] for p in container["ports"]}
    assert port in named, f"port name {port!r} is not declared by the container"
    return int(named[port])


# ---------------------------------------------------------------------- tests
class TestContainerfile:
    def test_basic(self) -> None:
        ins = _containerfile()
        words = [w for w, _ in ins]
        assert ins[0] == ("FROM", "python:3.11-slim")
        # Exec form (a JSON array): no shell, and signals reach uvicorn directly.
        assert json.loads(ins[words.index("CMD")][1]) == [
            "foldwise",
            "serve",
            "--host",
            "0.0.0.0",
            "--port",
            "8000",
            "--workers",
            "2",
        ]
        assert ("EXPOSE", "8000") in ins
        env = _containerfile_env()
        assert env["FOLDWISE_DATA_DIR"] == "/var/lib/foldwise"
        _check_env(env, "Containerfile")
        assert '"/var/lib/foldwise"' in ins[words.index("VOLUME")][1]
        for word, rest in ins:
            if word == "COPY":
                for src in rest.split()[:-1]:
                    assert (ROOT / src).exists(), f"COPY {src}: no such path in the repository"

    def test_runs_as_non_root(self) -> None:
        ins = _containerfile()
        users = [(i, rest) for i, (w, rest) in enumerate(ins) if w == "USER"]
        assert users, "no USER instruction: the service would run as root"
        last_user_at, user = users[-1]
        assert user.split(":")[0] not in {"0", "root"}
        # Nothing after the switch runs as root again, and the service starts after it.
        cmd_at = [w for w, _ in ins].index("CMD")
        assert last_user_at < cmd_at
        assert user.split(":")[0] == str(
            _k8s("Deployment")["spec"]["template"]["spec"]["securityContext"]["runAsUser"]
        )

    def test_healthcheck(self) -> None:
        hc = [rest for w, rest in _containerfile() if w == "HEALTHCHECK"]
        assert len(hc) == 1
        assert "/healthz" in hc[0] and "curl" not in hc[0]
        # The probe is real Python: compile the code given to `python -c`.
        args = json.loads(hc[0][hc[0].index("CMD") + len("CMD") :])
        assert args[:2] == ["python", "-c"]
        compile(args[2], "<healthcheck>", "exec")
        assert "127.0.0.1:8000/healthz" in args[2]


class TestCompose:
    def test_basic(self) -> None:
        compose = _compose()
        apps = _app_services(compose)
        assert len(apps) == 2
        for name, svc in apps.items():
            env = svc["environment"]
            _check_env(
                {k: re.sub(r"\$\{[^}]*\}", PLACEHOLDER, str(v)) for k, v in env.items()},
                f"compose service {name}",
            )
            url = env["FOLDWISE_DATABASE_URL"]
            # The password is interpolated from deploy/.env, never written here.
            assert re.fullmatch(
                r"postgresql\+psycopg://foldwise:\$\{DB_PASSWORD:\?[^}]+\}@db:5432/foldwise", url
            ), url
            assert env["FOLDWISE_API_KEYS"].startswith("${FOLDWISE_API_KEYS:?")
            assert svc["depends_on"]["db"]["condition"] == "service_healthy"
            assert "ports" not in svc, "instances are reached through the proxy only"

    def test_database(self) -> None:
        compose = _compose()
        db = compose["services"]["db"]
        assert db["image"].startswith("postgres:")
        assert db["environment"]["POSTGRES_PASSWORD"].startswith("${DB_PASSWORD:?")
        assert "pg_isready" in " ".join(db["healthcheck"]["test"])
        volume = db["volumes"][0].split(":")[0]
        assert volume in compose["volumes"], "the database volume must be a named volume"
        example = _env_file(DEPLOY / "env.example")
        assert set(example) == {"DB_PASSWORD", "FOLDWISE_API_KEYS"}
        assert all(v.startswith("replace-") for v in example.values())
        assert ".env" in (DEPLOY / ".gitignore").read_text().split()

    def test_proxy(self) -> None:
        compose = _compose()
        proxy = compose["services"]["proxy"]
        assert proxy["image"].startswith("nginx:")
        mount = next(v for v in proxy["volumes"] if "nginx.conf" in v)
        conf = (DEPLOY / mount.split(":")[0]).read_text()
        upstream = re.search(r"upstream\s+\w+\s*\{(.*?)\}", conf, re.S)
        assert upstream
        servers = re.findall(r"^\s*server\s+([\w.-]+:\d+)", upstream.group(1), re.M)
        assert sorted(servers) == sorted(f"{name}:8000" for name in _app_services(compose))
        # No balancing directive: nginx's default round-robin.
        assert not re.search(r"^\s*(least_conn|ip_hash|hash|random)\b", upstream.group(1), re.M)
        size = re.search(r"client_max_body_size\s+(\w+);", conf)
        assert size
        for svc in _app_services(compose).values():
            env = svc["environment"]
            app_limit = max(
                int(env["FOLDWISE_MAX_UPLOAD_BYTES"]), int(env["FOLDWISE_MAX_BODY_BYTES"])
            )
            # Larger than the app's limit by at most the multipart framing allowance, so
            # the app's own problem+json names the limit.
            assert app_limit <= _nginx_size(size.group(1)) <= app_limit + MIB


class TestKubernetes:
    def test_basic(self) -> None:
        dep = _k8s("Deployment")
        assert dep["spec"]["replicas"] == 2
        template_labels = dep["spec"]["template"]["metadata"]["labels"]
        assert dep["spec"]["selector"]["matchLabels"].items() <= template_labels.items()
        c = _container(dep)
        config = _k8s("ConfigMap")
        port = int(config["data"]["FOLDWISE_PORT"])
        for probe, path in (("livenessProbe", "/healthz"), ("readinessProbe", "/readyz")):
            get = c[probe]["httpGet"]
            assert get["path"] == path
            assert _resolve_port(c, get["port"]) == port
        refs = {k: v["name"] for src in c["envFrom"] for k, v in src.items()}
        assert refs == {
            "configMapRef": config["metadata"]["name"],
            "secretRef": _k8s("Secret")["metadata"]["name"],
        }

    def test_resources(self) -> None:
        res = _container(_k8s("Deployment"))["resources"]
        for what in ("cpu", "memory"):
            assert 0 < _quantity(res["requests"][what]) <= _quantity(res["limits"][what])

    def test_security(self) -> None:
        pod = _k8s("Deployment")["spec"]["template"]["spec"]
        c = _container(_k8s("Deployment"))
        assert pod["securityContext"]["runAsNonRoot"] is True
        assert pod["securityContext"]["runAsUser"] != 0
        sc = c["securityContext"]
        assert sc["readOnlyRootFilesystem"] is True
        assert sc["allowPrivilegeEscalation"] is False
        assert sc["capabilities"]["drop"] == ["ALL"]
        # Writable places on the read-only root: /tmp and the data directory.
        volumes = {v["name"]: v for v in pod["volumes"]}
        mounts = {m["mountPath"]: m["name"] for m in c["volumeMounts"]}
        data_dir = _k8s("ConfigMap")["data"]["FOLDWISE_DATA_DIR"]
        for path in ("/tmp", data_dir):
            assert "emptyDir" in volumes[mounts[path]], path

    def test_service(self) -> None:
        svc = _k8s("Service")
        dep = _k8s("Deployment")
        labels = dep["spec"]["template"]["metadata"]["labels"]
        assert svc["spec"]["selector"].items() <= labels.items()
        for p in svc["spec"]["ports"]:
            _resolve_port(_container(dep), p["targetPort"])
        pdb = _k8s("PodDisruptionBudget")
        assert pdb["spec"]["selector"]["matchLabels"].items() <= labels.items()

    def test_settings(self) -> None:
        _check_env(_k8s("ConfigMap")["data"], "ConfigMap")
        secret = _k8s("Secret")["stringData"]
        assert set(secret) == {"FOLDWISE_DATABASE_URL", "FOLDWISE_API_KEYS"}
        assert all(PLACEHOLDER in v for v in secret.values()), "the Secret is a template"
        _check_env(secret, "Secret")
        assert "env" not in _container(_k8s("Deployment"))
        kustomize = yaml.safe_load((K8S / "kustomization.yaml").read_text())
        for res in kustomize["resources"]:
            assert (K8S / res).is_file()
        assert "secret.template.yaml" not in kustomize["resources"]


class TestSystemdUnit:
    def test_basic(self) -> None:
        unit = _unit(DEPLOY / "systemd" / "foldwise.service")
        assert set(unit) == {"Unit", "Service", "Install"}
        svc = unit["Service"]
        (exec_start,) = _values(svc, "ExecStart")
        argv = shlex.split(exec_start)
        assert Path(argv[0]).name == "foldwise" and argv[1] == "serve"
        expected = {
            "DynamicUser": "yes",
            "StateDirectory": "foldwise",
            "Restart": "on-failure",
            "NoNewPrivileges": "yes",
            "ProtectSystem": "strict",
            "ReadWritePaths": "/var/lib/foldwise",
            "PrivateTmp": "yes",
        }
        for key, value in expected.items():
            assert _values(svc, key) == [value], key
        env = dict(v.split("=", 1) for v in _values(svc, "Environment"))
        assert env["FOLDWISE_DATA_DIR"] == "/var/lib/foldwise"
        _check_env(env, "foldwise.service")
        (env_file,) = _values(svc, "EnvironmentFile")
        assert env_file.startswith("-/etc/foldwise/")
        _check_env(_env_file(DEPLOY / "systemd" / "foldwise.env.example"), "foldwise.env.example")
        assert _values(unit["Install"], "WantedBy") == ["multi-user.target"]


@pytest.mark.slow
@pytest.mark.postgres
class TestManifestEnvironment:
    def test_basic(self, pg_schema_url: str, tmp_path: Path) -> None:
        """The ConfigMap and the Secret as Kubernetes would set them, with local values for
        the database, the address and the data directory."""
        port = free_port()
        env = {**_k8s("ConfigMap")["data"], **_k8s("Secret")["stringData"]}
        env |= {
            "FOLDWISE_DATABASE_URL": pg_schema_url,
            "FOLDWISE_API_KEYS": "team-key-one,team-key-two",
            "FOLDWISE_HOST": "127.0.0.1",
            "FOLDWISE_PORT": str(port),
            "FOLDWISE_DATA_DIR": str(tmp_path / "data"),
        }
        body = {
            "kind": "fold",
            "title": "deployment check",
            "request": {
                "sample_rate_hz": 12_800.0,
                "anti_alias": {"family": "butterworth", "order": 2, "cutoff_hz": 5000.0},
                "tones": [{"label": "inverter carrier", "freq_hz": 10_000.0, "amplitude": 0.5}],
            },
        }
        with (
            running(env, workers=1, log_path=tmp_path / "server.log", port=port) as server,
            httpx.Client(base_url=server.base, timeout=30) as client,
        ):
            ready = client.get("/readyz")
            assert ready.status_code == 200 and ready.json()["status"] == "ready"
            # FOLDWISE_API_KEYS from the Secret is in force: no key, no save.
            assert client.post("/api/v1/diagnoses", json=body).status_code == 401
            r = client.post("/api/v1/diagnoses", json=body, headers={"X-API-Key": "team-key-two"})
            assert r.status_code == 201, r.text
            saved = r.json()
            got = client.get(saved["api_url"]).json()
            assert got["result"] == saved["result"]
            assert got["title"] == "deployment check"
            # Folded at 12.8 kS/s, 10 kHz shows at 12.8 - 10 = 2.8 kHz.
            # Reference: the folding rule f_a = |f - k·fs| with the nearest k (here k = 1).
            assert got["result"]["tones"][0]["apparent_hz"] == pytest.approx(2800.0)
        # The data directory was not used: the store is PostgreSQL.
        assert not (tmp_path / "data" / "foldwise.sqlite3").exists()
