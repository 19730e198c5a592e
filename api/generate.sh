#!/usr/bin/env bash
# Regenerates the Go code of the fugad gRPC contract beside the .proto files.
#
# Generators are pinned: protoc-gen-go and protoc-gen-go-grpc are Go tools of
# the main module (go.mod `tool` lines), so `go tool` builds exactly the
# versions recorded there; protoc is the operating system's package
# (Debian: `apt-get install -y protobuf-compiler`), whose version is recorded
# in the generated headers and checked below.
#
# Usage: api/generate.sh [OUTDIR]
#   With OUTDIR the code is written there instead (api/check.sh uses this to
#   detect stale committed code).
set -euo pipefail

api_dir="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$api_dir/.." && pwd)"
out="${1:-$root}"

# The protoc release whose output is committed. A different protoc may
# produce different headers; regenerate and commit deliberately when the
# operating system's package changes.
want_protoc="libprotoc 3.21.12"

if ! command -v protoc >/dev/null 2>&1; then
	echo "generate.sh: protoc not found; install it with: apt-get install -y protobuf-compiler libprotobuf-dev" >&2
	exit 1
fi
have_protoc="$(protoc --version)"
if [[ "$have_protoc" != "$want_protoc" ]]; then
	echo "generate.sh: warning: $have_protoc differs from the pinned $want_protoc" >&2
fi

bin="$(mktemp -d)"
trap 'rm -rf "$bin"' EXIT
(cd "$root" && go build -o "$bin/protoc-gen-go" google.golang.org/protobuf/cmd/protoc-gen-go \
	&& go build -o "$bin/protoc-gen-go-grpc" google.golang.org/grpc/cmd/protoc-gen-go-grpc)

mkdir -p "$out"
cd "$api_dir"
protoc \
	--plugin=protoc-gen-go="$bin/protoc-gen-go" \
	--plugin=protoc-gen-go-grpc="$bin/protoc-gen-go-grpc" \
	-I . -I third_party \
	--go_out="$out" --go_opt=module=github.com/fugad/fugad \
	--go-grpc_out="$out" --go-grpc_opt=module=github.com/fugad/fugad \
	fugad/v1/*.proto
