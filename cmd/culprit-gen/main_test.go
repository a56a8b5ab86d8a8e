package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func TestRun(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "no", "such", "dir", "out.pb.gz")
	tests := []struct {
		name    string
		args    []string
		code    int
		errText string // substring of stderr
		creates string // file that must exist afterwards
	}{
		{"no command", nil, exitUsage, "usage:", ""},
		{"unknown command", []string{"bake"}, exitUsage, `unknown command "bake"; must be one of: demo, profile, spans`, ""},
		{"help", []string{"help"}, exitOK, "", ""},
		{"flag help", []string{"demo", "-h"}, exitOK, "-out", ""},
		{"demo without -out", []string{"demo"}, exitUsage, "-out is required", ""},
		{"undefined flag", []string{"spans", "-lines", "3"}, exitUsage, "flag provided but not defined: -lines", ""},
		{"positional argument", []string{"spans", "-out", filepath.Join(dir, "x"), "extra"}, exitUsage, `unexpected argument "extra"`, ""},
		{"too few samples", []string{"profile", "-out", filepath.Join(dir, "p"), "-samples", "5", "-stacks", "6"}, exitUsage, "-samples (5) must be at least -stacks (6)", ""},
		{"no stacks", []string{"profile", "-out", filepath.Join(dir, "p"), "-stacks", "0"}, exitUsage, "-stacks must be at least 1", ""},
		{"no spans", []string{"spans", "-out", filepath.Join(dir, "s"), "-spans", "0"}, exitUsage, "-spans must be at least 1", ""},
		{"unwritable output", []string{"profile", "-out", missing, "-samples", "10", "-stacks", "2"}, exitError, "writing " + missing, ""},
		{"spans written", []string{"spans", "-out", filepath.Join(dir, "ok.jsonl"), "-spans", "30"}, exitOK, "", "ok.jsonl"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var out, errOut bytes.Buffer
			code := run(tt.args, &out, &errOut)
			if code != tt.code {
				t.Errorf("exit %d, want %d; stderr: %s", code, tt.code, errOut.String())
			}
			if tt.errText != "" && !strings.Contains(errOut.String()+out.String(), tt.errText) {
				t.Errorf("output %q does not contain %q", errOut.String()+out.String(), tt.errText)
			}
			if tt.creates != "" {
				if _, err := os.Stat(filepath.Join(dir, tt.creates)); err != nil {
					t.Error(err)
				}
			}
		})
	}
	// No temporary files are left behind by failed or successful runs.
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		if strings.Contains(e.Name(), ".tmp") {
			t.Errorf("leftover temporary file %s", e.Name())
		}
	}
}

// The Poisson distribution has mean and variance both equal to λ (any
// probability textbook, e.g. Feller, An Introduction to Probability Theory
// and Its Applications, Vol. I, ch. VI). The sample mean of n draws has
// standard error √(λ/n); allow 4 of them.
func TestPoisson(t *testing.T) {
	tests := []struct {
		name   string
		lambda float64
	}{
		{"small mean (Knuth's method)", 3.5},
		{"large mean (normal approximation)", 250},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := newRand(1, "poisson-test")
			const n = 20000
			var sum, sumSq float64
			for range n {
				v := float64(poisson(r, tt.lambda))
				sum += v
				sumSq += v * v
			}
			mean := sum / n
			variance := sumSq/n - mean*mean
			if se := math.Sqrt(tt.lambda / n); math.Abs(mean-tt.lambda) > 4*se {
				t.Errorf("mean %.3f, want %.3f ± %.3f", mean, tt.lambda, 4*se)
			}
			if math.Abs(variance/tt.lambda-1) > 0.06 {
				t.Errorf("variance %.3f, want about %.3f", variance, tt.lambda)
			}
		})
	}
}

func TestLayout(t *testing.T) {
	// A root with 300 ns of its own and two children of 100 and 200 ns:
	// its own time is spread evenly around the children, which follow one
	// another.
	root := &node{self: 300}
	a := root.boundary()
	a.self = 100
	b := root.boundary()
	b.self = 200
	end := root.layout(1000)
	tests := []struct {
		name             string
		n                *node
		start, end       int64
		activeAtMidpoint *node
	}{
		{"root", root, 1000, 1600, nil},
		{"first child", a, 1100, 1200, a},
		{"second child", b, 1300, 1500, b},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if tt.n.start != tt.start || tt.n.end != tt.end {
				t.Errorf("[%d, %d), want [%d, %d)", tt.n.start, tt.n.end, tt.start, tt.end)
			}
			if tt.activeAtMidpoint != nil {
				if got := root.activeAt((tt.start + tt.end) / 2); got != tt.activeAtMidpoint {
					t.Errorf("activeAt midpoint = %p, want %p", got, tt.activeAtMidpoint)
				}
			}
		})
	}
	if end != 1600 || root.duration() != 600 {
		t.Errorf("end %d, duration %d", end, root.duration())
	}
	if root.activeAt(1250) != root || root.activeAt(1600) != nil {
		t.Error("activeAt outside children")
	}
}

// duration returns the node's total duration: its own time plus that of all
// its children (they run one after another).
func (n *node) duration() time.Duration {
	d := n.self
	for _, c := range n.children {
		d += c.duration()
	}
	return d
}
