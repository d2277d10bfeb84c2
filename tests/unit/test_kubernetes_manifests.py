"""The Kubernetes manifests (deploy/kubernetes): rendered, validated, checked against the service.

The base and the example overlay are rendered by a small kustomize of our own (the
resources listed, the overlay's namespace, image tag and strategic-merge patches), and,
where ``kubectl`` is installed, compared with ``kubectl kustomize``. Every resource is
validated with kubernetes-validate against the schemas of one pinned Kubernetes version,
which the package carries, so no cluster or network is needed. The settings in the
ConfigMap must be ones the service reads, and the pods must keep the hardening the
README promises.
"""

from __future__ import annotations

import copy
import re
import shutil
import subprocess
from pathlib import Path
from typing import Any

import kubernetes_validate
import pytest
import yaml

from service import create_app
from service.settings import Settings

ROOT = Path(__file__).resolve().parents[2]
KUBERNETES = ROOT / "deploy" / "kubernetes"
BASE = KUBERNETES / "base"
OVERLAY = KUBERNETES / "overlays" / "example"
# The oldest minor version still supported upstream when the manifests were written; the
# manifests use nothing newer (preStop sleep is GA from 1.30 on).
KUBERNETES_VERSION = "1.33.0"
NAME = "attribute-sampling"
# Paths inside the container, not on this machine.
CONTAINER_TMP = "/tmp"  # noqa: S108
# The metrics folder the image names (it must exist and be writable at start).
IMAGE_METRICS_DIR = re.findall(r"PROMETHEUS_MULTIPROC_DIR=(\S+)",
                               (ROOT / "docker" / "Dockerfile").read_text())[0]
Resource = dict[str, Any]


def _merge(base: Any, patch: Any) -> Any:
    """Strategic merge as kustomize applies it to our patches: maps merge key by key,
    lists of named maps (containers, volumes, ports) merge by name, other lists replace."""
    if isinstance(base, dict) and isinstance(patch, dict):
        merged = dict(base)
        for key, value in patch.items():
            merged[key] = _merge(base[key], value) if key in base else value
        return merged
    if (
        isinstance(base, list) and isinstance(patch, list)
        and all(isinstance(item, dict) and "name" in item for item in base + patch)
    ):
        merged_list = list(base)
        names = [item["name"] for item in base]
        for item in patch:
            if item["name"] in names:
                index = names.index(item["name"])
                merged_list[index] = _merge(merged_list[index], item)
            else:
                merged_list.append(item)
        return merged_list
    return copy.deepcopy(patch)


def _load_all(path: Path) -> list[Resource]:
    return [document for document in yaml.safe_load_all(path.read_text()) if document]


def render(folder: Path) -> list[Resource]:
    """The resources of the kustomization in ``folder``."""
    kustomization = yaml.safe_load((folder / "kustomization.yaml").read_text())
    assert set(kustomization) <= {"apiVersion", "kind", "namespace", "resources", "images",
                                  "patches"}, "a kustomize feature this renderer lacks"
    resources: list[Resource] = []
    for entry in kustomization.get("resources", []):
        target = (folder / entry).resolve()
        resources += render(target) if target.is_dir() else _load_all(target)
    for patch_entry in kustomization.get("patches", []):
        for patch in _load_all(folder / patch_entry["path"]):
            key = (patch["kind"], patch["metadata"]["name"])
            matches = [i for i, r in enumerate(resources)
                       if (r["kind"], r["metadata"]["name"]) == key]
            assert len(matches) == 1, f"patch {key} matches {len(matches)} resources"
            resources[matches[0]] = _merge(resources[matches[0]], patch)
    for image in kustomization.get("images", []):
        for resource in resources:
            for container in _containers(resource):
                repository, _, _ = container["image"].rpartition(":")
                if repository == image["name"]:
                    container["image"] = f"{image.get('newName', repository)}:{image['newTag']}"
    if "namespace" in kustomization:
        for resource in resources:
            resource["metadata"]["namespace"] = kustomization["namespace"]
    return resources


def _containers(resource: Resource) -> list[dict[str, Any]]:
    if resource["kind"] != "Deployment":
        return []
    containers: list[dict[str, Any]] = resource["spec"]["template"]["spec"]["containers"]
    return containers


def _one(resources: list[Resource], kind: str) -> Resource:
    found = [resource for resource in resources if resource["kind"] == kind]
    assert len(found) == 1, f"{len(found)} {kind} resources"
    return found[0]


RENDERED = {"base": render(BASE), "example overlay": render(OVERLAY)}
WHICH = pytest.mark.parametrize("which", sorted(RENDERED))


@WHICH
def test_every_resource_is_valid_for_the_pinned_kubernetes_version(which: str) -> None:
    kinds = set()
    for resource in RENDERED[which]:
        # strict: a misspelt or misplaced field is an error, not silently dropped
        kubernetes_validate.validate(resource, KUBERNETES_VERSION, strict=True)
        kinds.add(resource["kind"])
    assert kinds == {"ServiceAccount", "ConfigMap", "Secret", "Deployment", "Service",
                     "HorizontalPodAutoscaler", "PodDisruptionBudget", "NetworkPolicy"}


def test_an_invalid_resource_is_refused() -> None:
    deployment = copy.deepcopy(_one(RENDERED["base"], "Deployment"))
    deployment["spec"]["template"]["spec"]["containers"][0]["securityContext"][
        "readOnlyRootFileSystem"] = True  # misspelt
    with pytest.raises(kubernetes_validate.ValidationError):
        kubernetes_validate.validate(deployment, KUBERNETES_VERSION, strict=True)


@pytest.mark.skipif(shutil.which("kubectl") is None, reason="kubectl is not installed")
@pytest.mark.parametrize(("which", "folder"), [("base", BASE), ("example overlay", OVERLAY)])
def test_the_rendering_is_the_one_kubectl_kustomize_gives(which: str, folder: Path) -> None:
    completed = subprocess.run(["kubectl", "kustomize", str(folder)], capture_output=True,
                               text=True, timeout=60, check=True)

    def keyed(resources: list[Resource]) -> dict[tuple[str, str], Resource]:
        return {(r["kind"], r["metadata"]["name"]): r for r in resources}

    assert keyed(_load_all_text(completed.stdout)) == keyed(RENDERED[which])


def _load_all_text(text: str) -> list[Resource]:
    return [document for document in yaml.safe_load_all(text) if document]


def _gunicorn_variables() -> set[str]:
    """The variables service/web/gunicorn_config.py documents in its table."""
    text = (ROOT / "service" / "web" / "gunicorn_config.py").read_text()
    return set(re.findall(r"^([A-Z][A-Z_]+) +\S", text, flags=re.MULTILINE)) - {"PROMETHEUS"}


@WHICH
def test_the_config_map_holds_settings_the_service_reads(which: str, tmp_path: Path) -> None:
    data = _one(RENDERED[which], "ConfigMap")["data"]
    settings = {f"SAMPLING_{field.upper()}" for field in Settings.__dataclass_fields__}
    for name in data:
        if name.startswith("SAMPLING_"):
            assert name in settings, f"{name} is not a setting of service/settings.py"
        else:
            assert name in _gunicorn_variables(), f"{name} is not read by gunicorn_config"
    # The values themselves are accepted, with the Secret's digests in the key file.
    digests = tmp_path / "api-key-digests"
    digests.write_text(_one(RENDERED[which], "Secret")["stringData"]["api-key-digests"])
    environ = {name: value for name, value in data.items() if name.startswith("SAMPLING_")}
    environ["SAMPLING_API_KEYS_FILE"] = str(digests)
    loaded = Settings.from_environ(environ)
    assert len(loaded.key_digests) == 1


@WHICH
def test_the_pods_are_hardened(which: str) -> None:
    pod = _one(RENDERED[which], "Deployment")["spec"]["template"]["spec"]
    assert pod["securityContext"]["runAsNonRoot"] is True
    assert pod["automountServiceAccountToken"] is False
    (container,) = pod["containers"]
    security = container["securityContext"]
    assert security["allowPrivilegeEscalation"] is False
    assert security["readOnlyRootFilesystem"] is True
    assert security["capabilities"] == {"drop": ["ALL"]}
    assert {"requests", "limits"} <= set(container["resources"])


@WHICH
def test_probes_ask_the_service_s_own_health_and_readiness(which: str) -> None:
    (container,) = _one(RENDERED[which], "Deployment")["spec"]["template"]["spec"]["containers"]
    assert container["livenessProbe"]["httpGet"]["path"] == "/v1/health"
    assert container["readinessProbe"]["httpGet"]["path"] == "/v1/ready"
    rules = {rule.rule for rule in create_app().url_map.iter_rules()}
    assert {"/v1/health", "/v1/ready"} <= rules


def _bytes(quantity: str) -> int:
    units = {"Ki": 2**10, "Mi": 2**20, "Gi": 2**30}
    return int(quantity[:-2]) * units[quantity[-2:]]


def _cpus(quantity: str) -> float:
    return int(quantity[:-1]) / 1000 if quantity.endswith("m") else float(quantity)


@WHICH
def test_temporary_space_and_workers_follow_the_settings(which: str) -> None:
    resources = RENDERED[which]
    data = _one(resources, "ConfigMap")["data"]
    pod = _one(resources, "Deployment")["spec"]["template"]["spec"]
    (container,) = pod["containers"]
    mounts = {mount["mountPath"]: mount["name"] for mount in container["volumeMounts"]}
    volumes = {volume["name"]: volume for volume in pod["volumes"]}
    # Uploads are streamed to /tmp, which must be writable and hold the largest file.
    tmp = volumes[mounts[CONTAINER_TMP]]["emptyDir"]
    assert _bytes(tmp["sizeLimit"]) > int(data["SAMPLING_MAX_FILE_BYTES"])
    # The image's PROMETHEUS_MULTIPROC_DIR must exist and be writable.
    assert "emptyDir" in volumes[mounts[IMAGE_METRICS_DIR]]
    # The key file is where the Secret is mounted.
    key_folder, _, key_name = data["SAMPLING_API_KEYS_FILE"].rpartition("/")
    secret = volumes[mounts[key_folder]]["secret"]
    assert secret["secretName"] == _one(resources, "Secret")["metadata"]["name"]
    assert key_name in _one(resources, "Secret")["stringData"]
    # One worker per CPU of the limit (gunicorn cannot see the limit itself).
    assert int(data["WEB_CONCURRENCY"]) == _cpus(container["resources"]["limits"]["cpu"])
    # Requests in flight finish before the kill.
    pause = container["lifecycle"]["preStop"]["sleep"]["seconds"]
    assert pod["terminationGracePeriodSeconds"] > int(data["GUNICORN_GRACEFUL_TIMEOUT"]) + pause


@WHICH
def test_service_budget_policy_and_autoscaler_select_the_pods(which: str) -> None:
    resources = RENDERED[which]
    deployment = _one(resources, "Deployment")
    labels = deployment["spec"]["template"]["metadata"]["labels"]
    assert deployment["spec"]["selector"]["matchLabels"].items() <= labels.items()
    assert _one(resources, "Service")["spec"]["selector"].items() <= labels.items()
    for kind in ("PodDisruptionBudget", "NetworkPolicy"):
        selector = _one(resources, kind)["spec"].get("selector") or _one(
            resources, kind)["spec"]["podSelector"]
        assert selector["matchLabels"].items() <= labels.items(), kind
    target = _one(resources, "HorizontalPodAutoscaler")["spec"]["scaleTargetRef"]
    assert (target["kind"], target["name"]) == ("Deployment", deployment["metadata"]["name"])
    policy = _one(resources, "NetworkPolicy")["spec"]
    assert policy["egress"] == []
    assert [port["port"] for rule in policy["ingress"] for port in rule["ports"]] == [8000]


def test_the_overlay_changes_replicas_image_and_namespace() -> None:
    base, overlay = RENDERED["base"], RENDERED["example overlay"]
    assert (_one(overlay, "Deployment")["spec"]["replicas"]
            != _one(base, "Deployment")["spec"]["replicas"])
    image = _containers(_one(overlay, "Deployment"))[0]["image"]
    assert image != _containers(_one(base, "Deployment"))[0]["image"]
    assert image.startswith("registry.example.com/attribute-sampling:")
    assert {resource["metadata"].get("namespace") for resource in overlay} == {"audit-sampling"}
    assert NAME in {resource["metadata"]["name"] for resource in overlay}
