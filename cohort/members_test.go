package cohort

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// mkAcq makes a folder holding an (empty) acquisition.yaml: enough for the
// search and the manifest's checks, which do not read it.
func mkAcq(t *testing.T, parts ...string) string {
	t.Helper()
	dir := filepath.Join(parts...)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "acquisition.yaml"), nil, 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

func ids(l *List) []string {
	var out []string
	for _, m := range l.Members {
		out = append(out, m.ID)
	}
	return out
}

func TestFind(t *testing.T) {
	t.Parallel()
	root := t.TempDir()
	mkAcq(t, root, "b", "s2")
	mkAcq(t, root, "a", "s1")
	mkAcq(t, root, "a", "s1", "nested") // inside an acquisition: not searched
	mkAcq(t, root, ".hidden", "s3")     // hidden: skipped
	mkAcq(t, root, "out", "x")          // the output folder: skipped
	mkAcq(t, root, "c", "deep", "er", "s4")
	os.MkdirAll(filepath.Join(root, "empty"), 0o755)
	l, err := Find([]string{root}, filepath.Join(root, "out"))
	if err != nil {
		t.Fatal(err)
	}
	if got, want := ids(l), []string{"a/s1", "b/s2", "c/deep/er/s4"}; !slices.Equal(got, want) {
		t.Errorf("ids %v, want %v", got, want)
	}
	if len(l.Columns) != 0 || l.Members[0].Dir != filepath.Join(root, "a", "s1") {
		t.Errorf("columns %v, dir %s", l.Columns, l.Members[0].Dir)
	}
	// a root that is an acquisition is named by its last element; several roots
	single := mkAcq(t, t.TempDir(), "lone")
	l, err = Find([]string{single, filepath.Join(root, "b")})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := ids(l), []string{"lone", "s2"}; !slices.Equal(got, want) {
		t.Errorf("ids %v, want %v", got, want)
	}
	// the same id under two roots
	other := t.TempDir()
	mkAcq(t, other, "s2")
	if _, err := Find([]string{filepath.Join(root, "b"), other}); err == nil || !strings.Contains(err.Error(), `two acquisitions have the id "s2"`) {
		t.Errorf("duplicate ids: %v", err)
	}
	// nothing to find
	if _, err := Find([]string{filepath.Join(root, "empty")}); err == nil || !strings.Contains(err.Error(), "no acquisition folders") {
		t.Errorf("empty root: %v", err)
	}
	if _, err := Find([]string{filepath.Join(root, "missing")}); err == nil || !strings.Contains(err.Error(), "missing") {
		t.Errorf("missing root: %v", err)
	}
}

func writeManifest(t *testing.T, dir, text string) string {
	t.Helper()
	p := filepath.Join(dir, "cohort.csv")
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestReadManifest(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	mkAcq(t, dir, "data", "s1")
	mkAcq(t, dir, "data", "s2")
	abs := mkAcq(t, t.TempDir(), "elsewhere")
	text := "\xef\xbb\xbf# a comment line\nid, group ,temperature_c\ndata/s2,B,23.5\n\ndata/s1,A,21\n" + abs + ",A,\n"
	l, err := ReadManifest(writeManifest(t, dir, text))
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(l.Columns, []string{"group", "temperature_c"}) {
		t.Errorf("columns %v", l.Columns)
	}
	want := []Member{
		{ID: abs, Dir: abs, Meta: []string{"A", ""}},
		{ID: "data/s1", Dir: filepath.Join(dir, "data", "s1"), Meta: []string{"A", "21"}},
		{ID: "data/s2", Dir: filepath.Join(dir, "data", "s2"), Meta: []string{"B", "23.5"}},
	}
	if len(l.Members) != len(want) {
		t.Fatalf("members %+v", l.Members)
	}
	for i, w := range want {
		if m := l.Members[i]; m.ID != w.ID || m.Dir != w.Dir || !slices.Equal(m.Meta, w.Meta) {
			t.Errorf("member %d: %+v, want %+v", i, m, w)
		}
	}
}

// TestBadManifests: every problem names the file and the line.
func TestBadManifests(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	mkAcq(t, dir, "s1")
	os.MkdirAll(filepath.Join(dir, "notacq"), 0o755)
	os.WriteFile(filepath.Join(dir, "file"), nil, 0o644)
	for _, c := range []struct {
		name, text, want string
	}{
		{"no id column", "folder,group\ns1,A\n", `cohort.csv: line 1: no id column (the header names "folder", "group")`},
		{"missing folder", "id,group\ns1,A\nmissing,B\n", "cohort.csv: line 3: id \"missing\": folder " + filepath.Join(dir, "missing") + " not found"},
		{"no acquisition.yaml", "id\nnotacq\n", "cohort.csv: line 2: id \"notacq\": folder " + filepath.Join(dir, "notacq") + " holds no acquisition.yaml"},
		{"not a folder", "id\nfile\n", "cohort.csv: line 2: id \"file\": " + filepath.Join(dir, "file") + " is not a folder"},
		{"duplicate id", "id\ns1\n# comment\ns1\n", `cohort.csv: line 4: id "s1": already on line 2`},
		{"same folder twice", "id\ns1\n./s1\n", `cohort.csv: line 3: id "./s1" names the same folder as id "s1"`},
		{"empty id", "id,group\n,A\n", "cohort.csv: line 2: id: empty"},
		{"too few fields", "id,group\ns1\n", "cohort.csv: line 2: 1 fields, the header has 2"},
		{"too many fields", "id,group\ns1,A,x\n", "cohort.csv: line 2: 3 fields, the header has 2"},
		{"reserved column", "id,speed_mps\ns1,1500\n", `cohort.csv: line 1: column "speed_mps": the table has a result column`},
		{"unnamed column", "id,,group\ns1,x,A\n", "cohort.csv: line 1: column 2 has no name"},
		{"column twice", "id,group,group\ns1,A,B\n", `cohort.csv: line 1: two columns are named "group"`},
		{"no rows", "id,group\n", "cohort.csv: no acquisitions"},
		{"empty file", "", "cohort.csv: empty"},
		{"bad quoting", "id,group\ns1,\"A\n", "cohort.csv: "},
	} {
		p := writeManifest(t, dir, c.text)
		_, err := ReadManifest(p)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want %q", c.name, err, c.want)
		}
	}
}
