package data

import (
	"encoding/json"
	"fmt"
	"os"
	"strings"
)

// ReadJSON reads a JSON file written by rcdemand, checks that its "schema"
// is want, and decodes it into v. Errors name the file: "file does not
// exist", "not a <what> file (invalid JSON: …)", "schema %q, want %q (a file
// written by rcdemand <command>)". <what> is the middle of the schema name
// ("results" for "rcdemand.results.v1"), or want itself when it has no such
// form.
func ReadJSON(path, want, command string, v any) error {
	raw, err := os.ReadFile(path)
	if err != nil {
		return openErr(path, err)
	}
	return ParseJSON(path, raw, want, command, v)
}

// SchemaOf returns the "schema" of a JSON file written by rcdemand, or ""
// when the file cannot be read or is not such a file.
func SchemaOf(path string) string {
	raw, err := os.ReadFile(path)
	if err != nil {
		return ""
	}
	var head struct {
		Schema string `json:"schema"`
	}
	if json.Unmarshal(raw, &head) != nil {
		return ""
	}
	return head.Schema
}

// ParseJSON is ReadJSON on content already read; path is for messages.
// The schema is checked before the body is decoded, so a file of another
// kind is named as such rather than failing on some field.
func ParseJSON(path string, raw []byte, want, command string, v any) error {
	var head struct {
		Schema string `json:"schema"`
	}
	if err := json.Unmarshal(raw, &head); err != nil {
		return inputErr(path, 0, "", "not a %s file (invalid JSON: %v)", schemaKind(want), err)
	}
	if head.Schema != want {
		return inputErr(path, 0, "", "schema %q, want %q (a file written by rcdemand %s)", head.Schema, want, command)
	}
	if err := json.Unmarshal(raw, v); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// schemaKind returns "results" for "rcdemand.results.v1".
func schemaKind(schema string) string {
	parts := strings.Split(schema, ".")
	if len(parts) == 3 && parts[1] != "" {
		return parts[1]
	}
	return schema
}
