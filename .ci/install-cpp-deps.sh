#!/usr/bin/env bash
# Installs the Debian packages the C++ client example and bench build against
# (client_examples/cpp, bench/cpp): CMake, a C++ compiler, the system gRPC C++ library
# and the protobuf/gRPC code generators. Idempotent: apt runs only when one is missing.
set -euo pipefail
PACKAGES=(cmake g++ make pkg-config libgrpc++-dev libprotobuf-dev protobuf-compiler protobuf-compiler-grpc)
missing=()
for p in "${PACKAGES[@]}"; do
    if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
        missing+=("$p")
    fi
done
if [ "${#missing[@]}" -eq 0 ]; then
    exit 0
fi
if [ "$(id -u)" -ne 0 ]; then
    echo "install-cpp-deps: need root for apt-get to install: ${missing[*]}" >&2
    exit 1
fi
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq
apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
echo "install-cpp-deps: installed ${missing[*]}" >&2
