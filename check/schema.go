package check

import _ "embed"

// Schema is check/schema.json: the JSON Schema (draft 2020-12) of a Record.
//
//go:embed schema.json
var Schema []byte
