#!/usr/bin/env bash
# Regenerates the protobuf, gRPC and gateway Go code and the OpenAPI document (proto/generate.sh,
# with protoc and the plugin versions pinned in go.mod) and fails if the committed files differ:
# generated code must never drift from proto/. Runs `buf lint` too when buf is on PATH.
set -euo pipefail
cd "$(dirname "$0")/.."
bash proto/generate.sh
generated=(proto/strayleaf/v1 api/openapi)
if ! git diff --exit-code --stat -- "${generated[@]}"; then
  echo "verify-gen: generated files differ from the committed ones; run proto/generate.sh and commit" >&2
  exit 1
fi
untracked=$(git ls-files --others --exclude-standard -- "${generated[@]}")
if [ -n "$untracked" ]; then
  echo "verify-gen: generated files not committed:" >&2
  echo "$untracked" >&2
  exit 1
fi
if command -v buf >/dev/null 2>&1; then
  buf lint
  echo "verify-gen: buf lint clean"
fi
echo "verify-gen: generated code is current"
