"""The farm recipes in deploy/ are sound.

* Kubernetes (deploy/kubernetes/etchguard-farm.yaml): every document is loaded into
  the official Kubernetes Python client's models (``kubernetes.client``), and every
  key of the YAML must be a field that model knows (the client's own deserializer
  drops unknown keys silently, so the test walks the document against each model's
  ``attribute_map`` and ``openapi_types``). Then what the farm needs: a headless
  Service, a StatefulSet naming it, one persistent volume claim per pod for the
  state folder, and a topology whose shard count is the replica count and whose
  address k is pod k's stable DNS name under the headless Service.
* Batch (deploy/batch/shard-slot.sh): two slots of a job array run on loopback with a
  shared run folder, write the topology themselves and serve as one farm that the
  sharding client connects to and routes through.
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import subprocess
import time
from pathlib import Path

import pytest

from etchguard._shards import load_topology, parse_topology, shard_of
from grpc_fixtures import DEMO_DECK, GATE, REPO, free_port

kubernetes = pytest.importorskip("kubernetes", reason="the test extra installs kubernetes (pip install -e '.[test]')")
yaml = pytest.importorskip("yaml")

MANIFEST = REPO / "deploy" / "kubernetes" / "etchguard-farm.yaml"
SLOT_SCRIPT = REPO / "deploy" / "batch" / "shard-slot.sh"
MODELS = {("v1", "ConfigMap"): "V1ConfigMap", ("v1", "Service"): "V1Service",
          ("apps/v1", "StatefulSet"): "V1StatefulSet"}
_PRIMITIVES = {"str": str, "int": int, "bool": bool, "float": (int, float), "object": object,
               "datetime": str}


def check_fields(value, type_name: str, path: str) -> None:
    """Every key of ``value`` is a field of the model ``type_name`` (recursively)."""
    m = re.fullmatch(r"[lL]ist\[(.+)\]", type_name)
    if m:
        assert isinstance(value, list), f"{path}: expected a list"
        for i, item in enumerate(value):
            check_fields(item, m[1], f"{path}[{i}]")
        return
    m = re.fullmatch(r"dict\((\w+), (.+)\)|Dict\[(\w+), (.+)\]", type_name)
    if m:
        assert isinstance(value, dict), f"{path}: expected a map"
        for key, item in value.items():
            check_fields(item, m[2] or m[4], f"{path}.{key}")
        return
    if type_name in _PRIMITIVES:
        assert isinstance(value, _PRIMITIVES[type_name]), f"{path}: {value!r} is not {type_name}"
        return
    model = getattr(kubernetes.client, type_name)
    assert isinstance(value, dict), f"{path}: expected an object of {type_name}"
    json_to_attr = {json_key: attr for attr, json_key in model.attribute_map.items()}
    for key, item in value.items():
        assert key in json_to_attr, f"{path}.{key}: not a field of {type_name}"
        check_fields(item, model.openapi_types[json_to_attr[key]], f"{path}.{key}")


def load_documents() -> dict[str, object]:
    """kind -> the model object, every document checked field by field."""
    api = kubernetes.client.ApiClient()
    out = {}
    for doc in yaml.safe_load_all(MANIFEST.read_text(encoding="utf-8")):
        model_name = MODELS[(doc["apiVersion"], doc["kind"])]
        check_fields(doc, model_name, doc["kind"])
        out[doc["kind"]] = api._ApiClient__deserialize(doc, model_name)
    return out


def test_every_manifest_field_is_known_to_the_kubernetes_models():
    docs = load_documents()
    assert set(docs) == {"ConfigMap", "Service", "StatefulSet"}


def test_a_wrong_field_would_be_caught():
    doc = {"apiVersion": "apps/v1", "kind": "StatefulSet", "spec": {"replica": 3}}
    with pytest.raises(AssertionError, match="replica: not a field of V1StatefulSetSpec"):
        check_fields(doc, "V1StatefulSet", "StatefulSet")


def test_statefulset_headless_service_volumes_and_topology_agree():
    docs = load_documents()
    service, sts, config = docs["Service"], docs["StatefulSet"], docs["ConfigMap"]
    assert service.spec.cluster_ip == "None"  # headless: one DNS name per pod
    assert sts.spec.service_name == service.metadata.name
    assert sts.spec.selector.match_labels.items() <= service.spec.selector.items()
    (claim,) = sts.spec.volume_claim_templates  # one persistent volume per shard
    (container,) = sts.spec.template.spec.containers
    mounts = {m.name: m.mount_path for m in container.volume_mounts}
    command = " ".join(container.args)
    assert f"--state-dir {mounts[claim.metadata.name]}" in command
    topology = parse_topology(config.data["topology"], "ConfigMap etchguard-topology")
    assert topology.shards == sts.spec.replicas
    ns = sts.metadata.namespace
    port = next(p.container_port for p in container.ports if p.name == "grpc")
    assert topology.addresses == tuple(f"{sts.metadata.name}-{k}.{service.metadata.name}.{ns}.svc.cluster.local:{port}"
                                       for k in range(sts.spec.replicas))
    topo_mount = mounts[next(v.name for v in sts.spec.template.spec.volumes
                             if v.config_map and v.config_map.name == config.metadata.name)]
    assert f"--topology {topo_mount}/topology" in command
    assert '--shard-index "${POD_NAME##*-}"' in command  # the pod's ordinal
    # the shell gives pod etchguard-2 shard index 2, and the rest parses as `etchguard serve`
    # options (the shell's expansion is done by the shell itself, with `echo` for etchguard)
    expanded = subprocess.run(["/bin/sh", "-c", command.replace("exec etchguard", "echo", 1)],
                              env={"POD_NAME": f"{sts.metadata.name}-2", "PATH": os.environ["PATH"]},
                              capture_output=True, text=True, timeout=10).stdout.split()
    from etchguard.cli import build_parser
    args = build_parser().parse_args(expanded)
    assert args.shard_index == 2 and args.topology == Path(f"{topo_mount}/topology")
    assert args.state_dir == Path(mounts[claim.metadata.name])


def test_batch_job_array_slots_write_the_topology_and_serve_as_one_farm(tmp_path):
    run_dir = tmp_path / "run"
    ports = [free_port(), free_port()]
    env = dict(os.environ, SHARD_COUNT="2", RUN_DIR=str(run_dir), SHARD_HOST="127.0.0.1",
               ETCHGUARD=str(Path(os.sys.executable).with_name("etchguard")), SHARD_WAIT_S="60")
    procs = []
    logs = contextlib.ExitStack()  # the slots' log files, closed once they end
    try:
        for slot in (1, 0):  # any order: each waits for the other's address
            procs.append(subprocess.Popen(
                ["bash", str(SLOT_SCRIPT), "--rules", str(DEMO_DECK), "--grace", "5"],
                env=dict(env, SHARD_SLOT=str(slot), SHARD_PORT=str(ports[slot])),
                # a file, not a pipe nobody reads while the slot runs: a full pipe would block it
                stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                stderr=logs.enter_context((tmp_path / f"slot-{slot}.log").open("w")), text=True))
            time.sleep(0.5)
        deadline = time.monotonic() + 60
        while not (run_dir / "topology").exists() and time.monotonic() < deadline:
            time.sleep(0.1)
        topology = load_topology(run_dir / "topology")
        assert topology.addresses == (f"127.0.0.1:{ports[0]}", f"127.0.0.1:{ports[1]}")
        from etchguard.sharded_client import ShardedClient
        farm = None
        while farm is None and time.monotonic() < deadline:
            try:
                farm = ShardedClient(topology, timeout=10)
            except Exception:  # noqa: BLE001 - a shard still starting
                time.sleep(0.2)
        assert farm is not None, "the slots did not start serving"
        with farm:
            names = [f"blk_b/n{i}" for i in range(8)]
            for name in names:
                farm.open_net(name, [GATE])
            assert {shard_of(n, 2) for n in names} == {0, 1}
            assert sorted(r.net for r in farm.check_all()) == sorted(names)
            assert [s.nets for s in farm.stats_by_shard()] == [sum(shard_of(n, 2) == k for n in names) for k in (0, 1)]
        assert (run_dir / "state" / "shard-0").is_dir() and (run_dir / "state" / "shard-1").is_dir()
    finally:
        for p in procs:
            if p.poll() is None:
                p.send_signal(signal.SIGTERM)
        for p in procs:
            p.wait(30)
        logs.close()
        for log in sorted(tmp_path.glob("slot-*.log")):  # printed: pytest shows it on a failure
            print(f"{log.name}:\n{log.read_text(errors='replace')}")
    assert all(p.returncode == 0 for p in procs)


def test_a_slot_past_the_array_is_refused(tmp_path):
    done = subprocess.run(["bash", str(SLOT_SCRIPT)], env=dict(os.environ, SHARD_SLOT="2", SHARD_COUNT="2",
                                                                RUN_DIR=str(tmp_path)),
                          capture_output=True, text=True, timeout=30)
    assert done.returncode == 2 and "SHARD_SLOT 2 is not below SHARD_COUNT 2" in done.stderr
