"""The committed gRPC stubs are current: regenerated from proto/ into a temporary
folder, they match what is in service/etchguard/v1 (``make proto`` refreshes them)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

protogen = pytest.importorskip("etchguard._protogen")
pytest.importorskip("grpc_tools")

from google.protobuf import descriptor_pb2  # noqa: E402

from etchguard.v1 import etchguard_pb2, etchguard_pb2_grpc  # noqa: E402

COMMITTED = Path(etchguard_pb2.__file__).resolve().parent
HINT = "the stubs are stale: run `make proto` and commit service/etchguard/v1"
# lines naming the generator's version; they differ when grpcio-tools is newer
_VERSION_LINES = re.compile(r"^(# Protobuf Python Version:.*|GRPC_GENERATED_VERSION = .*|\s+\d+,)$",
                            re.MULTILINE)


def _without_json_names(messages) -> None:
    """protoc's descriptor set fills json_name; the generated module leaves it out."""
    for message in messages:
        for f in message.field:
            f.ClearField("json_name")
        _without_json_names(message.nested_type)


def test_descriptor_matches_the_proto():
    fresh = descriptor_pb2.FileDescriptorSet.FromString(protogen.descriptor_set())
    (proto,) = [f for f in fresh.file if f.name == "etchguard/v1/etchguard.proto"]
    _without_json_names(proto.message_type)
    committed = descriptor_pb2.FileDescriptorProto.FromString(etchguard_pb2.DESCRIPTOR.serialized_pb)
    assert committed == proto, HINT


def test_journal_descriptor_matches_the_proto():
    from etchguard.v1 import journal_pb2

    fresh = descriptor_pb2.FileDescriptorSet.FromString(protogen.descriptor_set())
    (proto,) = [f for f in fresh.file if f.name == "etchguard/v1/journal.proto"]
    _without_json_names(proto.message_type)
    committed = descriptor_pb2.FileDescriptorProto.FromString(journal_pb2.DESCRIPTOR.serialized_pb)
    assert committed == proto, HINT


def test_regenerated_files_match(tmp_path):
    written = protogen.generate(tmp_path)
    names = sorted(p.name for p in written)
    assert names == ["etchguard_pb2.py", "etchguard_pb2.pyi", "etchguard_pb2_grpc.py",
                     "journal_pb2.py", "journal_pb2.pyi", "journal_pb2_grpc.py",  # the journal's records
                     "shards_pb2.py", "shards_pb2.pyi", "shards_pb2_grpc.py"]  # the shard service
    for name in names:
        fresh = (tmp_path / name).read_text(encoding="utf-8")
        committed = (COMMITTED / name).read_text(encoding="utf-8")
        assert _VERSION_LINES.sub("", fresh) == _VERSION_LINES.sub("", committed), f"{name}: {HINT}"
        assert "from etchguard.v1 import" not in fresh  # package-relative imports


def test_stub_has_every_rpc():
    methods = {m.name for m in etchguard_pb2.DESCRIPTOR.services_by_name["AntennaService"].methods}
    stub_methods = {n for n in dir(etchguard_pb2_grpc.AntennaServiceServicer) if not n.startswith("_")}
    assert methods == stub_methods
