package data

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestReadJSON checks each message against the wording the results and
// merger readers have always used, so existing messages do not change.
func TestReadJSON(t *testing.T) {
	dir := t.TempDir()
	type body struct {
		Schema string    `json:"schema"`
		Beta   []float64 `json:"beta"`
	}
	tests := []struct {
		name, content, want, command string
		err                          string // "" for success
	}{
		{"results", `{"schema": "rcdemand.results.v1", "beta": [-2, 1]}`, "rcdemand.results.v1", "estimate", ""},
		{"not JSON", `{"schema": `, "rcdemand.results.v1", "estimate", "r.json: not a results file (invalid JSON: unexpected end of JSON input)"},
		{"not an object", `[1, 2]`, "rcdemand.merger.v1", "merger", "r.json: not a merger file (invalid JSON: "},
		{"another schema", `{"schema": "someone.else.v2"}`, "rcdemand.results.v1", "estimate",
			`r.json: schema "someone.else.v2", want "rcdemand.results.v1" (a file written by rcdemand estimate)`},
		{"no schema", `{"beta": [1]}`, "rcdemand.merger.v1", "merger",
			`r.json: schema "", want "rcdemand.merger.v1" (a file written by rcdemand merger)`},
		{"body of the wrong shape", `{"schema": "rcdemand.study.v1", "beta": "high"}`, "rcdemand.study.v1", "study", "r.json: json: cannot unmarshal string"},
		{"schema without the usual form", `{"schema": "x"}`, "custom", "other", `r.json: schema "x", want "custom" (a file written by rcdemand other)`},
		{"invalid JSON, schema without the usual form", `nope`, "custom", "other", "r.json: not a custom file (invalid JSON: "},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, "r.json")
			os.WriteFile(path, []byte(tc.content), 0o644)
			var v body
			err := ReadJSON(path, tc.want, tc.command, &v)
			var pv body
			perr := ParseJSON("r.json", []byte(tc.content), tc.want, tc.command, &pv)
			if tc.err == "" {
				if err != nil || perr != nil || v.Schema != tc.want || len(v.Beta) != 2 || pv.Beta[0] != -2 {
					t.Fatalf("got %+v, %v; %+v, %v", v, err, pv, perr)
				}
				return
			}
			if err == nil || perr == nil {
				t.Fatalf("accepted: %v, %v", err, perr)
			}
			if !strings.HasPrefix(perr.Error(), tc.err) {
				t.Fatalf("got %q, want it to start %q", perr, tc.err)
			}
			if !strings.HasPrefix(err.Error(), path+":") || err.Error()[len(path):] != perr.Error()[len("r.json"):] {
				t.Fatalf("ReadJSON %q and ParseJSON %q differ", err, perr)
			}
		})
	}
	var v body
	absent := filepath.Join(dir, "absent.json")
	if err := ReadJSON(absent, "rcdemand.results.v1", "estimate", &v); err == nil || err.Error() != absent+": file does not exist" {
		t.Fatalf("absent file: %v", err)
	}
}

// FuzzParseJSON: no input makes ParseJSON panic, and what it accepts has the
// schema it asked for.
func FuzzParseJSON(f *testing.F) {
	for _, s := range []string{`{"schema": "rcdemand.results.v1", "beta": [1]}`, `{"schema": 1}`, `[]`, `null`, `{"schema": "rcdemand.results.v1", "beta": {}}`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, raw []byte) {
		var v struct {
			Schema string    `json:"schema"`
			Beta   []float64 `json:"beta"`
		}
		if err := ParseJSON("f.json", raw, "rcdemand.results.v1", "estimate", &v); err == nil && v.Schema != "rcdemand.results.v1" {
			t.Fatalf("accepted schema %q", v.Schema)
		}
	})
}
