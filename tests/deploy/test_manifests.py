"""What a platform review asks of deploy/k8s (issue 20), read from the manifests themselves.

kubernetes-validate (deploy/check-container.sh) checks that each file is a valid object of
Kubernetes 1.29; this checks what the schema cannot: that the objects agree with each other
(selectors, ports, the ServiceAccount's name) and carry the operational rules (topology spread
across nodes, memory request equal to its limit, no API token, the recommended labels). The
container check runs this file too.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[2]
K8S = ROOT / "deploy" / "k8s"
# https://kubernetes.io/docs/concepts/overview/working-with-objects/common-labels/
RECOMMENDED = ("name", "instance", "version", "component", "part-of", "managed-by")
VERSION = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["version"]


def _objects() -> dict[str, dict]:
    found = {}
    for path in sorted(K8S.glob("*.yaml")):
        for document in yaml.safe_load_all(path.read_text()):
            if document:
                found[document["kind"]] = document
    return found


OBJECTS = _objects()
DEPLOYMENT = OBJECTS["Deployment"]
POD = DEPLOYMENT["spec"]["template"]
(CONTAINER,) = POD["spec"]["containers"]
SELECTOR = DEPLOYMENT["spec"]["selector"]["matchLabels"]


def test_every_kind_a_review_asks_for_is_there():
    assert set(OBJECTS) == {"Deployment", "Service", "HorizontalPodAutoscaler", "PodDisruptionBudget",
                            "ServiceAccount", "NetworkPolicy"}


@pytest.mark.parametrize("kind", sorted(OBJECTS))
def test_the_recommended_labels_are_on_every_object(kind):
    labels = OBJECTS[kind]["metadata"]["labels"]
    assert {f"app.kubernetes.io/{key}" for key in RECOMMENDED} <= set(labels), kind
    assert labels["app.kubernetes.io/version"] == VERSION
    assert labels["app.kubernetes.io/name"] == "tailgauge"


def test_the_pods_carry_the_same_labels_and_every_selector_picks_them():
    pod_labels = POD["metadata"]["labels"]
    assert pod_labels == DEPLOYMENT["metadata"]["labels"]
    assert "app.kubernetes.io/version" not in SELECTOR  # a new version must not orphan the pods
    assert SELECTOR.items() <= pod_labels.items()
    for selector in (OBJECTS["Service"]["spec"]["selector"],
                     OBJECTS["PodDisruptionBudget"]["spec"]["selector"]["matchLabels"],
                     OBJECTS["NetworkPolicy"]["spec"]["podSelector"]["matchLabels"]):
        assert selector == SELECTOR


def test_pods_spread_across_nodes():
    constraints = POD["spec"]["topologySpreadConstraints"]
    by_key = {constraint["topologyKey"]: constraint for constraint in constraints}
    across_nodes = by_key["kubernetes.io/hostname"]
    assert across_nodes["whenUnsatisfiable"] == "DoNotSchedule" and across_nodes["maxSkew"] == 1
    for constraint in constraints:
        assert constraint["labelSelector"]["matchLabels"] == SELECTOR
        assert constraint["matchLabelKeys"] == ["pod-template-hash"]


def test_memory_request_equals_its_limit():
    resources = CONTAINER["resources"]
    assert resources["requests"]["memory"] == resources["limits"]["memory"]
    assert "cpu" in resources["limits"]  # the worker count follows this quota


def test_the_pods_use_their_own_service_account_without_a_token():
    account = OBJECTS["ServiceAccount"]
    assert account["automountServiceAccountToken"] is False
    assert POD["spec"]["serviceAccountName"] == account["metadata"]["name"]
    assert POD["spec"]["automountServiceAccountToken"] is False


def test_the_network_policy_lets_in_only_the_service_port():
    policy = OBJECTS["NetworkPolicy"]["spec"]
    assert set(policy["policyTypes"]) == {"Ingress", "Egress"}
    (rule,) = policy["ingress"]
    assert "from" not in rule  # any client of the Service, and the scrape of /metrics on the same port
    (port,) = rule["ports"]
    (http,) = [p for p in CONTAINER["ports"] if p["name"] == port["port"]]
    assert port["protocol"] == "TCP" and http["containerPort"] == 8000
    assert OBJECTS["Service"]["spec"]["ports"][0]["targetPort"] == port["port"]
    annotations = POD["metadata"]["annotations"]
    assert annotations["prometheus.io/port"] == str(http["containerPort"])
    egress_ports = sorted((p["protocol"], p["port"]) for rule in policy["egress"] for p in rule["ports"])
    assert egress_ports == [("TCP", 53), ("TCP", 4318), ("UDP", 53)]


def test_the_worker_count_is_left_to_the_cpu_quota():
    names = {variable["name"] for variable in CONTAINER["env"]}
    assert "WEB_CONCURRENCY" not in names
