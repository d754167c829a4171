// Package strict decodes outside input (MQTT commands, configuration and profile files, HTTP
// request bodies, state files) exactly as its schema or format says, and no more leniently.
//
// The model: a document is first read into a plain tree (objects, lists, strings, numbers,
// booleans) and checked against the Go type it is meant for, field by field, before it is
// decoded. The check enforces what the standard decoders leave loose:
//
//   - key names match a field's tag exactly: encoding/json and go-toml both match keys without
//     regard to case, so "ACtion" would silently set "action";
//   - a key no field names is refused (a schema's additionalProperties false);
//   - JSON null is refused except for a field of interface type (a pointer field means "may be
//     absent", not "may be null", as a schema's "type": "string" refuses null), JSON keys may not repeat
//     (RFC 8259 section 4 leaves duplicates to the reader; I-JSON, RFC 7493 section 2.3,
//     forbids them), and the text must be valid UTF-8 (RFC 8259 section 8.1);
//   - a value of the wrong type is named in plain words ("want a whole number, got a
//     string"), not by Go type names.
//
// Every problem of a document is reported, not just the first: Error lists them, and its
// Error method joins them into one line for logs and replies.
//
// Times use ParseTime, which takes exactly the date-time of RFC 3339 section 5.6 (two-digit
// hours, a "T" and an offset or "Z"); time.Parse with time.RFC3339 also takes one-digit hours.
package strict

import (
	"encoding"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"
)

// Problem is one fault of a document: the dotted path of the key (empty for the document
// itself), the line where known (0 otherwise) and what is wrong, in plain words.
type Problem struct {
	Key  string
	Line int
	Msg  string
}

func (p Problem) String() string {
	s := p.Msg
	if p.Key != "" {
		s = p.Key + ": " + s
	}
	if p.Line > 0 {
		s = "line " + strconv.Itoa(p.Line) + ": " + s
	}
	return s
}

// Error holds every problem found in a document.
type Error struct {
	Problems []Problem
}

// Error joins the problems into one line.
func (e *Error) Error() string {
	parts := make([]string, len(e.Problems))
	for i, p := range e.Problems {
		parts[i] = p.String()
	}
	return strings.Join(parts, "; ")
}

// Problems returns the problems of err when it is an *Error (wrapped or not), else one problem
// holding err's text.
func Problems(err error) []Problem {
	var e *Error
	if errors.As(err, &e) {
		return e.Problems
	}
	return []Problem{{Msg: err.Error()}}
}

// syntax of the document being checked: the words used in messages.
type syntax struct {
	tag    string // struct tag key: "json" or "toml"
	object string // what an object is called: "an object" or "a table"
}

var (
	jsonSyntax = syntax{tag: "json", object: "an object"}
	tomlSyntax = syntax{tag: "toml", object: "a table"}
)

// JSON decodes one JSON value from data into v (a non-nil pointer) strictly: see the package
// comment. Nothing but white space may follow the value.
func JSON(data []byte, v any) error {
	if !utf8.Valid(data) {
		return &Error{[]Problem{{Msg: "not valid UTF-8 text"}}}
	}
	dec := json.NewDecoder(strings.NewReader(string(data)))
	dec.UseNumber()
	var probs []Problem
	tree, err := readJSON(dec, "", &probs, 0)
	if err != nil {
		return &Error{[]Problem{{Msg: "not valid JSON: " + plainJSONError(err)}}}
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return &Error{[]Problem{{Msg: "data after the JSON value"}}}
	}
	rv := reflect.ValueOf(v)
	if rv.Kind() != reflect.Pointer || rv.IsNil() {
		panic("strict.JSON: v must be a non-nil pointer")
	}
	check(tree, rv.Type().Elem(), "", jsonSyntax, &probs)
	if len(probs) > 0 {
		return &Error{probs}
	}
	d := json.NewDecoder(strings.NewReader(string(data)))
	d.DisallowUnknownFields()
	if err := d.Decode(v); err != nil {
		var te *json.UnmarshalTypeError
		if errors.As(err, &te) {
			return &Error{[]Problem{{Key: te.Field, Msg: "the value " + te.Value + " does not fit"}}}
		}
		return &Error{[]Problem{{Msg: plainJSONError(err)}}}
	}
	return nil
}

// CheckJSON reports whether data is one I-JSON value (RFC 7493): valid UTF-8 (section 2.1),
// no object with a repeated key (section 2.3), nested at most 64 levels, nothing after it.
// It is for documents checked by a JSON Schema rather than decoded into a Go type: the schema
// validator's decoder (like encoding/json) keeps the last of repeated keys and replaces
// invalid UTF-8 without a word.
func CheckJSON(data []byte) error {
	if !utf8.Valid(data) {
		return &Error{[]Problem{{Msg: "not valid UTF-8 text"}}}
	}
	dec := json.NewDecoder(strings.NewReader(string(data)))
	dec.UseNumber()
	var probs []Problem
	if _, err := readJSON(dec, "", &probs, 0); err != nil {
		return &Error{[]Problem{{Msg: "not valid JSON: " + plainJSONError(err)}}}
	}
	if _, err := dec.Token(); !errors.Is(err, io.EOF) {
		return &Error{[]Problem{{Msg: "data after the JSON value"}}}
	}
	if len(probs) > 0 {
		return &Error{probs}
	}
	return nil
}

// DateTime is the check of the JSON Schema format "date-time" by ParseTime, for a schema
// validator: nil for a value that is not a string (the format applies to strings only).
func DateTime(v any) error {
	s, ok := v.(string)
	if !ok {
		return nil
	}
	_, err := ParseTime(s)
	return err
}

// maxDepth bounds the nesting of a JSON document (RFC 8259 section 9 lets a parser set one).
const maxDepth = 64

// readJSON reads one value into a plain tree, noting repeated keys.
func readJSON(dec *json.Decoder, path string, probs *[]Problem, depth int) (any, error) {
	if depth > maxDepth {
		return nil, fmt.Errorf("nested deeper than %d levels", maxDepth)
	}
	tok, err := dec.Token()
	if err != nil {
		return nil, err
	}
	switch t := tok.(type) {
	case json.Delim:
		switch t {
		case '{':
			m := map[string]any{}
			for dec.More() {
				kt, err := dec.Token()
				if err != nil {
					return nil, err
				}
				k := kt.(string)
				val, err := readJSON(dec, join(path, k), probs, depth+1)
				if err != nil {
					return nil, err
				}
				if _, dup := m[k]; dup {
					*probs = append(*probs, Problem{Key: join(path, k), Msg: "the key appears more than once"})
				}
				m[k] = val
			}
			_, err := dec.Token() // '}'
			return m, err
		case '[':
			l := []any{}
			for i := 0; dec.More(); i++ {
				val, err := readJSON(dec, fmt.Sprintf("%s[%d]", path, i), probs, depth+1)
				if err != nil {
					return nil, err
				}
				l = append(l, val)
			}
			_, err := dec.Token() // ']'
			return l, err
		}
		return nil, fmt.Errorf("unexpected %v", t)
	default:
		return t, nil // string, json.Number, bool or nil
	}
}

// plainJSONError drops the package prefix of encoding/json's messages.
func plainJSONError(err error) string {
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return "the text ends early"
	}
	return strings.TrimPrefix(err.Error(), "json: ")
}

func join(path, key string) string {
	if path == "" {
		return key
	}
	return path + "." + key
}

var (
	textUnmarshaler = reflect.TypeFor[encoding.TextUnmarshaler]()
	jsonUnmarshaler = reflect.TypeFor[json.Unmarshaler]()
	timeType        = reflect.TypeFor[time.Time]()
	numberType      = reflect.TypeFor[json.Number]()
)

// check compares a plain tree with the type it is to be decoded into, appending a problem per
// fault. Trees hold map[string]any, []any, string, bool, nil, json.Number (JSON), and int64,
// float64 and time values (TOML).
func check(tree any, t reflect.Type, path string, syn syntax, probs *[]Problem) {
	bad := func(format string, args ...any) {
		*probs = append(*probs, Problem{Key: path, Msg: fmt.Sprintf(format, args...)})
	}
	if tree == nil {
		if t.Kind() != reflect.Interface {
			bad("null is not allowed here: want %s", want(t, syn))
		}
		return
	}
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	switch {
	case t == numberType:
		if _, ok := tree.(json.Number); !ok {
			bad("want a number, got %s", describe(tree, syn))
		}
		return
	case t == timeType:
		if _, ok := tree.(time.Time); ok {
			return
		}
		if s, ok := tree.(string); ok {
			if _, err := ParseTime(s); err != nil {
				bad("%v", err)
			}
			return
		}
		bad("want an RFC 3339 date-time, got %s", describe(tree, syn))
		return
	case reflect.PointerTo(t).Implements(jsonUnmarshaler) && syn.tag == "json":
		return // the type checks itself
	case reflect.PointerTo(t).Implements(textUnmarshaler):
		if _, ok := tree.(string); !ok {
			bad("want %s, got %s", want(t, syn), describe(tree, syn))
		}
		return
	}
	switch t.Kind() {
	case reflect.Interface:
	case reflect.Struct:
		m, ok := tree.(map[string]any)
		if !ok {
			bad("want %s, got %s", syn.object, describe(tree, syn))
			return
		}
		fields := fieldsOf(t, syn.tag)
		keys := make([]string, 0, len(m))
		for k := range m {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for _, k := range keys {
			if ft, ok := fields[k]; ok {
				check(m[k], ft, join(path, k), syn, probs)
				continue
			}
			msg := "unknown key"
			for name := range fields {
				if strings.EqualFold(name, k) {
					msg = fmt.Sprintf("unknown key (keys are case-sensitive: write %q)", name)
					break
				}
			}
			*probs = append(*probs, Problem{Key: join(path, k), Msg: msg})
		}
	case reflect.Map:
		m, ok := tree.(map[string]any)
		if !ok {
			bad("want %s, got %s", syn.object, describe(tree, syn))
			return
		}
		for k, v := range m {
			check(v, t.Elem(), join(path, k), syn, probs)
		}
	case reflect.Slice, reflect.Array:
		l, ok := tree.([]any)
		if !ok {
			bad("want %s, got %s", want(t, syn), describe(tree, syn))
			return
		}
		if t.Kind() == reflect.Array && len(l) != t.Len() {
			bad("want a list of %d values, got %d", t.Len(), len(l))
			return
		}
		for i, v := range l {
			check(v, t.Elem(), fmt.Sprintf("%s[%d]", path, i), syn, probs)
		}
	case reflect.String:
		if _, ok := tree.(string); !ok {
			bad("want a string, got %s", describe(tree, syn))
		}
	case reflect.Bool:
		if _, ok := tree.(bool); !ok {
			bad("want true or false, got %s", describe(tree, syn))
		}
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64, reflect.Uintptr:
		var s string
		switch n := tree.(type) {
		case json.Number:
			s = n.String()
		case int64:
			s = strconv.FormatInt(n, 10)
		default:
			bad("want a whole number, got %s", describe(tree, syn))
			return
		}
		var err error
		if t.Kind() >= reflect.Uint {
			_, err = strconv.ParseUint(s, 10, t.Bits())
		} else {
			_, err = strconv.ParseInt(s, 10, t.Bits())
		}
		if err != nil {
			if strings.ContainsAny(s, ".eE") {
				bad("want a whole number, got %s", s)
			} else {
				bad("the number %s is out of range", s)
			}
		}
	case reflect.Float32, reflect.Float64:
		switch n := tree.(type) {
		case json.Number:
			if _, err := strconv.ParseFloat(n.String(), t.Bits()); err != nil {
				bad("the number %s is out of range", n)
			}
		case int64, float64:
		default:
			bad("want a number, got %s", describe(tree, syn))
		}
	default:
		bad("cannot be set from a file")
	}
}

// fieldsOf maps the key names of struct type t (tag key tag, else the field name; embedded
// structs without a name are flattened) to their types.
func fieldsOf(t reflect.Type, tag string) map[string]reflect.Type {
	out := map[string]reflect.Type{}
	for i := range t.NumField() {
		f := t.Field(i)
		name, _, _ := strings.Cut(f.Tag.Get(tag), ",")
		if name == "-" || (!f.IsExported() && !f.Anonymous) {
			continue
		}
		if f.Anonymous && name == "" {
			ft := f.Type
			if ft.Kind() == reflect.Pointer {
				ft = ft.Elem()
			}
			if ft.Kind() == reflect.Struct {
				for k, v := range fieldsOf(ft, tag) {
					if _, ok := out[k]; !ok {
						out[k] = v
					}
				}
				continue
			}
		}
		if name == "" {
			name = f.Name
		}
		out[name] = f.Type
	}
	return out
}

// want describes in words what type t takes.
func want(t reflect.Type, syn syntax) string {
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	if t == timeType {
		return "an RFC 3339 date-time"
	}
	if reflect.PointerTo(t).Implements(textUnmarshaler) {
		return "a string"
	}
	switch t.Kind() {
	case reflect.Struct, reflect.Map:
		return syn.object
	case reflect.Slice, reflect.Array:
		return "a list"
	case reflect.String:
		return "a string"
	case reflect.Bool:
		return "true or false"
	case reflect.Float32, reflect.Float64:
		return "a number"
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64,
		reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		return "a whole number"
	}
	return "a value"
}

// describe names the kind of a tree value in words.
func describe(v any, syn syntax) string {
	switch v := v.(type) {
	case nil:
		return "null"
	case map[string]any:
		return syn.object
	case []any:
		return "a list"
	case string:
		if len(v) > 40 {
			v = v[:40] + "..."
		}
		return fmt.Sprintf("the string %q", v)
	case bool:
		return strconv.FormatBool(v)
	case json.Number:
		return "the number " + v.String()
	case int64, float64:
		return fmt.Sprintf("the number %v", v)
	}
	return "a date or time"
}
