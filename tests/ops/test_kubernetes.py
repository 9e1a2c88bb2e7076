"""The Kubernetes example (deploy/kubernetes.yaml), validated offline.

kubernetes-validate (PyPI) ships the Kubernetes JSON schemas for each minor release; every
document is checked against them in strict mode (no unknown fields). The rest checks that the
pieces fit together and fit the service: probes on paths the service answers, the port and
user of the Dockerfile, an autoscaler aimed at the Deployment, a Service that selects its pods.
"""

from __future__ import annotations

import copy
import re
from pathlib import Path

import kubernetes_validate
import pytest
import yaml
from litestar.testing import TestClient

from service.api.app import create_app
from service.settings import Settings

ROOT = Path(__file__).resolve().parents[2]
MANIFEST = ROOT / "deploy" / "kubernetes.yaml"
#: the oldest Kubernetes minor release the example is checked for, and the newest known
KUBERNETES_VERSIONS = ("1.27", kubernetes_validate.latest_version())


def _documents() -> dict[str, dict]:
    documents = [d for d in yaml.safe_load_all(MANIFEST.read_text()) if d]
    kinds = [d["kind"] for d in documents]
    assert sorted(kinds) == [
        "Deployment", "HorizontalPodAutoscaler", "PodDisruptionBudget", "Service"
    ]
    return {d["kind"]: d for d in documents}


def _container(documents: dict[str, dict]) -> dict:
    (container,) = documents["Deployment"]["spec"]["template"]["spec"]["containers"]
    return container


@pytest.mark.parametrize("version", KUBERNETES_VERSIONS)
def test_every_document_fits_the_kubernetes_schema(version):
    for document in _documents().values():
        kubernetes_validate.validate(document, version, strict=True)


def test_the_schema_check_can_fail():
    deployment = copy.deepcopy(_documents()["Deployment"])
    _container({"Deployment": deployment})["livenessProbe"]["httpGet"]["paht"] = "/health"
    with pytest.raises(kubernetes_validate.ValidationError):
        kubernetes_validate.validate(deployment, KUBERNETES_VERSIONS[-1], strict=True)
    deployment["spec"]["replicas"] = "two"
    with pytest.raises(kubernetes_validate.ValidationError):
        kubernetes_validate.validate(deployment, KUBERNETES_VERSIONS[-1], strict=False)


def test_the_pieces_fit_together():
    documents = _documents()
    deployment, service, autoscaler = (
        documents["Deployment"], documents["Service"], documents["HorizontalPodAutoscaler"]
    )
    labels = deployment["spec"]["template"]["metadata"]["labels"]
    assert deployment["spec"]["selector"]["matchLabels"].items() <= labels.items()
    assert service["spec"]["selector"].items() <= labels.items()

    container = _container(documents)
    port_names = {p["name"] for p in container["ports"]}
    assert all(p["targetPort"] in port_names for p in service["spec"]["ports"])

    target = autoscaler["spec"]["scaleTargetRef"]
    assert (target["kind"], target["name"]) == ("Deployment", deployment["metadata"]["name"])
    assert 1 < autoscaler["spec"]["minReplicas"] < autoscaler["spec"]["maxReplicas"]
    # the autoscaler alone sets the count: a fixed replicas would fight it on every apply
    assert "replicas" not in deployment["spec"]
    budget = documents["PodDisruptionBudget"]["spec"]
    assert budget["selector"]["matchLabels"].items() <= labels.items()
    # a drain never takes every replica: fewer may be unavailable than the autoscaler keeps
    assert budget["maxUnavailable"] < autoscaler["spec"]["minReplicas"]
    # a CPU utilisation target is measured against the containers' CPU requests
    assert any(m["resource"]["name"] == "cpu" for m in autoscaler["spec"]["metrics"])
    assert container["resources"]["requests"]["cpu"]
    assert container["resources"]["requests"]["memory"]


def test_the_pods_are_locked_down_and_match_the_image():
    documents = _documents()
    pod = documents["Deployment"]["spec"]["template"]["spec"]
    container = _container(documents)
    assert pod["securityContext"]["runAsNonRoot"] is True
    assert container["securityContext"]["runAsNonRoot"] is True
    assert container["securityContext"]["readOnlyRootFilesystem"] is True
    assert container["securityContext"]["allowPrivilegeEscalation"] is False
    assert container["securityContext"]["capabilities"]["drop"] == ["ALL"]

    dockerfile = (ROOT / "Dockerfile").read_text()
    user = re.search(r"^USER (\d+):(\d+)$", dockerfile, re.MULTILINE)
    exposed = re.search(r"^EXPOSE (\d+)$", dockerfile, re.MULTILINE)
    assert user and pod["securityContext"]["runAsUser"] == int(user.group(1))
    # the image's group is the pod's: files the image or a volume gives that group are usable
    assert pod["securityContext"]["runAsGroup"] == int(user.group(2))
    assert pod["securityContext"]["fsGroup"] == int(user.group(2))
    assert re.search(rf"groupadd [^\n]*--gid {user.group(2)}\b", dockerfile)
    assert exposed and [p["containerPort"] for p in container["ports"]] == [int(exposed.group(1))]


def test_the_probes_ask_what_the_service_answers():
    container = _container(_documents())
    assert container["readinessProbe"]["httpGet"]["path"] == "/ready"
    assert container["livenessProbe"]["httpGet"]["path"] == "/health"
    paths = {
        container[probe]["httpGet"]["path"]
        for probe in ("startupProbe", "readinessProbe", "livenessProbe")
        if probe in container
    }
    # probes carry no token, so they must be answered with authentication on
    settings = Settings(auth_token="a-token-for-the-probe-test")
    with TestClient(create_app(settings)) as client:
        for path in paths:
            assert client.get(path).status_code == 200, path
        assert client.get("/v1/bases").status_code == 401
