package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

func names(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range es {
		out = append(out, e.Name())
	}
	return out
}

func read(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func TestWrite(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	p := filepath.Join(dir, "out.txt")
	if err := WriteBytes(p, false, []byte("one")); err != nil {
		t.Fatal(err)
	}
	if got := read(t, p); got != "one" {
		t.Errorf("content %q", got)
	}
	if st, _ := os.Stat(p); st.Mode().Perm() != 0o644 {
		t.Errorf("mode %v, want 0644", st.Mode().Perm())
	}

	// Without force an existing file is kept.
	err := WriteBytes(p, false, []byte("two"))
	if !errors.Is(err, ErrExists) {
		t.Errorf("got %v, want ErrExists", err)
	}
	if got := read(t, p); got != "one" {
		t.Errorf("content changed to %q", got)
	}

	// With force it is replaced.
	if err := WriteBytes(p, true, []byte("three")); err != nil {
		t.Fatal(err)
	}
	if got := read(t, p); got != "three" {
		t.Errorf("content %q", got)
	}

	// A failing fill leaves the target and no temporary file.
	boom := errors.New("boom")
	err = Write(p, true, func(w io.Writer) error {
		w.Write([]byte("partial"))
		return boom
	})
	if !errors.Is(err, boom) {
		t.Errorf("got %v, want the fill error", err)
	}
	if got := read(t, p); got != "three" {
		t.Errorf("content changed to %q", got)
	}
	if got := names(t, dir); !slices.Equal(got, []string{"out.txt"}) {
		t.Errorf("folder holds %v", got)
	}

	// A missing folder is an error, not a panic.
	if err := WriteBytes(filepath.Join(dir, "no", "such", "x"), false, nil); err == nil {
		t.Error("write into a missing folder succeeded")
	}
}

func TestDir(t *testing.T) {
	t.Parallel()

	t.Run("commit", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		final := filepath.Join(parent, "sub", "scan")
		d, err := NewDir(final, false)
		if err != nil {
			t.Fatal(err)
		}
		if err := WriteBytes(d.Join("a.txt"), false, []byte("a")); err != nil {
			t.Fatal(err)
		}
		if _, err := os.Stat(final); !os.IsNotExist(err) {
			t.Error("the folder is visible before Commit")
		}
		if err := d.Commit(); err != nil {
			t.Fatal(err)
		}
		d.Abort() // safe after Commit
		if got := read(t, filepath.Join(final, "a.txt")); got != "a" {
			t.Errorf("content %q", got)
		}
		if got := names(t, filepath.Join(parent, "sub")); !slices.Equal(got, []string{"scan"}) {
			t.Errorf("parent holds %v", got)
		}
		if st, _ := os.Stat(final); st.Mode().Perm() != 0o755 {
			t.Errorf("mode %v", st.Mode().Perm())
		}
	})

	t.Run("abort leaves nothing", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		d, err := NewDir(filepath.Join(parent, "scan"), false)
		if err != nil {
			t.Fatal(err)
		}
		WriteBytes(d.Join("a.txt"), false, []byte("a"))
		d.Abort()
		if got := names(t, parent); len(got) != 0 {
			t.Errorf("parent holds %v after Abort", got)
		}
	})

	t.Run("existing folder", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		final := filepath.Join(parent, "scan")
		os.Mkdir(final, 0o755)
		WriteBytes(filepath.Join(final, "old.txt"), false, []byte("old"))
		if _, err := NewDir(final, false); !errors.Is(err, ErrExists) {
			t.Errorf("NewDir without force: %v, want ErrExists", err)
		}
		d, err := NewDir(final, true)
		if err != nil {
			t.Fatal(err)
		}
		WriteBytes(d.Join("new.txt"), false, []byte("new"))
		if got := names(t, final); !slices.Equal(got, []string{"old.txt"}) {
			t.Errorf("old folder changed before Commit: %v", got)
		}
		if err := d.Commit(); err != nil {
			t.Fatal(err)
		}
		if got := names(t, final); !slices.Equal(got, []string{"new.txt"}) {
			t.Errorf("folder holds %v after a forced Commit", got)
		}
		if got := names(t, parent); !slices.Equal(got, []string{"scan"}) {
			t.Errorf("parent holds %v", got)
		}
	})

	t.Run("folder appears before commit", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		final := filepath.Join(parent, "scan")
		d, err := NewDir(final, false)
		if err != nil {
			t.Fatal(err)
		}
		defer d.Abort()
		os.Mkdir(final, 0o755)
		WriteBytes(filepath.Join(final, "theirs.txt"), false, []byte("theirs"))
		if err := d.Commit(); !errors.Is(err, ErrExists) {
			t.Errorf("Commit over a new folder: %v, want ErrExists", err)
		}
		if got := read(t, filepath.Join(final, "theirs.txt")); got != "theirs" {
			t.Error("the other folder changed")
		}
	})

	t.Run("target is a file", func(t *testing.T) {
		t.Parallel()
		parent := t.TempDir()
		final := filepath.Join(parent, "scan")
		os.WriteFile(final, []byte("x"), 0o644)
		if _, err := NewDir(final, true); err == nil {
			t.Error("NewDir over a file succeeded")
		}
		if _, err := NewDir(filepath.Join(final, "sub"), false); err == nil {
			t.Error("NewDir under a file succeeded")
		}
		if got := names(t, parent); !slices.Equal(got, []string{"scan"}) {
			t.Errorf("parent holds %v", got)
		}
	})
}
