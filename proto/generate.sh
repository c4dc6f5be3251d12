#!/usr/bin/env bash
# Regenerates the Go code, the gRPC and gateway code and the OpenAPI document from proto/.
# Needs protoc (Debian: protobuf-compiler, libprotobuf-dev); the plugins are the Go tools pinned
# in go.mod and are installed into a private bin directory at exactly those versions.
set -euo pipefail
cd "$(dirname "$0")/.."
bin="$(pwd)/.cache/protoc-plugins"
mkdir -p "$bin"
GOBIN="$bin" go install \
  google.golang.org/protobuf/cmd/protoc-gen-go \
  google.golang.org/grpc/cmd/protoc-gen-go-grpc \
  github.com/grpc-ecosystem/grpc-gateway/v2/protoc-gen-grpc-gateway \
  github.com/grpc-ecosystem/grpc-gateway/v2/protoc-gen-openapiv2
export PATH="$bin:$PATH"
# One merged OpenAPI document (api/openapi/strayleaf.swagger.json, served at /openapi.json) with
# the proto field names, which is what the gateway's JSON uses.
openapi_opts=grpc_api_configuration=proto/strayleaf/v1/http.yaml,allow_merge=true,merge_file_name=strayleaf,json_names_for_fields=false
args=(-I proto --go_out=proto --go_opt=paths=source_relative)
if ls proto/strayleaf/v1/*service*.proto >/dev/null 2>&1; then
  args+=(--go-grpc_out=proto --go-grpc_opt=paths=source_relative
    --grpc-gateway_out=proto --grpc-gateway_opt=paths=source_relative,grpc_api_configuration=proto/strayleaf/v1/http.yaml
    --openapiv2_out=api/openapi --openapiv2_opt="$openapi_opts")
fi
protoc "${args[@]}" proto/strayleaf/v1/*.proto
