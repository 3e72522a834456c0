package strictyaml

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
)

const doc = `name: scan
rate: 20.0e6
count: 64
whole: 64.0
big: 18446744073709551615
flag: true
probe:
  linear:
    pitch_m: 0.3e-3
list: [1, 2.5, -3, 1_000]
points:
  - [0, 1]
  - [2, 3]
pair: [4, 5]
items:
  - {a: 1}
  - {a: 2, b: x}
words: [x, "y z"]
nothing: ~
base: &b {x: 1}
alias: *b
`

func parse(t *testing.T, text string) *Map {
	t.Helper()
	m, err := Parse("doc.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestReaders(t *testing.T) {
	t.Parallel()
	m := parse(t, doc)
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	if s, err := m.String("name"); err != nil || s != "scan" {
		t.Errorf("name: %q, %v", s, err)
	}
	if v, err := m.Float("rate"); err != nil || v != 20e6 {
		t.Errorf("rate: %g, %v", v, err)
	}
	if v, err := m.Int("count"); err != nil || v != 64 {
		t.Errorf("count: %d, %v", v, err)
	}
	if v, ok, err := m.OptInt("whole", 0); err != nil || !ok || v != 64 {
		t.Errorf("whole: %d, %v, %v", v, ok, err)
	}
	if v, ok, err := m.OptUint64("big", 0); err != nil || !ok || v != math.MaxUint64 {
		t.Errorf("big: %d, %v, %v", v, ok, err)
	}
	if v, ok, err := m.OptBool("flag", false); err != nil || !ok || !v {
		t.Errorf("flag: %v, %v, %v", v, ok, err)
	}
	probe, err := m.Map("probe")
	must(err)
	lin, err := probe.Map("linear")
	must(err)
	if lin.Path() != "probe.linear" || lin.File() != "doc.yaml" || lin.Line() != 9 {
		t.Errorf("nested map: path %q, file %q, line %d", lin.Path(), lin.File(), lin.Line())
	}
	if v, err := lin.Float("pitch_m"); err != nil || v != 0.3e-3 {
		t.Errorf("pitch: %g, %v", v, err)
	}
	must(lin.Done())
	must(probe.Done())
	if v, err := m.Floats("list", true); err != nil || !slices.Equal(v, []float64{1, 2.5, -3, 1000}) {
		t.Errorf("list: %v, %v", v, err)
	}
	if v, err := m.Points("points", true); err != nil || !slices.Equal(v, [][2]float64{{0, 1}, {2, 3}}) {
		t.Errorf("points: %v, %v", v, err)
	}
	if v, err := m.Pair("pair"); err != nil || v != [2]float64{4, 5} {
		t.Errorf("pair: %v, %v", v, err)
	}
	items, err := m.Maps("items", true)
	must(err)
	if len(items) != 2 || items[1].Path() != "items[1]" || !slices.Equal(items[1].Keys(), []string{"a", "b"}) {
		t.Errorf("items: %d, %q, %v", len(items), items[1].Path(), items[1].Keys())
	}
	if v, err := m.Strings("words", true); err != nil || !slices.Equal(v, []string{"x", "y z"}) {
		t.Errorf("words: %v, %v", v, err)
	}
	// A null value counts as absent.
	if v, ok, err := m.OptFloat("nothing", 7); err != nil || ok || v != 7 {
		t.Errorf("nothing: %g, %v, %v", v, ok, err)
	}
	// Aliases read like the value they name.
	if !m.Has("base") {
		t.Error("Has(base) is false")
	}
	m.OptMap("base")
	a, err := m.Map("alias")
	must(err)
	if v, err := a.Int("x"); err != nil || v != 1 {
		t.Errorf("alias: %d, %v", v, err)
	}
	must(m.Done())

	// Absent optional keys give their defaults and no error.
	e := parse(t, "a: 1\n")
	e.Int("a")
	if v, ok, err := e.OptFloat("f", 2); v != 2 || ok || err != nil {
		t.Error("OptFloat default")
	}
	if v, ok, err := e.OptInt("i", 3); v != 3 || ok || err != nil {
		t.Error("OptInt default")
	}
	if v, ok, err := e.OptUint64("u", 4); v != 4 || ok || err != nil {
		t.Error("OptUint64 default")
	}
	if v, ok, err := e.OptString("s", "d"); v != "d" || ok || err != nil {
		t.Error("OptString default")
	}
	if v, ok, err := e.OptBool("b", true); !v || ok || err != nil {
		t.Error("OptBool default")
	}
	if mm, err := e.OptMap("m"); mm != nil || err != nil {
		t.Error("OptMap default")
	}
	for name, f := range map[string]func() (int, error){
		"Floats":  func() (int, error) { v, err := e.Floats("x", false); return len(v), err },
		"Points":  func() (int, error) { v, err := e.Points("x", false); return len(v), err },
		"Maps":    func() (int, error) { v, err := e.Maps("x", false); return len(v), err },
		"Strings": func() (int, error) { v, err := e.Strings("x", false); return len(v), err },
	} {
		if n, err := f(); n != 0 || err != nil {
			t.Errorf("%s of an absent key: %d, %v", name, n, err)
		}
	}
	must(e.Done())
}

func TestErrorString(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		e    Error
		want string
	}{
		{Error{File: "a.yaml", Field: "probe.pitch_m", Line: 4, Msg: "must be positive"}, "a.yaml: probe.pitch_m: must be positive (line 4)"},
		{Error{File: "a.yaml", Msg: "empty document"}, "a.yaml: empty document"},
		{Error{File: "a.yaml", Field: "x", Msg: "bad"}, "a.yaml: x: bad"},
	} {
		if got := c.e.Error(); got != c.want {
			t.Errorf("got %q, want %q", got, c.want)
		}
	}
}

// TestErrors checks that every error carries the file, the dotted field
// path and the line.
func TestErrors(t *testing.T) {
	t.Parallel()
	type read func(m *Map) error
	first := func(f func(m *Map) error) read { return f }
	for _, c := range []struct {
		name  string
		text  string
		read  read
		field string
		line  int
		msg   string
	}{
		{"missing key", "a: 1\nb: 2\n", first(func(m *Map) error { _, err := m.Float("c"); return err }), "c", 1, "required key is missing"},
		{"missing nested key", "x: 1\nprobe:\n  linear:\n    count: 3\n", func(m *Map) error {
			p, _ := m.Map("probe")
			l, _ := p.Map("linear")
			_, err := l.Float("pitch_m")
			return err
		}, "probe.linear.pitch_m", 4, "required key is missing"},
		{"unknown nested key", "probe:\n  linear:\n    count: 3\n    pitch_mm: 1\n", func(m *Map) error {
			p, _ := m.Map("probe")
			l, _ := p.Map("linear")
			l.Int("count")
			return l.Done()
		}, "probe.linear.pitch_mm", 4, "unknown key"},
		{"text for a number", "a: 1\nrate: fast\n", func(m *Map) error { _, err := m.Float("rate"); return err }, "rate", 2, `expected a number, got "fast"`},
		{"list for a number", "rate: [1]\n", func(m *Map) error { _, err := m.Float("rate"); return err }, "rate", 1, "expected a number, got a list"},
		{"quoted number", "rate: '20'\n", func(m *Map) error { _, err := m.Float("rate"); return err }, "rate", 1, `expected a number, got "20"`},
		{"NaN", "\nrate: .nan\n", func(m *Map) error { _, err := m.Float("rate"); return err }, "rate", 2, "must be finite, got .nan"},
		{"Inf", "rate: -.Inf\n", func(m *Map) error { _, _, err := m.OptFloat("rate", 0); return err }, "rate", 1, "must be finite"},
		{"overflowing number", "rate: 1e999\n", func(m *Map) error { _, err := m.Float("rate"); return err }, "rate", 1, "expected a number"},
		{"fractional int", "n: 2.5\n", func(m *Map) error { _, err := m.Int("n"); return err }, "n", 1, "expected a whole number, got \"2.5\""},
		{"int out of range", "n: 3000000000\n", func(m *Map) error { _, err := m.Int("n"); return err }, "n", 1, "out of range"},
		{"int as text", "n: four\n", func(m *Map) error { _, _, err := m.OptInt("n", 0); return err }, "n", 1, "whole number"},
		{"negative uint64", "seed: -1\n", func(m *Map) error { _, _, err := m.OptUint64("seed", 0); return err }, "seed", 1, "must not be negative"},
		{"uint64 overflow", "seed: 18446744073709551616\n", func(m *Map) error { _, _, err := m.OptUint64("seed", 0); return err }, "seed", 1, "from 0 to 18446744073709551615"},
		{"fractional uint64", "seed: 1.5\n", func(m *Map) error { _, _, err := m.OptUint64("seed", 0); return err }, "seed", 1, "whole number"},
		{"text for a string list", "s: {a: 1}\n", func(m *Map) error { _, err := m.String("s"); return err }, "s", 1, "expected text, got a mapping"},
		{"optional text", "s: [a]\n", func(m *Map) error { _, _, err := m.OptString("s", ""); return err }, "s", 1, "expected text, got a list"},
		{"yes is not a bool", "flag: yes\n", func(m *Map) error { _, _, err := m.OptBool("flag", false); return err }, "flag", 1, "expected true or false"},
		{"scalar for a map", "probe: 3\n", func(m *Map) error { _, err := m.Map("probe"); return err }, "probe", 1, "expected a mapping"},
		{"list for an optional map", "probe: [3]\n", func(m *Map) error { _, err := m.OptMap("probe"); return err }, "probe", 1, "expected a mapping"},
		{"scalar for a list", "l: 3\n", func(m *Map) error { _, err := m.Floats("l", true); return err }, "l", 1, "expected a list"},
		{"missing list", "a: 1\n", func(m *Map) error { _, err := m.Points("l", true); return err }, "l", 1, "required key is missing"},
		{"bad list item", "l: [1, 2, x]\n", func(m *Map) error { _, err := m.Floats("l", true); return err }, "l[2]", 1, "expected a number"},
		{"short point", "p:\n  - [0, 1]\n  - [2]\n", func(m *Map) error { _, err := m.Points("p", true); return err }, "p[1]", 3, "expected a pair"},
		{"NaN in point", "p:\n  - [0, 1]\n  - [2, .nan]\n", func(m *Map) error { _, err := m.Points("p", true); return err }, "p[1][1]", 3, "finite"},
		{"pair as a mapping", "p: {x: 1}\n", func(m *Map) error { _, err := m.Pair("p"); return err }, "p", 1, "expected a pair [a, b], got a mapping"},
		{"missing pair", "a: 1\n", func(m *Map) error { _, err := m.Pair("p"); return err }, "p", 1, "missing"},
		{"map item not a map", "items:\n  - {a: 1}\n  - 3\n", func(m *Map) error { _, err := m.Maps("items", true); return err }, "items[1]", 3, "expected a mapping"},
		{"error inside a map item", "items:\n  - {a: 1}\n  - {a: 2, b: 3}\n", func(m *Map) error {
			it, _ := m.Maps("items", true)
			it[1].Int("a")
			return it[1].Done()
		}, "items[1].b", 3, "unknown key"},
		{"string item not text", "w: [a, [b]]\n", func(m *Map) error { _, err := m.Strings("w", true); return err }, "w[1]", 1, "expected text"},
		{"Errorf on a key", "a: 1\nb: 2\n", func(m *Map) error { return m.Errorf("b", "must be %d", 3) }, "b", 2, "must be 3"},
		{"Errorf on the map", "p:\n  a: 1\n", func(m *Map) error { p, _ := m.Map("p"); return p.Errorf("", "bad") }, "p", 2, "bad"},
		{"Errorf on an absent key", "p:\n  a: 1\n", func(m *Map) error { p, _ := m.Map("p"); return p.Errorf("z", "bad") }, "p.z", 2, "bad"},
	} {
		m := parse(t, c.text)
		err := c.read(m)
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%s: got %v, want an *Error", c.name, err)
			continue
		}
		if e.File != "doc.yaml" || e.Field != c.field || e.Line != c.line || !strings.Contains(e.Msg, c.msg) {
			t.Errorf("%s: got file %q field %q line %d msg %q; want field %q line %d msg %q", c.name, e.File, e.Field, e.Line, e.Msg, c.field, c.line, c.msg)
		}
	}
}

func TestParseErrors(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name  string
		text  string
		field string
		line  int
		msg   string
	}{
		{"malformed", "a: [1, 2\n", "", 0, "not valid YAML"},
		{"tab indent", "a:\n\tb: 1\n", "", 0, "not valid YAML"},
		{"empty", "", "", 0, "empty document"},
		{"comment only", "# nothing here\n", "", 0, "empty document"},
		{"scalar root", "just text\n", "", 1, "expected a mapping"},
		{"list root", "- a\n", "", 1, "expected a mapping"},
		{"duplicate key", "a: 1\nb: 2\na: 3\n", "a", 3, "key appears twice"},
		{"nested duplicate key", "p:\n  x: 1\n  x: 2\n", "p.x", 3, "key appears twice"},
		{"non-scalar key", "? [a, b]\n: 1\n", "", 1, "keys must be plain strings"},
		{"merge key", "base: &b {x: 1}\np:\n  <<: *b\n  y: 2\n", "p", 3, "merge keys"},
		{"two documents", "a: 1\n---\nb: 2\n", "", 3, "more than one YAML document"},
		{"second document malformed", "a: 1\n---\nb: [\n", "", 0, "not valid YAML"},
		{"too large", "a: " + strings.Repeat("x", maxDocBytes) + "\n", "", 0, "over the"},
	} {
		m, err := Parse("doc.yaml", []byte(c.text))
		if err == nil && m.Has("p") {
			// Nested mappings are checked when they are read.
			_, err = m.Map("p")
		}
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%s: got %v, want an *Error", c.name, err)
			continue
		}
		if e.File != "doc.yaml" || e.Field != c.field || (c.line != 0 && e.Line != c.line) || !strings.Contains(e.Msg, c.msg) {
			t.Errorf("%s: got %+v; want field %q line %d msg %q", c.name, e, c.field, c.line, c.msg)
		}
		// Malformed YAML keeps the parser's line in the message.
		if c.name == "malformed" && !strings.Contains(e.Msg, "line") {
			t.Errorf("%s: %q has no line", c.name, e.Msg)
		}
	}
}

// TestDoneReportsFirstUnread checks that Done names keys in document order
// and ignores keys that were read, even when their value was null.
func TestDoneReportsFirstUnread(t *testing.T) {
	t.Parallel()
	m := parse(t, "a: 1\nz: ~\nc: 3\nb: 2\n")
	m.Int("a")
	m.OptFloat("z", 0)
	err := m.Done()
	var e *Error
	if !errors.As(err, &e) || e.Field != "c" || e.Line != 3 {
		t.Errorf("got %v, want c unknown at line 3", err)
	}
	m.Int("c")
	m.Int("b")
	if err := m.Done(); err != nil {
		t.Error(err)
	}
}

// TestParserCrashers feeds inputs that made earlier versions of the YAML
// parser panic (reported in the parser's issue tracker, found by fuzzing):
// each must give an error or a map, never a panic.
func TestParserCrashers(t *testing.T) {
	t.Parallel()
	for _, s := range []string{
		"\"\\0\\\r\n", "  0: [\n] 0", "? ? \"\n\" 0", "    - {\n000}0", " \ufeff\n", "? \ufeff: \ufeff\n",
		"#\n - - QI\xd7", "a:\n.\n-\n", "! !00 \xf6", "#\n-\n-\n0", "{{},<<}", "0::", "! !!0 \xf7",
	} {
		func() {
			defer func() {
				if r := recover(); r != nil {
					t.Errorf("%q: panic: %v", s, r)
				}
			}()
			if m, err := Parse("doc.yaml", []byte(s)); err == nil {
				m.Done()
			} else if !strings.HasPrefix(err.Error(), "doc.yaml: ") {
				t.Errorf("%q: error %q does not name the file", s, err)
			}
		}()
	}
}

func TestFromNodeAndRawNodes(t *testing.T) {
	t.Parallel()
	root, err := Parse("s.yaml", []byte("name: x\nbase:\n  a: 1\n  b: {c: 2}\n"))
	if err != nil {
		t.Fatal(err)
	}
	if root.KeyLine("base") != 2 || root.KeyLine("nope") != 0 {
		t.Errorf("KeyLine: %d, %d", root.KeyLine("base"), root.KeyLine("nope"))
	}
	n := root.Node("base")
	if n == nil || root.Node("missing") != nil {
		t.Fatal("Node")
	}
	if _, err := root.String("name"); err != nil {
		t.Fatal(err)
	}
	if err := root.Done(); err != nil {
		t.Errorf("Node did not mark base read: %v", err)
	}
	m, err := FromNode("s.yaml", "base", n)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m.Float("a"); err != nil {
		t.Fatal(err)
	}
	// errors carry the prefix and the node's own lines
	if err := m.Done(); err == nil || err.Error() != "s.yaml: base.b: unknown key (line 4)" {
		t.Errorf("Done: %v", err)
	}
	if _, err := FromNode("s.yaml", "base", nil); err == nil {
		t.Error("nil node accepted")
	}
}
