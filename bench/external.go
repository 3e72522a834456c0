package bench

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"
)

// DefaultTimeout is an external estimator's time limit per case.
const DefaultTimeout = 120 * time.Second

// Limits of an external estimator's output.
const (
	maxStdout = 16 << 20 // bytes of stdout kept; more is a failure
	maxStderr = 2048     // bytes of the end of stderr quoted in a failure
	// waitDelay is how long a killed estimator's pipes are waited for.
	waitDelay = 2 * time.Second
)

// External is an estimator run as a separate program: the command, with the
// case's acquisition folder appended as its last argument, must print one
// JSON object on stdout (see docs/bench.md, "External estimators").
type External struct {
	Label   string
	Command string   // as given
	Args    []string // the program and its arguments
	Timeout time.Duration
}

// ParseExternal reads NAME=COMMAND. The command is split into words as a
// shell would split it (spaces, single and double quotes, backslashes) but
// without expansions, pipes or redirections.
func ParseExternal(spec string, timeout time.Duration) (*External, error) {
	name, cmd, ok := strings.Cut(spec, "=")
	if !ok {
		return nil, fmt.Errorf("--estimator %q: want NAME=COMMAND", spec)
	}
	name = strings.TrimSpace(name)
	if err := ValidName(name); err != nil {
		return nil, fmt.Errorf("--estimator %q: %v", spec, err)
	}
	args, err := SplitCommand(cmd)
	if err != nil {
		return nil, fmt.Errorf("--estimator %s: %v", name, err)
	}
	if !(timeout > 0) {
		return nil, fmt.Errorf("--estimator %s: the time limit must be positive", name)
	}
	return &External{Label: name, Command: strings.TrimSpace(cmd), Args: args, Timeout: timeout}, nil
}

// SplitCommand splits a command line into words: blanks separate words,
// 'single quotes' keep everything literally, "double quotes" keep
// everything but \" \\ \$ and \` escapes, and a backslash outside quotes
// escapes the next character.
func SplitCommand(s string) ([]string, error) {
	var words []string
	var cur strings.Builder
	inWord := false
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == ' ' || c == '\t' || c == '\n':
			if inWord {
				words = append(words, cur.String())
				cur.Reset()
				inWord = false
			}
		case c == '\'':
			inWord = true
			j := strings.IndexByte(s[i+1:], '\'')
			if j < 0 {
				return nil, errors.New("unterminated single quote in the command")
			}
			cur.WriteString(s[i+1 : i+1+j])
			i += j + 1
		case c == '"':
			inWord = true
			closed := false
			for i++; i < len(s); i++ {
				if s[i] == '"' {
					closed = true
					break
				}
				if s[i] == '\\' && i+1 < len(s) && strings.IndexByte("\"\\$`", s[i+1]) >= 0 {
					i++
				}
				cur.WriteByte(s[i])
			}
			if !closed {
				return nil, errors.New("unterminated double quote in the command")
			}
		case c == '\\':
			inWord = true
			if i+1 < len(s) {
				i++
				cur.WriteByte(s[i])
			}
		default:
			inWord = true
			cur.WriteByte(c)
		}
	}
	if inWord {
		words = append(words, cur.String())
	}
	if len(words) == 0 {
		return nil, errors.New("empty command")
	}
	return words, nil
}

// Name implements Estimator.
func (e *External) Name() string { return e.Label }

// NeedsTargets implements Estimator.
func (e *External) NeedsTargets() bool { return false }

// Estimate runs the command on the acquisition folder and reads its answer.
// A start failure, a non-zero exit, a signal, the time limit or an answer
// that breaks the protocol is an error; the cancellation of ctx kills the
// program and returns ctx's error.
func (e *External) Estimate(ctx context.Context, in *Input) (*Estimate, error) {
	dir, err := filepath.Abs(in.Dir)
	if err != nil {
		return nil, err
	}
	tctx, cancel := context.WithTimeout(ctx, e.Timeout)
	defer cancel()
	cmd := exec.CommandContext(tctx, e.Args[0], append(append([]string(nil), e.Args[1:]...), dir)...)
	stdout := &capBuffer{max: maxStdout}
	stderr := &tailBuffer{max: maxStderr}
	cmd.Stdout, cmd.Stderr = stdout, stderr
	killGroup(cmd)
	cmd.WaitDelay = waitDelay
	runErr := cmd.Run()
	if ctx.Err() != nil {
		return nil, ctx.Err()
	}
	if errors.Is(tctx.Err(), context.DeadlineExceeded) {
		return nil, fmt.Errorf("timed out after %s (the time limit)%s", e.Timeout, stderr.quote())
	}
	if runErr != nil {
		var ee *exec.ExitError
		switch {
		case errors.As(runErr, &ee) && ee.Exited():
			return nil, fmt.Errorf("exited with status %d%s", ee.ExitCode(), stderr.quote())
		case errors.As(runErr, &ee):
			return nil, fmt.Errorf("ended abnormally (%v)%s", ee, stderr.quote())
		default:
			return nil, fmt.Errorf("could not run %q: %v", e.Args[0], runErr)
		}
	}
	if stdout.over {
		return nil, fmt.Errorf("printed more than %d MiB on stdout", maxStdout>>20)
	}
	return ParseAnswer(stdout.Bytes(), in.Acq.NumElements())
}

// answerKeys are the keys an external estimator's answer may hold.
var answerKeys = []string{"speed_mps", "ci95_mps", "profile_s", "confidence", "notes"}

// ParseAnswer reads an external estimator's stdout: exactly one JSON object
// with speed_mps (a positive number) and/or profile_s (one number per
// element, s, each within 100 us), and optionally ci95_mps ([lo, hi] with
// lo <= hi, with speed_mps only), confidence (text) and notes (anything,
// ignored). A null value counts as absent; any other key is an error.
func ParseAnswer(out []byte, elements int) (*Estimate, error) {
	text := bytes.TrimSpace(out)
	if len(text) == 0 {
		return nil, errors.New("printed nothing on stdout; want one JSON object with speed_mps and/or profile_s")
	}
	dec := json.NewDecoder(bytes.NewReader(text))
	dec.UseNumber()
	var obj map[string]json.RawMessage
	if err := dec.Decode(&obj); err != nil {
		return nil, fmt.Errorf("stdout is not one JSON object (%v): %s", err, snippet(text))
	}
	if obj == nil {
		return nil, fmt.Errorf("stdout is not one JSON object: %s", snippet(text))
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, fmt.Errorf("stdout holds more than one JSON value: %s", snippet(text))
	}
	keys := make([]string, 0, len(obj))
	for k := range obj {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		known := false
		for _, a := range answerKeys {
			known = known || k == a
		}
		if !known {
			return nil, fmt.Errorf("answer: unknown key %q (known: %s)", k, strings.Join(answerKeys, ", "))
		}
	}
	present := func(k string) bool { v, ok := obj[k]; return ok && string(v) != "null" }
	est := noEstimate()
	if present("speed_mps") {
		v, err := number(obj["speed_mps"])
		if err != nil || !(v > 0) {
			return nil, fmt.Errorf("answer: speed_mps: want a positive number, got %s", snippet(obj["speed_mps"]))
		}
		est.SpeedMPS = v
	}
	if present("ci95_mps") {
		var pair []json.RawMessage
		if err := json.Unmarshal(obj["ci95_mps"], &pair); err != nil || len(pair) != 2 {
			return nil, fmt.Errorf("answer: ci95_mps: want [lo, hi], got %s", snippet(obj["ci95_mps"]))
		}
		lo, err1 := number(pair[0])
		hi, err2 := number(pair[1])
		if err1 != nil || err2 != nil || lo > hi {
			return nil, fmt.Errorf("answer: ci95_mps: want two finite numbers lo <= hi, got %s", snippet(obj["ci95_mps"]))
		}
		if math.IsNaN(est.SpeedMPS) {
			return nil, errors.New("answer: ci95_mps without speed_mps")
		}
		est.CI95MPS = [2]float64{lo, hi}
	}
	if present("profile_s") {
		var vs []json.RawMessage
		if err := json.Unmarshal(obj["profile_s"], &vs); err != nil {
			return nil, fmt.Errorf("answer: profile_s: want a list of numbers, got %s", snippet(obj["profile_s"]))
		}
		if len(vs) != elements {
			return nil, fmt.Errorf("answer: profile_s: %d values for %d elements", len(vs), elements)
		}
		est.ProfileS = make([]float64, len(vs))
		for i, n := range vs {
			v, err := number(n)
			if err != nil || math.Abs(v) > 1e-4 {
				return nil, fmt.Errorf("answer: profile_s[%d]: want a finite number of seconds within 100 us, got %s", i, bytes.TrimSpace(n))
			}
			est.ProfileS[i] = v
		}
	}
	if present("confidence") {
		if err := json.Unmarshal(obj["confidence"], &est.Confidence); err != nil {
			return nil, fmt.Errorf("answer: confidence: want text, got %s", snippet(obj["confidence"]))
		}
	}
	if math.IsNaN(est.SpeedMPS) && est.ProfileS == nil {
		return nil, errors.New("answer: neither speed_mps nor profile_s")
	}
	return est, nil
}

// number reads a JSON number (not a string holding one).
func number(raw json.RawMessage) (float64, error) {
	t := bytes.TrimSpace(raw)
	if len(t) == 0 || !(t[0] == '-' || t[0] >= '0' && t[0] <= '9') {
		return 0, errors.New("not a number")
	}
	v, err := strconv.ParseFloat(string(t), 64)
	if err != nil || !finite(v) {
		return 0, errors.New("not a finite number")
	}
	return v, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// snippet quotes the start of b for an error message.
func snippet(b []byte) string {
	const n = 80
	s := string(b)
	if len(s) > n {
		cut := n
		for cut > 0 && !utf8.RuneStart(s[cut]) {
			cut--
		}
		s = s[:cut] + "..."
	}
	return fmt.Sprintf("%q", s)
}

// capBuffer keeps up to max bytes and notes an overflow.
type capBuffer struct {
	bytes.Buffer
	max  int
	over bool
}

func (b *capBuffer) Write(p []byte) (int, error) {
	if room := b.max - b.Len(); len(p) > room {
		b.over = true
		if room > 0 {
			b.Buffer.Write(p[:room])
		}
		return len(p), nil
	}
	return b.Buffer.Write(p)
}

// tailBuffer keeps the last max bytes written.
type tailBuffer struct {
	buf []byte
	max int
}

func (b *tailBuffer) Write(p []byte) (int, error) {
	b.buf = append(b.buf, p...)
	if len(b.buf) > 2*b.max {
		b.buf = append([]byte(nil), b.buf[len(b.buf)-b.max:]...)
	}
	return len(p), nil
}

// quote returns ": stderr ends ..." with the end of stderr, or "".
func (b *tailBuffer) quote() string {
	s := b.buf
	if len(s) > b.max {
		s = s[len(s)-b.max:]
	}
	t := strings.TrimSpace(strings.ToValidUTF8(string(s), "?"))
	if t == "" {
		return ""
	}
	return "; stderr: " + t
}
