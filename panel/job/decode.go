package job

import (
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"sort"
	"strings"
)

// rawTypes are the raw job-file shapes by their Go names, so that a decode
// error of go-toml, which names a Go struct field, can be told in the job
// file's terms.
var rawTypes = map[string]reflect.Type{}

func init() {
	for _, v := range []any{rawJob{}, rawPanel{}, rawStackup{}, rawSection{}, rawTrace{}, rawPart{}, rawCoupler{}, rawArray{}, rawSites{}} {
		t := reflect.TypeOf(v)
		rawTypes[t.Name()] = t
	}
}

// decodeMismatch matches go-toml's message for a value of the wrong type:
// "toml: cannot decode TOML integer into struct field job.rawArray.Count of type int".
var decodeMismatch = regexp.MustCompile(`cannot decode TOML ([a-z ]+?) into struct field \w+\.(\w+)\.(\w+) of type (.+)$`)

// decodeError returns go-toml's decode error msg in the job file's terms:
// what the key takes and what was found, with no Go type names. A type
// mismatch wraps ErrValue.
func decodeError(msg string) error {
	msg = strings.TrimPrefix(msg, "toml: ")
	m := decodeMismatch.FindStringSubmatch(msg)
	if m == nil {
		return errors.New(msg)
	}
	found, typeName, field, got := m[1], m[2], m[3], m[4]
	st, ok := rawTypes[typeName]
	if !ok {
		return fmt.Errorf("%w: this key does not take a TOML %s", ErrValue, found)
	}
	f, ok := st.FieldByName(field)
	if !ok {
		return fmt.Errorf("%w: this key does not take a TOML %s", ErrValue, found)
	}
	want := describe(f.Type)
	ft := f.Type
	if ft.Kind() == reflect.Pointer {
		ft = ft.Elem()
	}
	if got != ft.String() {
		// The mismatch is inside: an element of a list.
		return fmt.Errorf("%w: want %s; an element is a TOML %s", ErrValue, want, found)
	}
	return fmt.Errorf("%w: want %s, not a TOML %s", ErrValue, want, found)
}

// describe names what a raw field takes, in TOML terms.
func describe(t reflect.Type) string {
	switch t.Kind() {
	case reflect.String:
		return "a string"
	case reflect.Int, reflect.Int64:
		return "a whole number"
	case reflect.Interface:
		return "a value"
	case reflect.Map:
		return "a table"
	case reflect.Pointer:
		return "a table"
	case reflect.Struct:
		return "a table"
	case reflect.Slice:
		switch e := t.Elem(); e.Kind() {
		case reflect.Struct, reflect.Map:
			return "tables (an array of tables, or a list of { ... })"
		case reflect.Interface:
			return "a list [ ... ]"
		default:
			s := describe(e)
			return "a list of " + strings.TrimPrefix(s, "a ") + "s"
		}
	}
	return "another type"
}

// checkKeyCase returns the first key of the file whose name matches a
// job-file key only when case is ignored ("Panel" for "panel"): TOML keys
// are case-sensitive (TOML v1.0.0, "Keys"), while go-toml would decode it
// silently into the field, and messages could not find its line.
func checkKeyCase(f *tomlFile) error {
	keys := make([]string, 0, len(f.lines))
	for k := range f.lines {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		t := reflect.TypeOf(rawJob{})
		for _, part := range strings.Split(stripIndices(k), ".") {
			for t.Kind() == reflect.Pointer || t.Kind() == reflect.Slice {
				t = t.Elem()
			}
			if t.Kind() != reflect.Struct {
				break // a map (contributor, layer, spec): the loader checks its keys exactly
			}
			exact, fold := -1, -1
			for i := 0; i < t.NumField(); i++ {
				tag := t.Field(i).Tag.Get("toml")
				switch {
				case tag == part:
					exact = i
				case strings.EqualFold(tag, part):
					fold = i
				}
			}
			if exact < 0 && fold >= 0 {
				tag := t.Field(fold).Tag.Get("toml")
				return &ParseError{File: f.name, Line: f.lines[k], Key: k, Err: fmt.Errorf("%w %q (keys are case-sensitive: %q)", ErrUnknownKey, part, tag)}
			}
			if exact < 0 {
				break
			}
			t = t.Field(exact).Type
		}
	}
	return nil
}

// tomlKind names the TOML type of a decoded value, for messages.
func tomlKind(v any) string {
	switch v.(type) {
	case string:
		return "string"
	case int64:
		return "integer"
	case float64:
		return "float"
	case bool:
		return "boolean"
	case []any:
		return "array"
	case map[string]any:
		return "table"
	}
	return "date or time"
}
