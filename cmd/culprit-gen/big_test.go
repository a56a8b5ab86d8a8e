package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestBigProfile(t *testing.T) {
	tests := []struct {
		name    string
		samples int64
		stacks  int
	}{
		{"many samples per stack", 5000, 300},
		{"one sample per stack", 400, 400},
		{"single stack", 7, 1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "big.pb.gz")
			var out, errOut bytes.Buffer
			args := []string{"profile", "-out", path, "-samples", fmt.Sprint(tt.samples), "-stacks", fmt.Sprint(tt.stacks), "-seed", "3"}
			if code := run(args, &out, &errOut); code != exitOK {
				t.Fatalf("exit %d: %s", code, errOut.String())
			}
			p := parseProfileFile(t, path)
			checkGoLikeProfile(t, p)
			if len(p.Sample) != tt.stacks {
				t.Errorf("%d samples (stacks), want %d", len(p.Sample), tt.stacks)
			}
			var total int64
			seen := map[string]bool{}
			for _, s := range p.Sample {
				if s.Value[0] < 1 || s.Value[1] != s.Value[0]*p.Period {
					t.Errorf("sample values %v", s.Value)
				}
				total += s.Value[0]
				fs := sampleFuncs(s)
				if len(fs) < bigMinDepth || len(fs) > bigMaxDepth {
					t.Errorf("stack depth %d, want %d–%d", len(fs), bigMinDepth, bigMaxDepth)
				}
				var ids []string
				for _, l := range s.Location {
					ids = append(ids, fmt.Sprint(l.ID))
				}
				key := strings.Join(ids, ",") + fmt.Sprint(s.Label)
				if seen[key] {
					t.Errorf("duplicate stack %s", key)
				}
				seen[key] = true
			}
			if total != tt.samples {
				t.Errorf("total sample count %d, want %d", total, tt.samples)
			}
		})
	}
}

func TestBigProfileMix(t *testing.T) {
	p, err := bigProfile(bigProfileOptions{samples: 20000, stacks: 2000, seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	var db, http, app, labeled, recursive int
	for _, s := range p.Sample {
		fs := sampleFuncs(s)
		if index(fs, "database/sql.(*DB).QueryContext") >= 0 || index(fs, "database/sql.(*DB).ExecContext") >= 0 || index(fs, "database/sql.(*Rows).Next") >= 0 || index(fs, "database/sql.(*Rows).Scan") >= 0 {
			db++
		}
		if index(fs, "net/http.(*Client).Do") >= 0 || index(fs, "crypto/tls.(*Conn).Write") >= 0 {
			http++
		}
		appFrames := map[string]int{}
		for _, f := range fs {
			if isAppFunc(f) {
				app++
				appFrames[f]++
			}
		}
		for _, n := range appFrames {
			if n > 1 {
				recursive++
				break
			}
		}
		if len(s.Label["http.route"]) == 1 {
			labeled++
		}
	}
	n := len(p.Sample)
	// The intended mix (see bigTails and bigStack); wide bounds, since
	// depth limits reject some combinations.
	for _, c := range []struct {
		what   string
		got    int
		lo, hi float64
	}{
		{"database stacks", db, 0.15, 0.45},
		{"HTTP client stacks", http, 0.04, 0.2},
		{"labeled request stacks", labeled, 0.7, 0.95},
		{"stacks with recursion", recursive, 0.02, 0.2},
	} {
		if f := float64(c.got) / float64(n); f < c.lo || f > c.hi {
			t.Errorf("%s: %d of %d (%.2f), want %.2f–%.2f", c.what, c.got, n, f, c.lo, c.hi)
		}
	}
	if app < n {
		t.Errorf("only %d application frames in %d stacks", app, n)
	}
}

func TestBigSpans(t *testing.T) {
	tests := []struct {
		name  string
		spans int
	}{
		{"several traces", 1000},
		{"last trace short", 75},
		{"one span", 1},
		{"exactly one trace of the minimum", 20},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "spans.jsonl")
			var out, errOut bytes.Buffer
			if code := run([]string{"spans", "-out", path, "-spans", fmt.Sprint(tt.spans)}, &out, &errOut); code != exitOK {
				t.Fatalf("exit %d: %s", code, errOut.String())
			}
			f, err := os.Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			traces, _ := readOTLPLines(t, path, f)
			total, short := 0, 0
			kinds := map[int64]int{}
			for id, tr := range traces {
				checkTraceShape(t, id, tr)
				total += len(tr.spans)
				if len(tr.spans) < bigMinSpans {
					short++
				}
				if len(tr.spans) > bigMaxSpans {
					t.Errorf("trace %s has %d spans, want ≤ %d", id, len(tr.spans), bigMaxSpans)
				}
				if len(tr.spans) >= 3 && (len(tr.lines) < 2 || len(tr.lines) > 3) {
					t.Errorf("trace %s of %d spans on %d lines, want 2–3", id, len(tr.spans), len(tr.lines))
				}
				for _, s := range tr.spans {
					checkSpanAttrs(t, s)
					kinds[s.kind]++
				}
			}
			if total != tt.spans {
				t.Errorf("%d spans, want %d", total, tt.spans)
			}
			if short > 1 {
				t.Errorf("%d traces below %d spans, want at most the last one", short, bigMinSpans)
			}
			if tt.spans >= 1000 && (kinds[kindClient] == 0 || kinds[kindInternal] == 0 || kinds[kindServer] == 0) {
				t.Errorf("span kinds %v, want SERVER, INTERNAL and CLIENT", kinds)
			}
		})
	}
}

func TestBigDeterministic(t *testing.T) {
	gen := func(t *testing.T, args ...string) []byte {
		t.Helper()
		path := filepath.Join(t.TempDir(), "out")
		var out, errOut bytes.Buffer
		if code := run(append(args, "-out", path), &out, &errOut); code != exitOK {
			t.Fatalf("exit %d: %s", code, errOut.String())
		}
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	tests := []struct {
		name string
		args []string
	}{
		{"profile", []string{"profile", "-samples", "3000", "-stacks", "500"}},
		{"spans", []string{"spans", "-spans", "500"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a := gen(t, append(tt.args, "-seed", "5")...)
			b := gen(t, append(tt.args, "-seed", "5")...)
			c := gen(t, append(tt.args, "-seed", "6")...)
			if !bytes.Equal(a, b) {
				t.Error("same seed gave different files")
			}
			if bytes.Equal(a, c) {
				t.Error("different seeds gave the same file")
			}
		})
	}
}

func BenchmarkSpans(b *testing.B) {
	for b.Loop() {
		if err := writeBigSpans(io.Discard, bigSpansOptions{spans: 100_000, seed: 1}); err != nil {
			b.Fatal(err)
		}
	}
}
