package cohort

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"celerity/acq"
)

// Member is one acquisition of a cohort.
type Member struct {
	// ID names the acquisition in the table and its result record: the
	// folder's path relative to its search root (with '/' between folder
	// names), or the manifest's id as written.
	ID string `json:"id"`
	// Dir is the acquisition folder, absolute.
	Dir string `json:"dir"`
	// Meta holds the values of the metadata columns, in List.Columns order.
	Meta []string `json:"meta,omitempty"`
	// Key fingerprints the acquisition's files and the run's settings (see
	// Fingerprint); Run sets it. A stored result with another key is redone.
	Key string `json:"key,omitempty"`
}

// List is the acquisitions of a cohort.
type List struct {
	// Source says where the list came from: the search roots, or the
	// manifest file.
	Source string `json:"source"`
	// Columns are the metadata columns of a manifest (none for folders).
	Columns []string `json:"columns"`
	// Members are sorted by ID.
	Members []Member `json:"members"`
}

// hasManifest reports whether dir holds an acquisition manifest.
func hasManifest(dir string) bool {
	st, err := os.Stat(filepath.Join(dir, acq.ManifestName))
	return err == nil && st.Mode().IsRegular()
}

// Find walks the search roots and lists every folder that holds
// acquisition.yaml. A folder's ID is its path relative to its root (a root
// that is itself an acquisition folder is named by its last element).
// Hidden folders (names starting with '.') and the folders in skip (e.g.
// the run's output folder) are not entered, nor are acquisition folders
// themselves (an acquisition does not hold others). Symbolic links to
// folders are not followed. Two acquisitions with the same ID under
// different roots, or no acquisition at all, are errors.
func Find(roots []string, skip ...string) (*List, error) {
	if len(roots) == 0 {
		return nil, errors.New("no folders to search")
	}
	skipped := map[string]bool{}
	for _, s := range skip {
		if a, err := filepath.Abs(s); err == nil {
			skipped[a] = true
		}
	}
	l := &List{Source: strings.Join(roots, ", "), Columns: []string{}}
	where := map[string]string{}
	add := func(id, dir string) error {
		if prev, ok := where[id]; ok {
			return fmt.Errorf("two acquisitions have the id %q: %s and %s; search their parent folder instead, or list them in a manifest", id, prev, dir)
		}
		where[id] = dir
		l.Members = append(l.Members, Member{ID: id, Dir: dir})
		return nil
	}
	for _, root := range roots {
		abs, err := filepath.Abs(root)
		if err != nil {
			return nil, err
		}
		st, err := os.Stat(abs)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", root, err)
		}
		if !st.IsDir() {
			return nil, fmt.Errorf("%s: not a folder", root)
		}
		if skipped[abs] {
			continue
		}
		if hasManifest(abs) {
			if err := add(filepath.Base(abs), abs); err != nil {
				return nil, err
			}
			continue
		}
		err = filepath.WalkDir(abs, func(path string, d fs.DirEntry, err error) error {
			if err != nil {
				return fmt.Errorf("searching %s: %w", root, err)
			}
			if !d.IsDir() || path == abs {
				return nil
			}
			if strings.HasPrefix(d.Name(), ".") || skipped[path] {
				return filepath.SkipDir
			}
			if !hasManifest(path) {
				return nil
			}
			rel, err := filepath.Rel(abs, path)
			if err != nil {
				return err
			}
			if err := add(filepath.ToSlash(rel), path); err != nil {
				return err
			}
			return filepath.SkipDir
		})
		if err != nil {
			return nil, err
		}
	}
	if len(l.Members) == 0 {
		return nil, fmt.Errorf("no acquisition folders (folders holding %s) under %s", acq.ManifestName, l.Source)
	}
	sort.Slice(l.Members, func(a, b int) bool { return l.Members[a].ID < l.Members[b].ID })
	return l, nil
}

// maxManifestBytes bounds a manifest file.
const maxManifestBytes = 64 << 20

// ReadManifest reads a cohort manifest: a CSV file whose header names an
// id column and any number of metadata columns (group, temperature_c, ...).
// Each row's id is its acquisition folder, relative to the manifest's folder
// or absolute. Fields are trimmed; blank lines and lines starting with '#'
// are skipped; a UTF-8 byte order mark is ignored. Errors name the file and
// the line: no id column, a column without a name or named twice or named
// like a result column, a row with too few or too many fields, an empty or
// repeated id, a folder that does not exist or holds no acquisition.yaml.
func ReadManifest(path string) (*List, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, maxManifestBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(b) > maxManifestBytes {
		return nil, fmt.Errorf("%s: larger than %d MiB", path, maxManifestBytes>>20)
	}
	b = bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))
	base, err := filepath.Abs(filepath.Dir(path))
	if err != nil {
		return nil, err
	}
	r := csv.NewReader(bytes.NewReader(b))
	r.Comment = '#'
	r.TrimLeadingSpace = true
	head, err := r.Read()
	if errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("%s: empty: want a header line naming an id column and any metadata columns", path)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	hline, _ := r.FieldPos(0)
	idCol := -1
	l := &List{Source: path, Columns: []string{}}
	var metaCols []int
	seen := map[string]bool{}
	for i, h := range head {
		h = strings.TrimSpace(h)
		switch {
		case h == "":
			return nil, fmt.Errorf("%s: line %d: column %d has no name", path, hline, i+1)
		case seen[h]:
			return nil, fmt.Errorf("%s: line %d: two columns are named %q", path, hline, h)
		case h == "id":
			idCol = i
		case reservedColumn(h):
			return nil, fmt.Errorf("%s: line %d: column %q: the table has a result column of that name; rename the metadata column", path, hline, h)
		default:
			l.Columns = append(l.Columns, h)
			metaCols = append(metaCols, i)
		}
		seen[h] = true
	}
	if idCol < 0 {
		return nil, fmt.Errorf("%s: line %d: no id column (the header names %s); the id column holds each acquisition's folder", path, hline, quoteList(head))
	}
	lineOf := map[string]int{}
	dirOf := map[string]string{}
	for {
		rec, err := r.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) && errors.Is(pe.Err, csv.ErrFieldCount) {
				return nil, fmt.Errorf("%s: line %d: %d fields, the header has %d", path, pe.StartLine, len(rec), len(head))
			}
			return nil, fmt.Errorf("%s: %v", path, err)
		}
		line, _ := r.FieldPos(0)
		id := strings.TrimSpace(rec[idCol])
		if id == "" {
			return nil, fmt.Errorf("%s: line %d: id: empty", path, line)
		}
		if prev, ok := lineOf[id]; ok {
			return nil, fmt.Errorf("%s: line %d: id %q: already on line %d", path, line, id, prev)
		}
		lineOf[id] = line
		dir := filepath.FromSlash(id)
		if !filepath.IsAbs(dir) {
			dir = filepath.Join(base, dir)
		}
		dir = filepath.Clean(dir)
		st, err := os.Stat(dir)
		switch {
		case errors.Is(err, os.ErrNotExist):
			return nil, fmt.Errorf("%s: line %d: id %q: folder %s not found", path, line, id, dir)
		case err != nil:
			return nil, fmt.Errorf("%s: line %d: id %q: %v", path, line, id, err)
		case !st.IsDir():
			return nil, fmt.Errorf("%s: line %d: id %q: %s is not a folder", path, line, id, dir)
		case !hasManifest(dir):
			return nil, fmt.Errorf("%s: line %d: id %q: folder %s holds no %s", path, line, id, dir, acq.ManifestName)
		}
		if prev, ok := dirOf[dir]; ok {
			return nil, fmt.Errorf("%s: line %d: id %q names the same folder as id %q", path, line, id, prev)
		}
		dirOf[dir] = id
		m := Member{ID: id, Dir: dir, Meta: make([]string, len(metaCols))}
		for k, c := range metaCols {
			m.Meta[k] = strings.TrimSpace(rec[c])
		}
		l.Members = append(l.Members, m)
	}
	if len(l.Members) == 0 {
		return nil, fmt.Errorf("%s: no acquisitions: the header is not followed by any row", path)
	}
	sort.Slice(l.Members, func(a, b int) bool { return l.Members[a].ID < l.Members[b].ID })
	return l, nil
}

func quoteList(v []string) string {
	q := make([]string, len(v))
	for i, s := range v {
		q[i] = fmt.Sprintf("%q", strings.TrimSpace(s))
	}
	return strings.Join(q, ", ")
}
