package bench

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

	"celerity/internal/strictyaml"
	"celerity/sim"
)

// SuiteFormatV1 identifies suite files.
const SuiteFormatV1 = "celerity.suite/1"

// GeneratorVersion is part of every case's definition, so that a change of
// the simulator's output can retire all cached cases at once: bump it when
// the same scenario and seed no longer give the same bytes.
const GeneratorVersion = "celerity.sim/1"

// Limits of a suite.
const (
	MaxCases        = 100000
	MaxAlternatives = 1000
	MaxSeeds        = 10000
	maxSuiteBytes   = 4 << 20
	maxSeed         = math.MaxInt32 // the scenario reader's limit
)

// Axis is one key of the grid: a dotted path into the base scenario and its
// alternatives.
type Axis struct {
	Key    string   `json:"key"`
	Labels []string `json:"labels"` // one per alternative, e.g. "1480" or "none"
	Line   int      `json:"-"`
	nodes  []*yaml.Node
	segs   []pathSeg
}

// Case is one scenario of a suite with one seed.
type Case struct {
	// ID is the first 16 hex digits of the SHA-256 of Definition; it names
	// the case's cache folder and its result record.
	ID string `json:"id"`
	// Index is the case's position in the suite (grid points in order, the
	// last key varying fastest, then seeds); GroupIndex the position of its
	// grid point.
	Index      int `json:"index"`
	GroupIndex int `json:"group_index"`
	// Group labels the grid point, e.g. "medium.speed_mps=1480, screen=none";
	// Values holds one label per axis.
	Group  string   `json:"group"`
	Values []string `json:"values"`
	Seed   uint64   `json:"seed"`
	// Definition is the canonical JSON of the case: the generator version and
	// the scenario with the variations and the seed applied, keys sorted,
	// numbers in shortest form, nulls and the description left out.
	Definition json.RawMessage `json:"definition"`
	Scenario   *sim.Scenario   `json:"-"`
}

// Suite is a parsed suite file.
type Suite struct {
	Name        string
	Description string
	File        string // the name errors use
	Axes        []Axis
	Seeds       []uint64
	// Builtins are the built-in estimators to run, in canonical order.
	Builtins []string
	Groups   []string // grid point labels, in order
	Cases    []Case
	// Source is the file's content and SHA256 its hash (hex).
	Source []byte
	SHA256 string

	ranks map[string]int // canonical rank of each case ID
}

// LoadSuite reads a suite file.
func LoadSuite(path string) (*Suite, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("suite %s: %w", path, err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxSuiteBytes+1))
	if err != nil {
		return nil, fmt.Errorf("suite %s: %w", path, err)
	}
	if len(data) > maxSuiteBytes {
		return nil, fmt.Errorf("%s: larger than %d MiB", path, maxSuiteBytes>>20)
	}
	name := strings.TrimSuffix(filepath.Base(path), filepath.Ext(path))
	if !nameRE.MatchString(name) {
		name = "suite"
	}
	return ParseSuite(filepath.Base(path), name, data)
}

// ParseSuite parses a suite; file names it in errors and defName is the
// suite's name when the file gives none.
func ParseSuite(file, defName string, data []byte) (*Suite, error) {
	root, err := strictyaml.Parse(file, data)
	if err != nil {
		return nil, err
	}
	format, err := root.String("format")
	if err != nil {
		return nil, err
	}
	if format != SuiteFormatV1 {
		return nil, root.Errorf("format", "unsupported format %q (this version reads %q)", format, SuiteFormatV1)
	}
	h := sha256.Sum256(data)
	s := &Suite{File: file, Source: append([]byte(nil), data...), SHA256: hex.EncodeToString(h[:])}
	if s.Name, _, err = root.OptString("name", defName); err != nil {
		return nil, err
	}
	if !nameRE.MatchString(s.Name) {
		return nil, root.Errorf("name", "want letters, digits, '-', '_' or '.', starting with a letter or digit, got %q", s.Name)
	}
	if s.Description, _, err = root.OptString("description", ""); err != nil {
		return nil, err
	}
	base := root.Node("base")
	if base == nil {
		return nil, &strictyaml.Error{File: file, Field: "base", Line: root.Line(), Msg: "required key is missing"}
	}
	if base.Kind != yaml.MappingNode {
		return nil, &strictyaml.Error{File: file, Field: "base", Line: base.Line, Msg: "expected a scenario (a mapping of keys to values; see docs/scenario.md)"}
	}
	for i := 0; i+1 < len(base.Content); i += 2 {
		switch k := base.Content[i]; k.Value {
		case "seed":
			return nil, &strictyaml.Error{File: file, Field: "base.seed", Line: k.Line, Msg: "seeds come from the suite's seeds key"}
		}
	}
	if gm, err := root.OptMap("grid"); err != nil {
		return nil, err
	} else if gm != nil {
		for _, key := range gm.Keys() {
			ax, err := parseAxis(gm, key)
			if err != nil {
				return nil, err
			}
			s.Axes = append(s.Axes, ax)
		}
	}
	seedLine := root.Line()
	if n := root.Node("seeds"); n != nil {
		seedLine = n.Line
		if s.Seeds, err = parseSeeds(file, n); err != nil {
			return nil, err
		}
	} else {
		s.Seeds = []uint64{1}
	}
	if root.Has("estimators") {
		names, err := root.Strings("estimators", true)
		if err != nil {
			return nil, err
		}
		seen := map[string]bool{}
		for i, n := range names {
			if !isBuiltin(n) {
				return nil, &strictyaml.Error{File: file, Field: fmt.Sprintf("estimators[%d]", i), Line: root.KeyLine("estimators"),
					Msg: fmt.Sprintf("unknown built-in estimator %q (have %s)", n, strings.Join(BuiltinNames(), ", "))}
			}
			seen[n] = true
		}
		for _, n := range BuiltinNames() {
			if seen[n] {
				s.Builtins = append(s.Builtins, n)
			}
		}
	} else {
		s.Builtins = BuiltinNames()
	}
	if err := root.Done(); err != nil {
		return nil, err
	}
	if err := s.expand(base, seedLine); err != nil {
		return nil, err
	}
	return s, nil
}

var nameRE = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$`)

// pathSeg is one step of a grid key: a mapping key, then list indices.
type pathSeg struct {
	key string
	idx []int
}

var segRE = regexp.MustCompile(`^([a-z_][a-z0-9_]*)((?:\[[0-9]+\])*)$`)

func parsePath(key string) ([]pathSeg, error) {
	var segs []pathSeg
	for _, part := range strings.Split(key, ".") {
		m := segRE.FindStringSubmatch(part)
		if m == nil {
			return nil, fmt.Errorf("want a dotted path of scenario keys such as medium.speed_mps or medium.layers[1].speed_mps, got %q", key)
		}
		sg := pathSeg{key: m[1]}
		for _, ix := range strings.Split(strings.Trim(m[2], "[]"), "][") {
			if ix == "" {
				continue
			}
			v, err := strconv.Atoi(ix)
			if err != nil || v > MaxAlternatives*1000 {
				return nil, fmt.Errorf("index %q out of range", ix)
			}
			sg.idx = append(sg.idx, v)
		}
		segs = append(segs, sg)
	}
	switch segs[0].key {
	case "format", "seed", "description":
		return nil, fmt.Errorf("%s cannot vary (seeds come from the suite's seeds key)", segs[0].key)
	}
	return segs, nil
}

func parseAxis(gm *strictyaml.Map, key string) (Axis, error) {
	field := "grid." + key
	line := gm.KeyLine(key)
	segs, err := parsePath(key)
	if err != nil {
		return Axis{}, &strictyaml.Error{File: gm.File(), Field: field, Line: line, Msg: err.Error()}
	}
	n := gm.Node(key)
	if n == nil || n.Kind != yaml.SequenceNode || len(n.Content) == 0 {
		return Axis{}, &strictyaml.Error{File: gm.File(), Field: field, Line: line, Msg: "expected a non-empty list of alternatives, e.g. [1480, 1540]"}
	}
	if len(n.Content) > MaxAlternatives {
		return Axis{}, &strictyaml.Error{File: gm.File(), Field: field, Line: line, Msg: fmt.Sprintf("%d alternatives, over the limit of %d", len(n.Content), MaxAlternatives)}
	}
	ax := Axis{Key: key, Line: line, segs: segs}
	seen := map[string]int{}
	for i, it := range n.Content {
		v, err := canon(it, false)
		if err != nil {
			return Axis{}, &strictyaml.Error{File: gm.File(), Field: fmt.Sprintf("%s[%d]", field, i), Line: it.Line, Msg: err.Error()}
		}
		lab := label(v)
		if j, dup := seen[lab]; dup {
			return Axis{}, &strictyaml.Error{File: gm.File(), Field: fmt.Sprintf("%s[%d]", field, i), Line: it.Line, Msg: fmt.Sprintf("the same alternative as [%d]", j)}
		}
		seen[lab] = i
		ax.Labels = append(ax.Labels, lab)
		ax.nodes = append(ax.nodes, it)
	}
	return ax, nil
}

func parseSeeds(file string, n *yaml.Node) ([]uint64, error) {
	check := func(v int, line int, field string) error {
		if v < 0 || v > maxSeed {
			return &strictyaml.Error{File: file, Field: field, Line: line, Msg: fmt.Sprintf("seeds are whole numbers from 0 to %d, got %d", maxSeed, v)}
		}
		return nil
	}
	var out []uint64
	switch n.Kind {
	case yaml.SequenceNode:
		if len(n.Content) == 0 || len(n.Content) > MaxSeeds {
			return nil, &strictyaml.Error{File: file, Field: "seeds", Line: n.Line, Msg: fmt.Sprintf("list 1 to %d seeds", MaxSeeds)}
		}
		seen := map[uint64]bool{}
		for i, it := range n.Content {
			field := fmt.Sprintf("seeds[%d]", i)
			var v int
			if it.Kind != yaml.ScalarNode || it.Tag != "!!int" || it.Decode(&v) != nil {
				return nil, &strictyaml.Error{File: file, Field: field, Line: it.Line, Msg: fmt.Sprintf("expected a whole number, got %q", it.Value)}
			}
			if err := check(v, it.Line, field); err != nil {
				return nil, err
			}
			if seen[uint64(v)] {
				return nil, &strictyaml.Error{File: file, Field: field, Line: it.Line, Msg: fmt.Sprintf("seed %d appears twice", v)}
			}
			seen[uint64(v)] = true
			out = append(out, uint64(v))
		}
	case yaml.MappingNode:
		m, err := strictyaml.FromNode(file, "seeds", n)
		if err != nil {
			return nil, err
		}
		count, err := m.Int("count")
		if err != nil {
			return nil, err
		}
		if count < 1 || count > MaxSeeds {
			return nil, m.Errorf("count", "must be between 1 and %d, got %d", MaxSeeds, count)
		}
		first, _, err := m.OptInt("first", 1)
		if err != nil {
			return nil, err
		}
		if err := check(first, n.Line, "seeds.first"); err != nil {
			return nil, err
		}
		if err := check(first+count-1, n.Line, "seeds.count"); err != nil {
			return nil, err
		}
		if err := m.Done(); err != nil {
			return nil, err
		}
		for i := range count {
			out = append(out, uint64(first+i))
		}
	default:
		return nil, &strictyaml.Error{File: file, Field: "seeds", Line: n.Line, Msg: "expected a list of whole numbers or {count: N, first: S}"}
	}
	return out, nil
}

// expand enumerates the grid points and seeds into cases.
func (s *Suite) expand(base *yaml.Node, seedLine int) error {
	nGroups := 1
	for _, ax := range s.Axes {
		nGroups *= len(ax.Labels)
		if nGroups*len(s.Seeds) > MaxCases {
			return &strictyaml.Error{File: s.File, Field: "grid", Line: ax.Line, Msg: fmt.Sprintf("more than %d cases", MaxCases)}
		}
	}
	if nGroups*len(s.Seeds) > MaxCases {
		return &strictyaml.Error{File: s.File, Field: "seeds", Line: seedLine, Msg: fmt.Sprintf("more than %d cases", MaxCases)}
	}
	pick := make([]int, len(s.Axes))
	ids := map[string]string{}
	for g := range nGroups {
		// odometer: the last axis varies fastest
		rem := g
		for a := len(s.Axes) - 1; a >= 0; a-- {
			pick[a] = rem % len(s.Axes[a].Labels)
			rem /= len(s.Axes[a].Labels)
		}
		var parts, values []string
		for a, ax := range s.Axes {
			parts = append(parts, ax.Key+"="+ax.Labels[pick[a]])
			values = append(values, ax.Labels[pick[a]])
		}
		group := "base"
		if len(parts) > 0 {
			group = strings.Join(parts, ", ")
		}
		s.Groups = append(s.Groups, group)
		for _, seed := range s.Seeds {
			n := copyNode(base)
			setKey(n, "format", &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: sim.ScenarioFormatV1, Line: base.Line}, false)
			setKey(n, "seed", &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: strconv.FormatUint(seed, 10), Line: seedLine}, true)
			for a, ax := range s.Axes {
				if err := setPath(n, ax.segs, copyNode(ax.nodes[pick[a]])); err != nil {
					return &strictyaml.Error{File: s.File, Field: "grid." + ax.Key, Line: ax.Line, Msg: err.Error()}
				}
			}
			sc, err := sim.ParseScenarioNode(s.File, "base", n)
			if err != nil {
				return fmt.Errorf("%w (case %s, seed %d)", err, group, seed)
			}
			cv, err := canon(n, true)
			if err != nil {
				return fmt.Errorf("%s: base: %v (case %s, seed %d)", s.File, err, group, seed)
			}
			def, err := json.Marshal(map[string]any{"generator": GeneratorVersion, "scenario": cv})
			if err != nil {
				return err
			}
			h := sha256.Sum256(def)
			c := Case{ID: hex.EncodeToString(h[:8]), Index: len(s.Cases), GroupIndex: g, Group: group, Values: values, Seed: seed, Definition: def, Scenario: sc}
			if other, dup := ids[c.ID]; dup {
				return fmt.Errorf("%s: case %s, seed %d is the same scenario as case %s: every case must differ", s.File, group, seed, other)
			}
			ids[c.ID] = fmt.Sprintf("%s, seed %d", group, seed)
			s.Cases = append(s.Cases, c)
		}
	}
	return nil
}

// copyNode deep-copies n, resolving aliases.
func copyNode(n *yaml.Node) *yaml.Node {
	for n != nil && n.Kind == yaml.AliasNode && n.Alias != nil {
		n = n.Alias
	}
	if n == nil {
		return nil
	}
	c := *n
	c.Anchor = ""
	c.Content = nil
	for _, k := range n.Content {
		c.Content = append(c.Content, copyNode(k))
	}
	return &c
}

// setKey sets key in mapping m to v: a missing key is appended, an existing
// one replaced only with replace.
func setKey(m *yaml.Node, key string, v *yaml.Node, replace bool) {
	for i := 0; i+1 < len(m.Content); i += 2 {
		if m.Content[i].Value == key {
			if replace {
				m.Content[i+1] = v
			}
			return
		}
	}
	k := &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: key, Line: v.Line}
	m.Content = append(m.Content, k, v)
}

// setPath replaces the value at segs in the mapping root by v, creating
// missing mappings on the way (not missing list items).
func setPath(root *yaml.Node, segs []pathSeg, v *yaml.Node) error {
	cur := root
	done := ""
	for si, sg := range segs {
		if cur.Kind != yaml.MappingNode {
			return fmt.Errorf("base.%s is not a mapping", done)
		}
		if done != "" {
			done += "."
		}
		done += sg.key
		last := si == len(segs)-1
		var child *yaml.Node
		ci := -1
		for i := 0; i+1 < len(cur.Content); i += 2 {
			if cur.Content[i].Value == sg.key {
				ci = i + 1
				child = cur.Content[i+1]
				for child.Kind == yaml.AliasNode && child.Alias != nil {
					child = child.Alias
				}
				break
			}
		}
		if len(sg.idx) == 0 && last {
			if ci >= 0 {
				cur.Content[ci] = v
			} else {
				cur.Content = append(cur.Content, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: sg.key, Line: v.Line}, v)
			}
			return nil
		}
		if child == nil || (child.Kind == yaml.ScalarNode && child.Tag == "!!null") {
			if len(sg.idx) > 0 {
				return fmt.Errorf("base has no list %s", done)
			}
			child = &yaml.Node{Kind: yaml.MappingNode, Tag: "!!map", Line: v.Line}
			if ci >= 0 {
				cur.Content[ci] = child
			} else {
				cur.Content = append(cur.Content, &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: sg.key, Line: v.Line}, child)
			}
		}
		for k, ix := range sg.idx {
			if child.Kind != yaml.SequenceNode || ix >= len(child.Content) {
				return fmt.Errorf("base has no item %s[%d]", done, ix)
			}
			done += fmt.Sprintf("[%d]", ix)
			if last && k == len(sg.idx)-1 {
				child.Content[ix] = v
				return nil
			}
			child = child.Content[ix]
			for child.Kind == yaml.AliasNode && child.Alias != nil {
				child = child.Alias
			}
		}
		cur = child
	}
	return nil
}

// canon turns a node into a canonical value for hashing and labels: maps
// (keys sorted when marshalled), lists, strings, booleans and numbers in
// shortest form (json.Number); null values and, at the root, the
// description are left out.
func canon(n *yaml.Node, root bool) (any, error) {
	for n.Kind == yaml.AliasNode && n.Alias != nil {
		n = n.Alias
	}
	switch n.Kind {
	case yaml.MappingNode:
		m := map[string]any{}
		for i := 0; i+1 < len(n.Content); i += 2 {
			k := n.Content[i].Value
			if root && k == "description" {
				continue
			}
			v, err := canon(n.Content[i+1], false)
			if err != nil {
				return nil, err
			}
			if v == nil {
				continue
			}
			m[k] = v
		}
		return m, nil
	case yaml.SequenceNode:
		out := []any{}
		for _, it := range n.Content {
			v, err := canon(it, false)
			if err != nil {
				return nil, err
			}
			out = append(out, v)
		}
		return out, nil
	case yaml.ScalarNode:
		switch n.Tag {
		case "!!null":
			return nil, nil
		case "!!bool":
			var b bool
			if err := n.Decode(&b); err != nil {
				return nil, err
			}
			return b, nil
		case "!!int", "!!float":
			v, err := strconv.ParseFloat(strings.ReplaceAll(n.Value, "_", ""), 64)
			if err != nil {
				var f float64
				if n.Decode(&f) != nil {
					return n.Value, nil
				}
				v = f
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return n.Value, nil
			}
			if v == 0 {
				v = 0 // no negative zero
			}
			return json.Number(strconv.FormatFloat(v, 'g', -1, 64)), nil
		}
		return n.Value, nil
	}
	return nil, fmt.Errorf("unsupported YAML node")
}

// label renders a canonical value compactly: scalars as they are, null as
// "none", mappings and lists in YAML flow style with sorted keys.
func label(v any) string {
	switch x := v.(type) {
	case nil:
		return "none"
	case json.Number:
		return string(x)
	case bool:
		return strconv.FormatBool(x)
	case string:
		if x == "" || strings.ContainsAny(x, ",:{}[]\"'#&*!|>%@`=") || strings.TrimSpace(x) != x {
			return strconv.Quote(x)
		}
		return x
	case []any:
		parts := make([]string, len(x))
		for i, e := range x {
			parts[i] = label(e)
		}
		return "[" + strings.Join(parts, ", ") + "]"
	case map[string]any:
		keys := make([]string, 0, len(x))
		for k := range x {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		parts := make([]string, len(keys))
		for i, k := range keys {
			parts[i] = k + ": " + label(x[k])
		}
		return "{" + strings.Join(parts, ", ") + "}"
	}
	return fmt.Sprint(v)
}
