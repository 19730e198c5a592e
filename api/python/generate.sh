#!/usr/bin/env bash
# Regenerates the Python code of the fugad gRPC contract into
# api/python/stubs/ (committed): the message modules (*_pb2.py) from protoc's
# built-in Python generator and the service stubs (*_pb2_grpc.py) from the
# gRPC Python plugin, plus google/rpc/status_pb2.py, which the contract
# imports.
#
# Generators come from the operating system's packages, whose versions are
# pinned below (Debian 12):
#   apt-get install -y protobuf-compiler libprotobuf-dev protobuf-compiler-grpc
# The code they produce runs on Debian's python3-protobuf and python3-grpcio
# of the same releases.
#
# Usage:
#   api/python/generate.sh            regenerate api/python/stubs/
#   api/python/generate.sh --check    fail when api/python/stubs/ differs
#                                     from what the generators produce now
#   api/python/generate.sh OUTDIR     write the code to OUTDIR instead
set -euo pipefail

py_dir="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
api_dir="$(cd "$py_dir/.." && pwd)"
stubs="$py_dir/stubs"

# The releases whose output is committed. Other releases may produce
# different code; regenerate and commit deliberately when the operating
# system's packages change.
want_protoc="libprotoc 3.21.12"
want_plugin_pkg="1.51.1"

check=0
out="$stubs"
case "${1:-}" in
--check) check=1 ;;
"") ;;
-*)
	echo "generate.sh: unknown option $1 (usage: generate.sh [--check | OUTDIR])" >&2
	exit 2
	;;
*) out="$1" ;;
esac

if ! command -v protoc >/dev/null 2>&1; then
	echo "generate.sh: protoc not found; install it with: apt-get install -y protobuf-compiler libprotobuf-dev" >&2
	exit 1
fi
plugin="$(command -v grpc_python_plugin || true)"
if [[ -z "$plugin" ]]; then
	echo "generate.sh: grpc_python_plugin not found; install it with: apt-get install -y protobuf-compiler-grpc" >&2
	exit 1
fi
have_protoc="$(protoc --version)"
if [[ "$have_protoc" != "$want_protoc" ]]; then
	echo "generate.sh: warning: $have_protoc differs from the pinned $want_protoc" >&2
fi
if command -v dpkg-query >/dev/null 2>&1; then
	have_plugin_pkg="$(dpkg-query -W -f='${Version}' protobuf-compiler-grpc 2>/dev/null || true)"
	if [[ "${have_plugin_pkg%%-*}" != "$want_plugin_pkg" ]]; then
		echo "generate.sh: warning: protobuf-compiler-grpc ${have_plugin_pkg:-unknown} differs from the pinned $want_plugin_pkg" >&2
	fi
fi

tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
gen="$tmp/stubs"
mkdir -p "$gen"
cd "$api_dir"
protoc -I . -I third_party \
	--python_out="$gen" \
	--grpc_python_out="$gen" \
	--plugin=protoc-gen-grpc_python="$plugin" \
	fugad/v1/*.proto
protoc -I third_party --python_out="$gen" google/rpc/status.proto

if [[ $check -eq 1 ]]; then
	if ! diff -r -q -x __pycache__ "$stubs" "$gen" >"$tmp/diff" 2>&1; then
		echo "generate.sh: api/python/stubs is stale; run api/python/generate.sh" >&2
		sed 's|'"$gen"'|<generated>|g' "$tmp/diff" >&2
		exit 1
	fi
	echo "generate.sh: Python stubs are up to date"
	exit 0
fi

rm -rf "$out"
mkdir -p "$(dirname "$out")"
cp -r "$gen" "$out"
