#!/usr/bin/env bash
# Generates the Python stubs of the fadeloop.v1 API (and of the vendored
# buf/validate rules they import) with Debian's python3-grpc-tools, into
# OUT (default: this directory, where they are committed):
#   fadeloop/v1/*_pb2.py, *_pb2_grpc.py and buf/validate/validate_pb2*.py
# .ci/python-check regenerates into a temporary directory and diffs.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
repo="$(cd "$here/../.." && pwd)"
out="$(cd "${1:-$here}" && pwd)"
PY=${PYTHON:-/usr/bin/python3}
wkt=$("$PY" -c 'import grpc_tools, os; print(os.path.join(os.path.dirname(grpc_tools.__file__), "_proto"))')
cd "$repo/proto"
protos=$(ls fadeloop/v1/*.proto)
"$PY" -m grpc_tools.protoc -I"$repo/proto/vendor-validate" -I"$repo/proto" -I"$wkt" \
  --python_out="$out" --grpc_python_out="$out" $protos buf/validate/validate.proto
for d in "$out/fadeloop/v1" "$out/buf" "$out/buf/validate"; do
  [ -f "$d/__init__.py" ] || : >"$d/__init__.py"
done
