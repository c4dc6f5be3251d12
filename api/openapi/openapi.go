// Package openapi holds the OpenAPI (Swagger 2.0) document of the strayleaf REST API, generated
// from proto/strayleaf/v1 and proto/strayleaf/v1/http.yaml by proto/generate.sh. The daemon
// serves it at /openapi.json.
package openapi

import _ "embed"

// Document is the generated OpenAPI document, JSON.
//
//go:embed strayleaf.swagger.json
var Document []byte
