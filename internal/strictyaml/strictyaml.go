// Package strictyaml reads YAML documents field by field with strict rules:
// every key must be known, required keys must be present, numbers must be
// finite, and every error names the file, the dotted field path and the line.
//
// Readers take the keys they know from a Map and then call Done, which reports
// any key left unread as unknown, so a typo never passes silently.
package strictyaml

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"
)

// Error is a problem at one field of one file.
type Error struct {
	File  string
	Field string // dotted path, e.g. probe.linear.pitch_m; empty for the document
	Line  int    // 1-based; 0 if unknown
	Msg   string
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	b.WriteString(": ")
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	if e.Line > 0 {
		fmt.Fprintf(&b, " (line %d)", e.Line)
	}
	return b.String()
}

// Map is one YAML mapping being read.
type Map struct {
	file string
	path string
	node *yaml.Node
	keys map[string]*yaml.Node
	knod map[string]*yaml.Node
	used map[string]bool
	ord  []string
}

// maxDocBytes bounds the size of a YAML document read by Parse.
const maxDocBytes = 8 << 20

// Parse parses data as a single YAML document whose root is a mapping.
func Parse(file string, data []byte) (*Map, error) {
	if len(data) > maxDocBytes {
		return nil, &Error{File: file, Msg: fmt.Sprintf("document is %d bytes, over the %d-byte limit", len(data), maxDocBytes)}
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := dec.Decode(&doc); err != nil && err != io.EOF {
		return nil, &Error{File: file, Msg: "not valid YAML: " + strings.TrimPrefix(err.Error(), "yaml: ")}
	}
	if doc.Kind == 0 || len(doc.Content) == 0 {
		return nil, &Error{File: file, Msg: "empty document"}
	}
	// A second document would be ignored silently; refuse it instead.
	var extra yaml.Node
	switch err := dec.Decode(&extra); {
	case err == io.EOF:
	case err != nil:
		return nil, &Error{File: file, Msg: "not valid YAML: " + strings.TrimPrefix(err.Error(), "yaml: ")}
	default:
		line := extra.Line
		if len(extra.Content) > 0 {
			line = extra.Content[0].Line
		}
		return nil, &Error{File: file, Line: line, Msg: "holds more than one YAML document (a second '---'); keep one"}
	}
	root := doc.Content[0]
	return newMap(file, "", root)
}

// FromNode reads a mapping node of an already parsed document (for example
// one part of a larger file) as a Map whose fields are reported under path
// (e.g. "base" gives "base.probe.count"). Lines are the node's own.
func FromNode(file, path string, n *yaml.Node) (*Map, error) {
	if n == nil {
		return nil, &Error{File: file, Field: path, Msg: "expected a mapping of keys to values"}
	}
	return newMap(file, path, n)
}

func newMap(file, path string, n *yaml.Node) (*Map, error) {
	n = deref(n)
	if n.Kind != yaml.MappingNode {
		return nil, &Error{File: file, Field: path, Line: n.Line, Msg: "expected a mapping of keys to values"}
	}
	m := &Map{file: file, path: path, node: n, keys: map[string]*yaml.Node{}, knod: map[string]*yaml.Node{}, used: map[string]bool{}}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := deref(n.Content[i]), n.Content[i+1]
		if k.Kind != yaml.ScalarNode {
			return nil, &Error{File: file, Field: path, Line: k.Line, Msg: "keys must be plain strings"}
		}
		if k.Tag == "!!merge" {
			return nil, &Error{File: file, Field: path, Line: k.Line, Msg: "merge keys (<<) are not supported; write the keys out"}
		}
		if _, dup := m.keys[k.Value]; dup {
			return nil, &Error{File: file, Field: m.join(k.Value), Line: k.Line, Msg: "key appears twice"}
		}
		m.keys[k.Value] = v
		m.knod[k.Value] = k
		m.ord = append(m.ord, k.Value)
	}
	return m, nil
}

func deref(n *yaml.Node) *yaml.Node {
	for n != nil && n.Kind == yaml.AliasNode && n.Alias != nil {
		n = n.Alias
	}
	return n
}

func (m *Map) join(key string) string {
	if m.path == "" {
		return key
	}
	return m.path + "." + key
}

// File returns the file name used in errors.
func (m *Map) File() string { return m.file }

// Path returns the dotted path of this mapping.
func (m *Map) Path() string { return m.path }

// Line returns the line of the mapping itself.
func (m *Map) Line() int { return m.node.Line }

// Has reports whether key is present (it does not mark it read).
func (m *Map) Has(key string) bool { _, ok := m.keys[key]; return ok }

// Errorf returns an Error for key (or for the mapping when key is empty).
func (m *Map) Errorf(key, format string, args ...any) error {
	e := &Error{File: m.file, Field: m.path, Line: m.node.Line, Msg: fmt.Sprintf(format, args...)}
	if key != "" {
		e.Field = m.join(key)
		if n, ok := m.keys[key]; ok {
			e.Line = n.Line
		}
	}
	return e
}

func (m *Map) take(key string) (*yaml.Node, bool) {
	n, ok := m.keys[key]
	if !ok {
		return nil, false
	}
	m.used[key] = true
	n = deref(n)
	if n.Kind == yaml.ScalarNode && n.Tag == "!!null" {
		return nil, false
	}
	return n, true
}

func (m *Map) missing(key string) error {
	return &Error{File: m.file, Field: m.join(key), Line: m.node.Line, Msg: "required key is missing"}
}

// Done reports the first key that no reader took, as unknown.
func (m *Map) Done() error {
	for _, k := range m.ord {
		if !m.used[k] {
			return &Error{File: m.file, Field: m.join(k), Line: m.knod[k].Line, Msg: "unknown key"}
		}
	}
	return nil
}

func scalarFloat(file, path string, n *yaml.Node) (float64, error) {
	if n.Kind != yaml.ScalarNode || (n.Tag != "!!float" && n.Tag != "!!int") {
		return 0, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("expected a number, got %s", describe(n))}
	}
	v, err := strconv.ParseFloat(strings.ReplaceAll(n.Value, "_", ""), 64)
	if err != nil {
		var f float64
		if derr := n.Decode(&f); derr != nil {
			return 0, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("expected a number, got %q", n.Value)}
		}
		v = f
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("must be finite, got %s", n.Value)}
	}
	return v, nil
}

func describe(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		return strconv.Quote(n.Value)
	}
	return "something else"
}

// Float reads a required finite number.
func (m *Map) Float(key string) (float64, error) {
	n, ok := m.take(key)
	if !ok {
		return 0, m.missing(key)
	}
	return scalarFloat(m.file, m.join(key), n)
}

// OptFloat reads an optional finite number; ok tells whether it was present.
func (m *Map) OptFloat(key string, def float64) (v float64, ok bool, err error) {
	n, ok := m.take(key)
	if !ok {
		return def, false, nil
	}
	v, err = scalarFloat(m.file, m.join(key), n)
	return v, err == nil, err
}

// Int reads a required integer.
func (m *Map) Int(key string) (int, error) {
	n, ok := m.take(key)
	if !ok {
		return 0, m.missing(key)
	}
	return scalarInt(m.file, m.join(key), n)
}

// OptInt reads an optional integer.
func (m *Map) OptInt(key string, def int) (v int, ok bool, err error) {
	n, ok := m.take(key)
	if !ok {
		return def, false, nil
	}
	v, err = scalarInt(m.file, m.join(key), n)
	return v, err == nil, err
}

// OptUint64 reads an optional whole number from 0 to 2^64-1, such as a
// random seed.
func (m *Map) OptUint64(key string, def uint64) (v uint64, ok bool, err error) {
	n, ok := m.take(key)
	if !ok {
		return def, false, nil
	}
	path := m.join(key)
	if n.Kind == yaml.ScalarNode && strings.HasPrefix(strings.TrimSpace(n.Value), "-") && (n.Tag == "!!int" || n.Tag == "!!float") {
		return 0, false, &Error{File: m.file, Field: path, Line: n.Line, Msg: fmt.Sprintf("must not be negative, got %s", n.Value)}
	}
	if n.Kind == yaml.ScalarNode && n.Tag == "!!float" {
		if f, err := strconv.ParseFloat(n.Value, 64); err == nil && f == math.Trunc(f) && f >= 0 && f < 1<<53 {
			return uint64(f), true, nil
		}
	}
	if n.Kind != yaml.ScalarNode || n.Tag != "!!int" || n.Decode(&v) != nil {
		return 0, false, &Error{File: m.file, Field: path, Line: n.Line, Msg: fmt.Sprintf("expected a whole number from 0 to %d, got %s", uint64(math.MaxUint64), describe(n))}
	}
	return v, true, nil
}

func scalarInt(file, path string, n *yaml.Node) (int, error) {
	if n.Kind != yaml.ScalarNode || n.Tag != "!!int" {
		if n.Kind == yaml.ScalarNode && n.Tag == "!!float" {
			if f, err := strconv.ParseFloat(n.Value, 64); err == nil && f == math.Trunc(f) && math.Abs(f) < 1<<53 {
				return int(f), nil
			}
		}
		return 0, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("expected a whole number, got %s", describe(n))}
	}
	var v int64
	if err := n.Decode(&v); err != nil {
		return 0, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("expected a whole number, got %q", n.Value)}
	}
	if v > math.MaxInt32 || v < math.MinInt32 {
		return 0, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("%d is out of range", v)}
	}
	return int(v), nil
}

// String reads a required string.
func (m *Map) String(key string) (string, error) {
	n, ok := m.take(key)
	if !ok {
		return "", m.missing(key)
	}
	if n.Kind != yaml.ScalarNode {
		return "", &Error{File: m.file, Field: m.join(key), Line: n.Line, Msg: fmt.Sprintf("expected text, got %s", describe(n))}
	}
	return n.Value, nil
}

// OptString reads an optional string.
func (m *Map) OptString(key, def string) (string, bool, error) {
	if _, ok := m.take(key); !ok {
		return def, false, nil
	}
	s, err := m.String(key)
	return s, err == nil, err
}

// OptBool reads an optional boolean.
func (m *Map) OptBool(key string, def bool) (bool, bool, error) {
	n, ok := m.take(key)
	if !ok {
		return def, false, nil
	}
	if n.Kind != yaml.ScalarNode || n.Tag != "!!bool" {
		return false, false, &Error{File: m.file, Field: m.join(key), Line: n.Line, Msg: fmt.Sprintf("expected true or false, got %s", describe(n))}
	}
	var b bool
	if err := n.Decode(&b); err != nil {
		return false, false, &Error{File: m.file, Field: m.join(key), Line: n.Line, Msg: err.Error()}
	}
	return b, true, nil
}

// Map reads a required nested mapping.
func (m *Map) Map(key string) (*Map, error) {
	n, ok := m.take(key)
	if !ok {
		return nil, m.missing(key)
	}
	return newMap(m.file, m.join(key), n)
}

// OptMap reads an optional nested mapping; it returns nil when absent.
func (m *Map) OptMap(key string) (*Map, error) {
	n, ok := m.take(key)
	if !ok {
		return nil, nil
	}
	return newMap(m.file, m.join(key), n)
}

// ErrAbsent is returned by the Opt sequence readers when the key is absent.
var ErrAbsent = errors.New("absent")

func (m *Map) seq(key string, required bool) ([]*yaml.Node, error) {
	n, ok := m.take(key)
	if !ok {
		if required {
			return nil, m.missing(key)
		}
		return nil, ErrAbsent
	}
	if n.Kind != yaml.SequenceNode {
		return nil, &Error{File: m.file, Field: m.join(key), Line: n.Line, Msg: fmt.Sprintf("expected a list, got %s", describe(n))}
	}
	if len(n.Content) > maxItems {
		return nil, &Error{File: m.file, Field: m.join(key), Line: n.Line, Msg: fmt.Sprintf("list has %d items, over the limit of %d", len(n.Content), maxItems)}
	}
	return n.Content, nil
}

// maxItems bounds any one list in a document.
const maxItems = 1 << 20

// Floats reads a list of finite numbers. With required false, an absent key
// gives nil and no error.
func (m *Map) Floats(key string, required bool) ([]float64, error) {
	items, err := m.seq(key, required)
	if err == ErrAbsent {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(items))
	for i, it := range items {
		v, err := scalarFloat(m.file, fmt.Sprintf("%s[%d]", m.join(key), i), deref(it))
		if err != nil {
			return nil, err
		}
		out[i] = v
	}
	return out, nil
}

// Points reads a list of [x, z] pairs.
func (m *Map) Points(key string, required bool) ([][2]float64, error) {
	items, err := m.seq(key, required)
	if err == ErrAbsent {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	out := make([][2]float64, len(items))
	for i, it := range items {
		p, err := pair(m.file, fmt.Sprintf("%s[%d]", m.join(key), i), deref(it))
		if err != nil {
			return nil, err
		}
		out[i] = p
	}
	return out, nil
}

// Pair reads a required [a, b] pair of numbers.
func (m *Map) Pair(key string) ([2]float64, error) {
	n, ok := m.take(key)
	if !ok {
		return [2]float64{}, m.missing(key)
	}
	return pair(m.file, m.join(key), n)
}

func pair(file, path string, n *yaml.Node) ([2]float64, error) {
	if n.Kind != yaml.SequenceNode || len(n.Content) != 2 {
		return [2]float64{}, &Error{File: file, Field: path, Line: n.Line, Msg: fmt.Sprintf("expected a pair [a, b], got %s", describe(n))}
	}
	var p [2]float64
	for k := range 2 {
		v, err := scalarFloat(file, fmt.Sprintf("%s[%d]", path, k), deref(n.Content[k]))
		if err != nil {
			return p, err
		}
		p[k] = v
	}
	return p, nil
}

// Maps reads a list of mappings.
func (m *Map) Maps(key string, required bool) ([]*Map, error) {
	items, err := m.seq(key, required)
	if err == ErrAbsent {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	out := make([]*Map, len(items))
	for i, it := range items {
		mm, err := newMap(m.file, fmt.Sprintf("%s[%d]", m.join(key), i), it)
		if err != nil {
			return nil, err
		}
		out[i] = mm
	}
	return out, nil
}

// Strings reads a list of strings.
func (m *Map) Strings(key string, required bool) ([]string, error) {
	items, err := m.seq(key, required)
	if err == ErrAbsent {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	out := make([]string, len(items))
	for i, it := range items {
		it = deref(it)
		if it.Kind != yaml.ScalarNode {
			return nil, &Error{File: m.file, Field: fmt.Sprintf("%s[%d]", m.join(key), i), Line: it.Line, Msg: "expected text"}
		}
		out[i] = it.Value
	}
	return out, nil
}

// Keys returns the keys of the mapping in document order.
func (m *Map) Keys() []string { return append([]string(nil), m.ord...) }

// Node returns the raw node of key, marking it read; nil when the key is
// absent or null. Aliases are resolved. Use it for parts of a document that
// another reader handles (see FromNode).
func (m *Map) Node(key string) *yaml.Node {
	n, ok := m.take(key)
	if !ok {
		return nil
	}
	return n
}

// KeyLine returns the line of key itself (0 when absent).
func (m *Map) KeyLine(key string) int {
	if k, ok := m.knod[key]; ok {
		return k.Line
	}
	return 0
}
