//go:build unix

package main

import (
	"bytes"
	"errors"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

var binaries struct {
	once      sync.Once
	dir       string
	bin, gen  string
	buildErrs []byte
	err       error
}

// buildCulprit builds the culprit binary (and the generator) once per
// test run and returns the binary's path.
func buildCulprit(t *testing.T) string {
	t.Helper()
	binaries.once.Do(func() {
		binaries.dir, binaries.err = os.MkdirTemp("", "culprit-bin-")
		if binaries.err != nil {
			return
		}
		binaries.bin = filepath.Join(binaries.dir, "culprit")
		binaries.gen = filepath.Join(binaries.dir, "culprit-gen")
		cmd := exec.Command("go", "build", "-o", binaries.dir, ".", "../culprit-gen")
		binaries.buildErrs, binaries.err = cmd.CombinedOutput()
	})
	if binaries.err != nil {
		t.Fatalf("go build: %v: %s", binaries.err, binaries.buildErrs)
	}
	return binaries.bin
}

func TestMain(m *testing.M) {
	code := m.Run()
	if binaries.dir != "" {
		os.RemoveAll(binaries.dir)
	}
	os.Exit(code)
}

// limitedCommand runs bin with args under a descriptor limit of n, set by
// the shell's ulimit (soft and hard: Go raises a soft limit to the hard
// one at start-up).
func limitedCommand(bin string, n int, args ...string) *exec.Cmd {
	return exec.Command("sh", append([]string{"-c", `ulimit -n "$0" && exec "$@"`, strconv.Itoa(n), bin}, args...)...)
}

// TestSignalsAtEveryPhase is issue 13 item 9: SIGINT and SIGTERM, sent by
// the kernel to the real binary, while it reads (blocked on a FIFO and on
// standard input, in the middle of a large generated input), analyses,
// renders and writes. Each must stop the run with the shells' status for
// a death by signal, 128 + the signal's number (POSIX.1-2017, Shell
// Command Language, 2.8.2 "Exit Status for Commands"; 130 and 143 on
// Linux, signal(7)), say one line on stderr, and leave neither the output
// nor a temporary file.
func TestSignalsAtEveryPhase(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary and generates a large input")
	}
	bin := buildCulprit(t)
	work := t.TempDir()
	big := filepath.Join(work, "big.jsonl")
	if out, err := exec.Command(binaries.gen, "spans", "-out", big, "-spans", "40000").CombinedOutput(); err != nil {
		t.Fatalf("culprit-gen: %v: %s", err, out)
	}
	bigData, err := os.ReadFile(big)
	if err != nil {
		t.Fatal(err)
	}
	signals := []struct {
		sig  syscall.Signal
		code int
		line string
	}{
		{syscall.SIGINT, 130, "culprit: interrupted (SIGINT)"},
		{syscall.SIGTERM, 143, "culprit: terminated (SIGTERM)"},
	}
	// Phases of rank; explain and graph pause in their own analysis.
	phases := []string{"fifo", "stdin", "analysis", "rendering", "writing", "explain:analysis", "graph:analysis"}
	for _, s := range signals {
		for _, phase := range phases {
			t.Run(s.sig.String()+"/"+phase, func(t *testing.T) {
				command := []string{"rank"}
				if c, p, ok := strings.Cut(phase, ":"); ok {
					phase = p
					command = []string{c}
					if c == "explain" {
						command = append(command, "SELECT")
					}
				}
				outDir := t.TempDir()
				out := filepath.Join(outDir, "report.json")
				input := big
				var stdin io.WriteCloser
				if phase == "fifo" {
					input = filepath.Join(outDir, "in.fifo")
					if err := syscall.Mkfifo(input, 0o600); err != nil {
						t.Skip("no FIFOs:", err)
					}
				}
				if phase == "stdin" {
					input = "-"
				}
				args := append(command, input, "-o", out)
				if command[0] == "rank" {
					args = append(args, "--format", "json", "--save", filepath.Join(outDir, "s.json"))
				}
				cmd := exec.Command(bin, args...)
				cmd.Env = append(os.Environ(), pauseEnv+"="+phase)
				var errb syncBuffer
				cmd.Stderr = &errb
				if phase == "stdin" {
					if stdin, err = cmd.StdinPipe(); err != nil {
						t.Fatal(err)
					}
				}
				if err := cmd.Start(); err != nil {
					t.Fatal(err)
				}
				switch phase {
				case "fifo", "stdin":
					// Feed half of the large input, then hold the stream
					// open: culprit is blocked reading.
					var w io.WriteCloser = stdin
					if phase == "fifo" {
						f, err := os.OpenFile(input, os.O_WRONLY, 0)
						if err != nil {
							t.Fatal(err)
						}
						w = f
					}
					defer w.Close()
					if _, err := w.Write(bigData[:len(bigData)/2]); err != nil {
						t.Fatal(err)
					}
					time.Sleep(100 * time.Millisecond)
				default:
					waitFor(t, &errb, "paused at "+phase)
				}
				if err := cmd.Process.Signal(s.sig); err != nil {
					t.Fatal(err)
				}
				done := make(chan error, 1)
				go func() { done <- cmd.Wait() }()
				select {
				case err = <-done:
				case <-time.After(20 * time.Second):
					cmd.Process.Kill()
					t.Fatalf("still running 20 s after %v", s.sig)
				}
				var ee *exec.ExitError
				if !errors.As(err, &ee) || ee.ExitCode() != s.code {
					t.Errorf("exit %v, want status %d", err, s.code)
				}
				var lines []string
				for _, l := range strings.Split(strings.TrimSpace(errb.String()), "\n") {
					if !strings.HasPrefix(l, "culprit: test:") {
						lines = append(lines, l)
					}
				}
				if len(lines) != 1 || lines[0] != s.line {
					t.Errorf("stderr %q, want the one line %q", lines, s.line)
				}
				entries, _ := os.ReadDir(outDir)
				for _, e := range entries {
					if e.Name() != "in.fifo" {
						t.Errorf("left behind: %s", e.Name())
					}
				}
			})
		}
	}
}

// syncBuffer is a bytes.Buffer safe to write from the command's copier
// while the test reads it.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// waitFor waits until the command's stderr holds want.
func waitFor(t *testing.T, b *syncBuffer, want string) {
	t.Helper()
	deadline := time.Now().Add(60 * time.Second)
	for !strings.Contains(b.String(), want) {
		if time.Now().After(deadline) {
			t.Fatalf("never saw %q on stderr: %q", want, b.String())
		}
		time.Sleep(10 * time.Millisecond)
	}
}
