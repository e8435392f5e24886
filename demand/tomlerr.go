package demand

import (
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"slices"
	"strings"

	"github.com/BurntSushi/toml"
)

// typeMismatch and tableMismatch match the TOML decoder's messages for a
// value of the wrong type.
var (
	typeMismatch  = regexp.MustCompile(`^toml: (?:line (\d+) )?\(last key "([^"]+)"\): incompatible types: TOML value has type (\S+); destination has type (.+)$`)
	tableMismatch = regexp.MustCompile(`^toml: (?:line (\d+) )?\(last key "([^"]+)"\): type mismatch for \S+: expected (\S+) but found (\S+)$`)
)

// kindWords names TOML and Go types for a reader of a spec file.
var kindWords = map[string]string{
	"string": "text", "int64": "a whole number", "integer": "a whole number", "float64": "a number", "float": "a number",
	"bool": "true or false", "map[string]any": "a table", "[]any": "a list", "slice": "a list", "map": "a table",
	"struct": "a table", "array": "a list", "uint64": "a whole number ≥ 0", "table": "a table",
}

// TOMLError turns an error of the TOML decoder into a message a user can
// act on: the line, the key, and what kind of value the key takes, e.g.
// `line 3: "demand.linear" takes a list, not text`.
func TOMLError(err error) string {
	var pe toml.ParseError
	if errors.As(err, &pe) {
		return fmt.Sprintf("line %d: %s", pe.Position.Line, pe.Message)
	}
	m := typeMismatch.FindStringSubmatch(err.Error())
	if t := tableMismatch.FindStringSubmatch(err.Error()); t != nil {
		m = []string{t[0], t[1], t[2], t[4], t[3]}
	}
	if m == nil {
		return err.Error()
	}
	want, got := kindWords[m[4]], kindWords[m[3]]
	if want == "" {
		want = m[4]
	}
	if got == "" {
		got = m[3]
	}
	msg := fmt.Sprintf("%q takes %s, not %s", m[2], want, got)
	if m[1] != "" {
		msg = "line " + m[1] + ": " + msg
	}
	return msg
}

// notTruth returns an error when TOML content is a truth file of rcdemand
// synth (it sets markets and [beta]) rather than a spec, or cannot be read.
func notTruth(raw []byte) error {
	var keys map[string]any
	if _, err := toml.Decode(string(raw), &keys); err != nil {
		return errors.New(TOMLError(err))
	}
	_, markets := keys["markets"]
	_, beta := keys["beta"]
	if markets && beta {
		return errors.New("this is a truth file of rcdemand synth (it sets markets and [beta]), not a spec: give it to synth --truth")
	}
	return nil
}

// TOMLTables returns an error in TOMLError's words (without a line, which
// the decoder's metadata do not keep) for the first key that t decodes into
// a map but whose value is not a table. The TOML decoder drops such a value
// without a word, so `interactions = 3` under [demand] would otherwise read
// as no interactions at all. Tables of tables (such as start_cholesky) are
// checked at both levels. A table made implicitly, by dotted keys
// (tastes.price = "nu") or by the header of a table inside it, is a table.
func TOMLTables(md toml.MetaData, t reflect.Type) error {
	var walk func(key []string, t reflect.Type) error
	walk = func(key []string, t reflect.Type) error {
		switch t.Kind() {
		case reflect.Pointer:
			return walk(key, t.Elem())
		case reflect.Struct:
			for i := range t.NumField() {
				tag := tomlKey(t.Field(i))
				k := append(slices.Clone(key), tag)
				if tag == "" || !md.IsDefined(k...) {
					continue
				}
				if err := walk(k, t.Field(i).Type); err != nil {
					return err
				}
			}
		case reflect.Map:
			if typ := md.Type(key...); typ != "Hash" && typ != "" { // "": implicit
				return fmt.Errorf("%q takes a table, not %s", strings.Join(key, "."), tomlKind(typ))
			}
			if t.Elem().Kind() != reflect.Map {
				return nil
			}
			for _, k := range md.Keys() {
				if len(k) == len(key)+1 && slices.Equal(k[:len(key)], key) {
					if err := walk(k, t.Elem()); err != nil {
						return err
					}
				}
			}
		}
		return nil
	}
	return walk(nil, t)
}

// tomlKind names the TOML type typ (as toml.MetaData.Type gives it) for a
// reader of a spec file.
func tomlKind(typ string) string {
	switch w := kindWords[strings.ToLower(typ)]; {
	case w != "":
		return w
	case typ == "ArrayHash":
		return "a list of tables"
	default:
		return strings.ToLower(typ)
	}
}
