"""Regenerate the gRPC stubs of ``proto/etchguard/v1/*.proto`` into ``etchguard/v1/``.

``make proto`` runs ``python -m etchguard._protogen``; ``--out DIR`` writes elsewhere
(the stubs-current test regenerates into a temporary folder and compares). The
generated modules import each other package-relatively (``from . import ...``), so
the stubs live inside the etchguard package and need nothing on ``sys.path``.
Needs grpcio-tools (a test extra) and the repository's ``proto/`` folder.
"""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

PACKAGE_DIR = Path(__file__).resolve().parent
REPO_ROOT = PACKAGE_DIR.parent.parent
PROTO_ROOT = REPO_ROOT / "proto"
PROTO_PACKAGE = "etchguard/v1"
DEFAULT_OUT = PACKAGE_DIR / "v1"

# `from etchguard.v1 import etchguard_pb2 as ...` -> `from . import etchguard_pb2 as ...`
_ABSOLUTE_IMPORT = re.compile(r"^from etchguard\.v1 import (\w+_pb2)", re.MULTILINE)


def proto_files(root: Path = PROTO_ROOT) -> list[Path]:
    return sorted((root / PROTO_PACKAGE).glob("*.proto"))


def descriptor_set(root: Path = PROTO_ROOT) -> bytes:
    """The serialized FileDescriptorSet protoc builds from the .proto files."""
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "set.pb"
        _protoc(root, [f"--descriptor_set_out={out}"])
        return out.read_bytes()


def _protoc(root: Path, outputs: list[str]) -> None:
    import grpc_tools
    from grpc_tools import protoc  # imported here: a test/dev dependency only

    include = Path(grpc_tools.__file__).resolve().parent / "_proto"
    files = [str(p.relative_to(root)) for p in proto_files(root)]
    if not files:
        raise SystemExit(f"no .proto files under {root / PROTO_PACKAGE}")
    args = ["grpc_tools.protoc", f"-I{root}", f"-I{include}", *outputs, *files]
    if protoc.main(args) != 0:
        raise SystemExit("protoc failed: " + " ".join(args))


def generate(out_dir: Path = DEFAULT_OUT, root: Path = PROTO_ROOT) -> list[Path]:
    """Write the stubs into ``out_dir`` (a package folder) and return their paths."""
    import tempfile

    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    with tempfile.TemporaryDirectory() as tmp:
        _protoc(root, [f"--python_out={tmp}", f"--pyi_out={tmp}", f"--grpc_python_out={tmp}"])
        generated = Path(tmp) / PROTO_PACKAGE
        for src in sorted(generated.iterdir()):
            text = src.read_text(encoding="utf-8")
            text = _ABSOLUTE_IMPORT.sub(r"from . import \1", text)
            dest = out_dir / src.name
            dest.write_text(text, encoding="utf-8")
            written.append(dest)
    init = out_dir / "__init__.py"
    if not init.exists():
        init.write_text('"""Generated gRPC stubs of etchguard.v1 (see etchguard._protogen)."""\n',
                        encoding="utf-8")
    return written


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m etchguard._protogen", description=__doc__)
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help="output package folder")
    parser.add_argument("--proto-root", type=Path, default=PROTO_ROOT, help="folder holding etchguard/v1/*.proto")
    args = parser.parse_args(argv)
    for path in generate(args.out, args.proto_root):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
