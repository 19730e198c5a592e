#!/usr/bin/env bash
# Checks the fugad gRPC contract:
#   1. the committed generated Go code matches what generate.sh produces now
#      (fails when a .proto changed without regenerating);
#   2. `buf lint` passes at the STANDARD and COMMENTS levels.
#
# buf is pinned as a Go tool in a separate module file, api/tools/buf.go.mod,
# so that its large dependency graph does not raise the versions of the
# protobuf runtime and generators pinned in the main go.mod.
set -euo pipefail

api_dir="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$api_dir/.." && pwd)"

tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT

"$api_dir/generate.sh" "$tmp"
stale=0
for f in "$api_dir"/fugad/v1/*.pb.go; do
	rel="${f#"$root"/}"
	if ! cmp -s "$f" "$tmp/$rel"; then
		echo "check.sh: $rel is stale; run api/generate.sh" >&2
		diff -u "$f" "$tmp/$rel" | head -20 >&2 || true
		stale=1
	fi
done
for f in "$tmp"/api/fugad/v1/*.pb.go; do
	rel="${f#"$tmp"/}"
	if [[ ! -e "$root/$rel" ]]; then
		echo "check.sh: $rel is missing; run api/generate.sh" >&2
		stale=1
	fi
done
if [[ $stale -ne 0 ]]; then
	exit 1
fi
echo "check.sh: generated code is up to date"

cd "$api_dir"
go tool -modfile="$api_dir/tools/buf.go.mod" buf lint
echo "check.sh: buf lint passed"
