"""The deployment files: Kubernetes manifests, the container file and the gunicorn config."""

from __future__ import annotations

import runpy
from pathlib import Path
from urllib.parse import urlparse

import pytest
import yaml

from service.api import create_app
from service.cli import main as sluice

DEPLOY = Path(__file__).resolve().parents[1] / "deploy"


def manifests() -> list[dict]:
    docs = []
    for path in sorted((DEPLOY / "k8s").glob("*.yaml")):
        docs += [d for d in yaml.safe_load_all(path.read_text()) if d]
    return docs


def find(kind: str, name: str) -> dict:
    matches = [d for d in manifests() if d["kind"] == kind and d["metadata"]["name"] == name]
    assert len(matches) == 1, f"{kind}/{name}: {len(matches)} found"
    return matches[0]


def container(deployment: dict) -> dict:
    [c] = deployment["spec"]["template"]["spec"]["containers"]
    return c


@pytest.fixture(scope="module")
def routes(tmp_path_factory):
    app = create_app({"data_dir": str(tmp_path_factory.mktemp("deploy"))})
    return {(str(rule), method) for rule in app.url_map.iter_rules() for method in rule.methods}


def test_every_manifest_has_the_basics():
    docs = manifests()
    assert {d["kind"] for d in docs} >= {"Deployment", "Service", "HorizontalPodAutoscaler", "ConfigMap"}
    for d in docs:
        assert d["apiVersion"] and d["metadata"]["name"]
        if d["kind"] == "Deployment":
            labels = d["spec"]["template"]["metadata"]["labels"]
            assert d["spec"]["selector"]["matchLabels"].items() <= labels.items()


def test_api_probes_point_at_real_routes(routes):
    api = container(find("Deployment", "sluice-api"))
    ports = {p["name"]: p["containerPort"] for p in api["ports"]}
    assert api["livenessProbe"]["httpGet"]["path"] == "/healthz"
    assert api["readinessProbe"]["httpGet"]["path"] == "/readyz"
    for probe in ("livenessProbe", "readinessProbe", "startupProbe"):
        get = api[probe]["httpGet"]
        assert (get["path"], "GET") in routes, f"{probe} -> {get['path']} is not a route of the app"
        assert get["port"] in ports
    assert ports["http"] == 8000  # what deploy/gunicorn.conf.py binds by default


def test_service_selects_the_api_pods_and_port():
    service, api = find("Service", "sluice-api"), find("Deployment", "sluice-api")
    assert service["spec"]["selector"].items() <= api["spec"]["template"]["metadata"]["labels"].items()
    names = {p["name"] for p in container(api)["ports"]}
    assert all(p["targetPort"] in names for p in service["spec"]["ports"])


def test_worker_runs_sluice_worker():
    worker = container(find("Deployment", "sluice-worker"))
    assert worker["command"] == ["sluice", "worker"]
    with pytest.raises(SystemExit) as done:
        sluice(["worker", "--help"])
    assert done.value.code == 0


def test_autoscalers_target_existing_deployments():
    for name in ("sluice-api", "sluice-worker"):
        hpa = find("HorizontalPodAutoscaler", name)
        ref = hpa["spec"]["scaleTargetRef"]
        assert ref["kind"] == "Deployment" and find("Deployment", ref["name"])
        assert 1 <= hpa["spec"]["minReplicas"] <= hpa["spec"]["maxReplicas"]


def test_redis_url_names_the_redis_service():
    url = urlparse(find("ConfigMap", "sluice-config")["data"]["SLUICE_REDIS_URL"])
    service = find("Service", url.hostname)
    assert url.port in {p["port"] for p in service["spec"]["ports"]}
    assert find("Deployment", "sluice-redis")


def test_grace_period_covers_gunicorn_graceful_timeout(monkeypatch):
    config = find("ConfigMap", "sluice-config")["data"]
    monkeypatch.setenv("SLUICE_TIME_LIMIT", config["SLUICE_TIME_LIMIT"])
    settings = runpy.run_path(str(DEPLOY / "gunicorn.conf.py"))
    assert settings["bind"] == "0.0.0.0:8000" and settings["worker_class"] == "asgi"
    grace = find("Deployment", "sluice-api")["spec"]["template"]["spec"]["terminationGracePeriodSeconds"]
    assert grace > settings["graceful_timeout"]


def test_container_file_runs_the_committed_config():
    text = (DEPLOY / "Containerfile").read_text()
    assert "deploy/gunicorn.conf.py" in text and "service.serving:asgi_app()" in text
    api = container(find("Deployment", "sluice-api"))
    assert api["command"][:3] == ["gunicorn", "-c", "deploy/gunicorn.conf.py"]
    mounts = {m["mountPath"] for m in api["volumeMounts"]}
    env = {e["name"]: e.get("value") for e in api["env"]}
    assert env["PROMETHEUS_MULTIPROC_DIR"] in mounts  # one metrics folder shared by the pod's workers
