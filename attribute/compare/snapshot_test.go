package compare

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/culprithq/culprit/attribute/internal/testinput"

	"github.com/culprithq/culprit/attribute"
	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
	"github.com/google/pprof/profile"
)

// namedInput is one input file of a test run.
type namedInput struct {
	name string
	data []byte
}

// withDuration sets the duration of an encoded profile (buildProfile leaves
// it 0), re-encoding it with the pprof library.
func withDuration(t testing.TB, data []byte, d int64) []byte {
	t.Helper()
	p, err := profile.ParseData(data)
	if err != nil {
		t.Fatal(err)
	}
	p.DurationNanos = d
	var buf bytes.Buffer
	if err := p.Write(&buf); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// rankInputs loads the inputs together, as one run, and attributes them.
func rankInputs(t testing.TB, rules *attribute.Rules, opts attribute.Options, inputs ...namedInput) *attribute.Result {
	t.Helper()
	l := traces.NewLoader(traces.Options{})
	for _, in := range inputs {
		if err := l.Add(in.name, bytes.NewReader(in.data)); err != nil {
			t.Fatal(err)
		}
	}
	src, err := l.Source()
	if err != nil {
		t.Fatal(err)
	}
	return attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, rules), opts)
}

func shopRules() *attribute.Rules {
	r := attribute.DefaultRules()
	r.App = []string{"example.com/shop/"}
	return r
}

func rankSpans(t testing.TB, src *traces.Source) *attribute.Result {
	t.Helper()
	if err := src.Validate(); err != nil {
		t.Fatal(err)
	}
	return attribute.Attribute(callgraph.NewTree(src, callgraph.TreeOptions{}), attribute.NewClassifier(src, attribute.DefaultRules()), attribute.Options{})
}

func mustJSON(t testing.TB, v any) string {
	t.Helper()
	b, err := json.MarshalIndent(v, "", " ")
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// roundTrip writes s and reads it back.
func roundTrip(t testing.TB, s *Snapshot) *Snapshot {
	t.Helper()
	var buf bytes.Buffer
	if err := s.Write(&buf); err != nil {
		t.Fatal(err)
	}
	back, err := ReadSnapshot("saved.json", &buf)
	if err != nil {
		t.Fatal(err)
	}
	return back
}

// firstDiff returns the first differing line of two texts, for messages.
func firstDiff(a, b string) string {
	al, bl := strings.Split(a, "\n"), strings.Split(b, "\n")
	for i := range min(len(al), len(bl)) {
		if al[i] != bl[i] {
			return fmt.Sprintf("line %d:\n got  %s\n want %s", i+1, al[i], bl[i])
		}
	}
	return fmt.Sprintf("lengths %d vs %d lines", len(al), len(bl))
}

// TestSnapshotRoundTrip checks rank → save → load → the same report: the
// Result rebuilt from a saved snapshot encodes to the same JSON as the
// original (no field excluded), and keeps its per-request vectors.
func TestSnapshotRoundTrip(t *testing.T) {
	profileRun := withDuration(t, buildProfile(t, testinput.RequestStacks(1, 40)), 30e9)
	tests := []struct {
		name string
		res  *attribute.Result
	}{
		{"profile with requests", rankInputs(t, shopRules(), attribute.Options{Value: "samples"}, namedInput{"cpu.pb.gz", profileRun})},
		{"profile auto-detected", rankInputs(t, attribute.DefaultRules(), attribute.Options{Value: "samples"}, namedInput{"cpu.pb.gz", profileRun})},
		{"profile inclusive cpu", rankInputs(t, shopRules(), attribute.Options{Value: "cpu", Inclusive: true}, namedInput{"cpu.pb.gz", profileRun})},
		{"profile without requests", rankProfile(t, buildProfile(t, methodsExample()), attribute.DefaultRules(), attribute.Options{Value: "samples"})},
		{"spans with findings", rankSpans(t, testinput.SpanSource("traces.json", 60e9, testinput.ShopTraces(1, 30, func(r int) int { return 1 + r%8 })))},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if len(tt.res.Causes) < 2 {
				t.Fatalf("scenario too thin: %d causes", len(tt.res.Causes))
			}
			snap := NewSnapshot(tt.res)
			back := roundTrip(t, snap)
			got, want := mustJSON(t, back.Result()), mustJSON(t, tt.res)
			if got != want {
				t.Fatalf("reloaded result differs at %s", firstDiff(got, want))
			}
			for i, c := range tt.res.Causes {
				bc := back.Result().Causes[i]
				if !slices.Equal(bc.RequestCosts(), c.RequestCosts()) || !slices.Equal(bc.RequestCalls(), c.RequestCalls()) {
					t.Errorf("%s: per-request vectors differ after reload", c.Function)
				}
				if back.Causes[i].Identity != attribute.Identity(c.Function) {
					t.Errorf("%s: identity %q", c.Function, back.Causes[i].Identity)
				}
			}
			// Saving the reloaded snapshot again gives the same bytes.
			var a, b bytes.Buffer
			if err := snap.Write(&a); err != nil {
				t.Fatal(err)
			}
			if err := back.Write(&b); err != nil {
				t.Fatal(err)
			}
			if a.String() != b.String() {
				t.Errorf("re-saved snapshot differs at %s", firstDiff(b.String(), a.String()))
			}
		})
	}
	// The scenarios must exercise what a snapshot carries.
	spans := tests[4].res
	if len(spans.Findings) == 0 || spans.Causes[0].CallsPerRequest == nil || len(spans.Causes[0].Statements) == 0 {
		t.Errorf("span scenario lacks findings, calls per request or statements: %s", mustJSON(t, spans))
	}
	if tests[0].res.Totals.Requests != 40 || tests[0].res.Causes[0].RequestCosts() == nil {
		t.Errorf("profile scenario lacks requests: %+v", tests[0].res.Totals)
	}
}

// TestMergeSnapshotsEqualsJointRun checks that merging the snapshots of two
// shards gives the snapshot of attributing both shards' inputs together.
func TestMergeSnapshotsEqualsJointRun(t *testing.T) {
	t.Run("profiles", func(t *testing.T) {
		a := namedInput{"shard-a.pb.gz", withDuration(t, buildProfile(t, testinput.RequestStacks(1, 23)), 20e9)}
		b := namedInput{"shard-b.pb.gz", withDuration(t, buildProfile(t, testinput.RequestStacks(24, 60)), 25e9)}
		for _, opts := range []attribute.Options{{Value: "samples"}, {Value: "cpu", Inclusive: true}} {
			sa := NewSnapshot(rankInputs(t, shopRules(), opts, a))
			sb := NewSnapshot(rankInputs(t, shopRules(), opts, b))
			joint := NewSnapshot(rankInputs(t, shopRules(), opts, a, b))
			merged, err := MergeSnapshots(roundTrip(t, sa), roundTrip(t, sb))
			if err != nil {
				t.Fatal(err)
			}
			if len(joint.Findings) == 0 || joint.Totals.Requests != 60 {
				t.Fatalf("scenario too thin: %d findings, %d requests", len(joint.Findings), joint.Totals.Requests)
			}
			if got, want := mustJSON(t, merged), mustJSON(t, joint); got != want {
				t.Errorf("%+v: merged snapshot differs from the joint run at %s", opts, firstDiff(got, want))
			}
			if got, want := mustJSON(t, merged.Result()), mustJSON(t, joint.Result()); got != want {
				t.Errorf("%+v: merged report differs from the joint run at %s", opts, firstDiff(got, want))
			}
		}
	})
	t.Run("spans", func(t *testing.T) {
		// At most 4 item queries per request: no repeated-statement
		// finding, whose per-request figures do not recombine.
		items := func(r int) int { return 1 + r%4 }
		const d = 60e9
		sa := NewSnapshot(rankSpans(t, testinput.SpanSource("a.json", d, testinput.ShopTraces(1, 25, items))))
		sb := NewSnapshot(rankSpans(t, testinput.SpanSource("b.json", d, testinput.ShopTraces(26, 70, items))))
		jointSrc := testinput.SpanSource("a.json", d, testinput.ShopTraces(1, 70, items))
		jointSrc.Inputs = append(sa.Inputs[:1:1], sb.Inputs...)
		joint := NewSnapshot(rankSpans(t, jointSrc))
		merged, err := MergeSnapshots(sa, sb)
		if err != nil {
			t.Fatal(err)
		}
		// Span shards cover the same period: the merge says so.
		if n := len(merged.Warnings); n != 1 || !strings.Contains(merged.Warnings[0], "duration") {
			t.Errorf("warnings = %q, want the duration note", merged.Warnings)
		}
		merged.Warnings = joint.Warnings
		if joint.Causes[0].CallsPerRequest == nil {
			t.Fatal("scenario lacks calls per request")
		}
		if got, want := mustJSON(t, merged), mustJSON(t, joint); got != want {
			t.Errorf("merged snapshot differs from the joint run at %s", firstDiff(got, want))
		}
	})
}

func TestMergeSnapshotsMismatch(t *testing.T) {
	base := NewSnapshot(rankInputs(t, shopRules(), attribute.Options{Value: "samples"},
		namedInput{"a.pb.gz", buildProfile(t, testinput.RequestStacks(1, 5))}))
	tests := []struct {
		name   string
		modify func(s *Snapshot)
		want   string
	}{
		{"value type", func(s *Snapshot) { s.ValueType = traces.ValueType{Type: "cpu", Unit: "nanoseconds"} }, "value type cpu/nanoseconds vs samples/count"},
		{"source kind", func(s *Snapshot) { s.SourceKind = "spans" }, "source kind spans vs profile"},
		{"app prefixes", func(s *Snapshot) { s.App.Prefixes = []string{"example.com/other/"} }, `application prefixes ["example.com/other/"] vs ["example.com/shop/"]`},
		{"rules files", func(s *Snapshot) { s.App.RulesFiles = []string{"rules.json"} }, `rules files ["rules.json"] vs []`},
		{"inclusive", func(s *Snapshot) { s.Inclusive = true }, "inclusive view true vs false"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			other := base.clone()
			other.Inputs[0].Name = "b.pb.gz"
			tt.modify(other)
			_, err := MergeSnapshots(base, other)
			if err == nil {
				t.Fatal("merge succeeded")
			}
			if !errors.Is(err, ErrSnapshotMismatch) || !strings.Contains(err.Error(), tt.want) ||
				!strings.Contains(err.Error(), "b.pb.gz") || !strings.Contains(err.Error(), "a.pb.gz") {
				t.Errorf("error = %v, want ErrSnapshotMismatch naming both shards and %q", err, tt.want)
			}
		})
	}
	t.Run("none", func(t *testing.T) {
		if _, err := MergeSnapshots(); err == nil {
			t.Error("merging nothing succeeded")
		}
	})
	t.Run("one is a copy", func(t *testing.T) {
		m, err := MergeSnapshots(base)
		if err != nil {
			t.Fatal(err)
		}
		if mustJSON(t, m) != mustJSON(t, base) {
			t.Error("merging one snapshot changed it")
		}
		m.Causes[0].CallSites[0].Cost++
		if m.Causes[0].CallSites[0].Cost == base.Causes[0].CallSites[0].Cost {
			t.Error("the merged copy shares memory with its input")
		}
	})
	t.Run("same input twice", func(t *testing.T) {
		// Merging a snapshot with itself would double every figure.
		if _, err := MergeSnapshots(base, base.clone()); !errors.Is(err, ErrSameData) || !strings.Contains(err.Error(), "twice") {
			t.Fatalf("merging a snapshot with itself: %v, want ErrSameData", err)
		}
	})
	t.Run("same capture segment twice", func(t *testing.T) {
		a, b := base.clone(), base.clone()
		seg := &traces.SegmentID{Instance: "0123456789abcdef0123456789abcdef", Sequence: 3}
		a.Inputs = []traces.Input{{Name: "a/seg-000003.culprit-capture", Format: traces.FormatCapture, SHA256: "aa", Segment: seg}}
		b.Inputs = []traces.Input{{Name: "copy/seg-000003.culprit-capture", Format: traces.FormatCapture, SHA256: "bb", Segment: seg}}
		if _, err := MergeSnapshots(a, b); !errors.Is(err, ErrSameData) {
			t.Fatalf("the same segment in two snapshots: %v, want ErrSameData", err)
		}
		b.Inputs[0].Segment = &traces.SegmentID{Instance: seg.Instance, Sequence: 4}
		if _, err := MergeSnapshots(a, b); err != nil {
			t.Fatalf("different segments: %v", err)
		}
	})
}

// TestCappedValues checks the thinning of per-request vectors and its
// documented error bounds: exact count and sum, Kolmogorov distance of the
// kept values to all values ≤ 1/k, plain mean within (max − min)/k.
func TestCappedValues(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	lognormal := func(n int) []float64 {
		x := make([]float64, n)
		for i := range x {
			x[i] = math.Round(math.Exp(14 + 1.3*rng.NormFloat64()))
		}
		slices.Sort(x)
		return x
	}
	sum := func(x []float64) float64 {
		s := 0.0
		for _, v := range x {
			s += v
		}
		return s
	}
	// ksDistance returns sup |F_sample − F_all| over the values of all.
	ksDistance := func(sample, all []float64) float64 {
		d := 0.0
		for _, v := range all {
			fa := float64(upperBound(all, v)) / float64(len(all))
			fs := float64(upperBound(sample, v)) / float64(len(sample))
			d = math.Max(d, math.Abs(fa-fs))
		}
		return d
	}
	k := float64(MaxVectorValues)
	tests := []struct {
		name  string
		parts [][]float64
	}{
		{"below the cap", [][]float64{lognormal(5000)}},
		{"at the cap", [][]float64{lognormal(MaxVectorValues)}},
		{"thinned", [][]float64{lognormal(3*MaxVectorValues + 17)}},
		{"merge of exact parts", [][]float64{lognormal(9000), lognormal(8000)}},
		{"merge of exact parts past the cap", [][]float64{lognormal(15000), lognormal(12000)}},
		{"merge of thinned parts", [][]float64{lognormal(50000), lognormal(23000), lognormal(500)}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var all []float64
			var caps []*CappedValues
			for _, p := range tt.parts {
				all = append(all, p...)
				caps = append(caps, newCappedValues(p))
			}
			slices.Sort(all)
			v := mergeCapped(caps...)
			if err := v.validate(0); err != nil {
				t.Fatalf("invalid: %v", err)
			}
			if v.Count != int64(len(all)) || math.Abs(v.Sum-sum(all)) > 1e-9*sum(all) {
				t.Errorf("count %d sum %v, want %d and %v", v.Count, v.Sum, len(all), sum(all))
			}
			if len(all) <= MaxVectorValues {
				if !slices.Equal(v.Values, all) {
					t.Error("an unthinned vector must hold every value")
				}
				return
			}
			if len(v.Values) != MaxVectorValues {
				t.Errorf("%d values kept, want %d", len(v.Values), MaxVectorValues)
			}
			// Thinning each part, then thinning their pool, can add 1/k per level.
			levels := 1.0
			if len(tt.parts) > 1 {
				levels = 2
			}
			if d := ksDistance(v.Values, all); d > levels/k+1e-12 {
				t.Errorf("Kolmogorov distance %v > %v/k", d, levels)
			}
			meanErr := math.Abs(sum(v.Values)/float64(len(v.Values)) - sum(all)/float64(len(all)))
			if bound := levels * (all[len(all)-1] - all[0]) / k; meanErr > bound {
				t.Errorf("mean error %v > bound %v", meanErr, bound)
			}
		})
	}
}

// upperBound returns how many values of the ascending x are ≤ v.
func upperBound(x []float64, v float64) int {
	i, _ := slices.BinarySearchFunc(x, v, func(e, t float64) int {
		if e <= t {
			return -1
		}
		return 1
	})
	return i
}

func TestReadSnapshotErrors(t *testing.T) {
	good := NewSnapshot(rankInputs(t, shopRules(), attribute.Options{Value: "samples"},
		namedInput{"a.pb.gz", buildProfile(t, testinput.RequestStacks(1, 5))}))
	var buf bytes.Buffer
	if err := good.Write(&buf); err != nil {
		t.Fatal(err)
	}
	doc := buf.String()
	modified := func(change func(s *Snapshot)) string {
		s := good.clone()
		change(s)
		var b bytes.Buffer
		if err := s.Write(&b); err != nil {
			t.Fatal(err)
		}
		return b.String()
	}
	tests := []struct {
		name string
		doc  string
		is   error  // errors.Is target, nil for JSON errors
		want string // substring of the message
	}{
		{"newer schema", strings.Replace(doc, SnapshotSchema, "culprit.snapshot/v2", 1), ErrSnapshotSchema,
			`base.json: unsupported snapshot schema "culprit.snapshot/v2"; this culprit reads "culprit.snapshot/v1"`},
		{"other document", `{"schema": "culprit.rank/v1", "rootCauses": {}}`, ErrSnapshotSchema, `"culprit.rank/v1"`},
		{"no schema", `{"rootCauses": []}`, ErrSnapshotSchema, `base.json: unsupported snapshot schema: no "schema" field`},
		{"syntax error", "{\n  \"schema\": \"culprit.snapshot/v1\",\n  \"totals\": {\"cost\": 12,, \"database\": 3}\n}", nil, "base.json:3:25: invalid character ','"},
		{"truncated", doc[:len(doc)/2], nil, "base.json:"},
		{"type error", "{\"schema\": \"culprit.snapshot/v1\",\n\"totals\": {\"cost\": \"lots\"}}", nil, "base.json:2:20: json: cannot unmarshal string"},
		{"not an object", `[1, 2]`, nil, "base.json:1:1:"},
		{"empty", ``, ErrSnapshotInvalid, "base.json: invalid snapshot: the file is empty"},
		{"trailing data", doc + "{}", nil, "unexpected data after the snapshot document"},
		{"negative cost", modified(func(s *Snapshot) { s.Totals.Cost = -5 }), ErrSnapshotInvalid, "totals.cost is negative (-5)"},
		{"cost split", modified(func(s *Snapshot) { s.Causes[0].Database = 1 }), ErrSnapshotInvalid,
			`rootCauses[0] ("example.com/shop/store.loadOrders"): cost 20 is not database 1 + network 0`},
		{"negative vector value", modified(func(s *Snapshot) { s.Causes[1].RequestCosts.Values[0] = -1 }), ErrSnapshotInvalid,
			"requestCosts: value 0 (-1) is not finite and non-negative"},
		{"vector sum", modified(func(s *Snapshot) { s.Causes[1].RequestCosts.Sum++ }), ErrSnapshotInvalid, "differs from the sum of its values"},
		{"unattributed", modified(func(s *Snapshot) { s.Totals.Unattributed = 1000 }), ErrSnapshotInvalid, "totals.unattributed 1000 exceeds"},
		{"unsorted vector", `{"schema": "culprit.snapshot/v1", "sourceKind": "profile", "valueType": {"type": "samples", "unit": "count"},
			"totals": {"requests": 5}, "rootCauses": [{"function": "f", "identity": "f", "kind": "database", "cost": 3, "database": 3,
			"requestCosts": {"values": [2, 1], "count": 2, "sum": 3}}]}`, ErrSnapshotInvalid, "values are not ascending at 1"},
		{"vector count", `{"schema": "culprit.snapshot/v1", "sourceKind": "profile", "valueType": {"type": "samples", "unit": "count"},
			"totals": {"requests": 1}, "rootCauses": [{"function": "f", "identity": "f", "kind": "database", "cost": 3, "database": 3,
			"requestCosts": {"values": [1, 2], "count": 2, "sum": 3}}]}`, ErrSnapshotInvalid, "count 2 exceeds the 1 requests"},
		{"unknown source kind", `{"schema": "culprit.snapshot/v1", "sourceKind": "logs", "valueType": {"type": "samples"}}`, ErrSnapshotInvalid, `sourceKind "logs"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ReadSnapshot("base.json", strings.NewReader(tt.doc))
			if err == nil {
				t.Fatal("read succeeded")
			}
			var se *SnapshotError
			if !errors.As(err, &se) || se.File != "base.json" {
				t.Errorf("error %v is not a *SnapshotError naming the file", err)
			}
			if tt.is != nil && !errors.Is(err, tt.is) {
				t.Errorf("error %v does not wrap %v", err, tt.is)
			}
			if !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error = %q, want it to contain %q", err, tt.want)
			}
		})
	}
}

// TestReadSnapshotRecomputesIdentity checks that a snapshot saved with
// another identity (an older culprit's rules) is matched by today's.
func TestReadSnapshotRecomputesIdentity(t *testing.T) {
	doc := `{"schema": "culprit.snapshot/v1", "sourceKind": "profile", "valueType": {"type": "samples", "unit": "count"},
		"rootCauses": [{"function": "example.com/shop/api.handler.func7", "identity": "example.com/shop/api.handler.func7",
		"kind": "database", "cost": 3, "database": 3}]}`
	s, err := ReadSnapshot("old.json", strings.NewReader(doc))
	if err != nil {
		t.Fatal(err)
	}
	if got := s.Causes[0].Identity; got != "example.com/shop/api.handler.func*" {
		t.Errorf("identity %q, want it recomputed", got)
	}
}

// FuzzReadSnapshot checks that ReadSnapshot never panics, and that what it
// accepts survives a write and a read unchanged.
func FuzzReadSnapshot(f *testing.F) {
	good := NewSnapshot(rankInputs(f, shopRules(), attribute.Options{Value: "samples"},
		namedInput{"a.pb.gz", buildProfile(f, testinput.RequestStacks(1, 4))}))
	var buf bytes.Buffer
	if err := good.Write(&buf); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	f.Add([]byte(`{"schema": "culprit.snapshot/v1", "sourceKind": "spans", "valueType": {"type": "duration"}}`))
	f.Add([]byte(`{"schema": "culprit.snapshot/v2"}`))
	f.Add([]byte(`{"schema": "culprit.snapshot/v1", "sourceKind": "profile", "valueType": {"type": "samples"},
		"rootCauses": [{"function": "f", "identity": "f", "kind": "database", "cost": 3, "database": 3,
		"requestCosts": {"values": [1, 2], "count": 7, "sum": 30}}]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := ReadSnapshot("fuzz.json", bytes.NewReader(data))
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz.json") {
				t.Fatalf("error without the file name: %v", err)
			}
			return
		}
		back := roundTrip(t, s)
		if mustJSON(t, back) != mustJSON(t, s) {
			t.Fatal("accepted snapshot changed in a write and read")
		}
		_ = s.Result()
		// A snapshot that names its inputs refuses its copy (the same data
		// twice); one that does not merges with it.
		identified := slices.ContainsFunc(s.Inputs, func(in traces.Input) bool { return in.SHA256 != "" || in.Segment != nil })
		if _, err := MergeSnapshots(s, back); identified != errors.Is(err, ErrSameData) || !identified && err != nil {
			t.Fatalf("merging a snapshot with its copy: %v", err)
		}
	})
}
