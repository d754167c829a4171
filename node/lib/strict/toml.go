package strict

import (
	"bytes"
	"errors"
	"fmt"
	"reflect"
	"regexp"
	"strings"
	"unicode/utf8"

	"github.com/pelletier/go-toml/v2"
	"github.com/pelletier/go-toml/v2/unstable"
)

// TOML decodes a TOML document from data into v (a non-nil pointer) strictly, over whatever v
// already holds (so that defaults set before the call stay where the document is silent).
// Problems carry the line of their key where it can be found. When the document has problems,
// v still receives every key that has none, so that a caller can check the rest and report
// everything at once.
func TOML(data []byte, v any) error {
	rv := reflect.ValueOf(v)
	if rv.Kind() != reflect.Pointer || rv.IsNil() {
		panic("strict.TOML: v must be a non-nil pointer")
	}
	if !utf8.Valid(data) {
		return &Error{[]Problem{{Msg: "not valid UTF-8 text"}}}
	}
	var tree map[string]any
	if err := toml.Unmarshal(data, &tree); err != nil {
		var de *toml.DecodeError
		if errors.As(err, &de) {
			row, _ := de.Position()
			return &Error{[]Problem{{Key: strings.Join(de.Key(), "."), Line: row, Msg: strings.TrimPrefix(de.Error(), "toml: ")}}}
		}
		return &Error{[]Problem{{Msg: err.Error()}}}
	}
	var probs []Problem
	check(tree, rv.Type().Elem(), "", tomlSyntax, &probs)
	if len(probs) > 0 {
		lines := keyLines(data)
		for i := range probs {
			probs[i].Line = lineOf(lines, probs[i].Key)
			prune(tree, probs[i].Key)
		}
		if rest, err := toml.Marshal(tree); err == nil {
			_ = toml.NewDecoder(bytes.NewReader(rest)).DisallowUnknownFields().Decode(v)
		}
		return &Error{probs}
	}
	if err := toml.NewDecoder(bytes.NewReader(data)).DisallowUnknownFields().Decode(v); err != nil {
		var de *toml.DecodeError
		if errors.As(err, &de) {
			row, _ := de.Position()
			return &Error{[]Problem{{Key: strings.Join(de.Key(), "."), Line: row, Msg: strings.TrimPrefix(de.Error(), "toml: ")}}}
		}
		return &Error{[]Problem{{Msg: err.Error()}}}
	}
	return nil
}

// FileLines turns the error of TOML into one line per problem for a configuration file: file
// name and line, the key, what is wrong and what to do, the fix naming example (the file that
// shows every key, e.g. configs/leqnode.toml). It also returns the keys it reported, so that a
// caller validating values afterwards can leave those out.
func FileLines(err error, name, example string) (lines []string, keys map[string]bool) {
	keys = map[string]bool{}
	for _, p := range Problems(err) {
		at := name
		if p.Line > 0 {
			at = fmt.Sprintf("%s:%d", name, p.Line)
		}
		switch rest, unknown := strings.CutPrefix(p.Msg, "unknown key"); {
		case p.Key == "":
			lines = append(lines, fmt.Sprintf("%s: %s", at, p.Msg))
		case unknown:
			lines = append(lines, fmt.Sprintf("%s: unknown key %q%s: check its spelling against %s", at, p.Key, rest, example))
		default:
			lines = append(lines, fmt.Sprintf("%s: %s: %s: give a value of the type %s shows", at, p.Key, p.Msg, example))
		}
		keys[p.Key] = true
	}
	return lines, keys
}

// prune deletes key from tree: the key itself where it names a table's entry, else (within a
// list) the entry holding the list.
func prune(tree map[string]any, key string) {
	parts := strings.Split(key, ".")
	m := tree
	for i, part := range parts {
		name, _, indexed := strings.Cut(part, "[")
		if i == len(parts)-1 || indexed {
			delete(m, name)
			return
		}
		next, ok := m[name].(map[string]any)
		if !ok {
			delete(m, name)
			return
		}
		m = next
	}
}

var indexRe = regexp.MustCompile(`\[\d+\]`)

// lineOf finds the line of key, or of its nearest enclosing table; 0 when unknown.
func lineOf(lines map[string]int, key string) int {
	key = indexRe.ReplaceAllString(key, "")
	for key != "" {
		if l, ok := lines[key]; ok {
			return l
		}
		i := strings.LastIndexByte(key, '.')
		if i < 0 {
			break
		}
		key = key[:i]
	}
	return 0
}

// keyLines maps the dotted path of every table header and key of a TOML document to its line.
func keyLines(data []byte) map[string]int {
	out := map[string]int{}
	var p unstable.Parser
	p.Reset(data)
	var table []string
	line := func(n *unstable.Node) int {
		r := p.Range(n.Data)
		return 1 + bytes.Count(data[:r.Offset], []byte("\n"))
	}
	keyOf := func(it unstable.Iterator) (parts []string, first int) {
		for it.Next() {
			n := it.Node()
			if first == 0 {
				first = line(n)
			}
			parts = append(parts, string(n.Data))
		}
		return parts, first
	}
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			parts, l := keyOf(e.Key())
			table = parts
			if _, ok := out[strings.Join(table, ".")]; !ok {
				out[strings.Join(table, ".")] = l
			}
		case unstable.KeyValue:
			parts, l := keyOf(e.Key())
			k := strings.Join(append(append([]string{}, table...), parts...), ".")
			if _, ok := out[k]; !ok {
				out[k] = l
			}
		}
	}
	return out
}
