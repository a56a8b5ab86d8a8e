package attribute

import (
	"regexp"
	"sort"

	"github.com/culprithq/culprit/callgraph"
	"github.com/culprithq/culprit/traces"
)

// ExplainNode is one step of an explained path: an entry point, an
// application frame or the boundary call, with the cost of the paths
// through it. Children are sorted by cost, descending, then by name.
type ExplainNode struct {
	Function string `json:"function"`
	File     string `json:"file,omitempty"`
	Line     int64  `json:"line,omitempty"`
	Class    string `json:"class"`
	Cost     int64  `json:"cost"`
	Calls    int64  `json:"calls"`
	Samples  int64  `json:"samples"`
	// Skipped counts library frames between this node and its parent.
	Skipped    int            `json:"skippedFrames,omitempty"`
	Statements []Detail       `json:"statements,omitempty"`
	Children   []*ExplainNode `json:"children,omitempty"`

	byKey   map[explainKey]*ExplainNode
	details map[detailKey]*Detail
}

type explainKey struct {
	frame   traces.FrameID
	skipped int
}

// Explanation shows how one root cause reaches its boundaries: every
// distinct path from the entry point through application frames to the
// database or network call, library frames elided.
type Explanation struct {
	RootCause string         `json:"rootCause"`
	Cost      int64          `json:"cost"`
	Share     float64        `json:"share"`
	Paths     []*ExplainNode `json:"paths"`
}

// Explain returns, for every root cause whose function matches pattern,
// the merged paths that charged it, in the order of Attribute's ranking.
// opts are the options the ranking used (only Value, ShowLiterals and
// Inclusive matter).
func Explain(t *callgraph.Tree, c *Classifier, opts Options, pattern *regexp.Regexp) []Explanation {
	wk := newWalk(t, c, &opts, false)
	src := wk.src
	wr := wk.newWalker()
	roots := map[string]*ExplainNode{}
	var denom int64
	var r charge
	for pi := range src.Paths.Len() {
		wr.next(pi, &r)
		if r.state != chargeBoundary {
			continue
		}
		denom += r.cost
		dk := wr.details[r.detail]
		for _, ra := range r.causes {
			name := src.Frames[t.Frame(ra)].Function
			if !pattern.MatchString(name) {
				continue
			}
			root := roots[name]
			if root == nil {
				root = &ExplainNode{Function: name, byKey: map[explainKey]*ExplainNode{}}
				roots[name] = root
			}
			root.add(&r)
			node := root
			skipped := 0
			for _, n := range t.Path(r.boundary) {
				v := c.Verdict(n)
				if !keptInExplanation(v) {
					skipped++
					continue
				}
				node = node.child(src, n, v, skipped)
				skipped = 0
				node.add(&r)
			}
			if node.details == nil {
				node.details = map[detailKey]*Detail{}
			}
			d := node.details[dk]
			if d == nil {
				d = dk.newDetail()
				node.details[dk] = d
			}
			d.Cost += r.cost
			d.Calls += r.calls
			d.Samples += r.samples
		}
	}
	out := make([]Explanation, 0, len(roots))
	for name, root := range roots {
		root.finish()
		e := Explanation{RootCause: name, Cost: root.Cost, Paths: root.Children}
		if denom > 0 {
			e.Share = float64(root.Cost) / float64(denom)
		}
		out = append(out, e)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Cost != out[j].Cost {
			return out[i].Cost > out[j].Cost
		}
		return out[i].RootCause < out[j].RootCause
	})
	return out
}

// keptInExplanation reports whether a frame of verdict v is a step of an
// explained path (and a node of the charge graph): application frames,
// entry points and boundaries; library frames between them are elided.
func keptInExplanation(v *Verdict) bool {
	return v.Class == Application || v.EntryPoint || v.Class.IsBoundary()
}

// add counts the charge r at n.
func (n *ExplainNode) add(r *charge) {
	n.Cost += r.cost
	n.Calls += r.calls
	n.Samples += r.samples
}

func (n *ExplainNode) child(src *traces.Source, f traces.FrameID, v *Verdict, skipped int) *ExplainNode {
	if n.byKey == nil {
		n.byKey = map[explainKey]*ExplainNode{}
	}
	k := explainKey{f, skipped}
	c := n.byKey[k]
	if c == nil {
		fr := &src.Frames[f]
		class := v.Class.String()
		if v.EntryPoint && v.Class != Entry {
			class += ", entry"
		}
		c = &ExplainNode{Function: fr.Function, File: fr.File, Line: fr.Line, Class: class, Skipped: skipped}
		n.byKey[k] = c
		n.Children = append(n.Children, c)
	}
	return c
}

// finish sorts children and statements recursively (explicitly, without
// recursion on the Go stack: paths can be deep).
func (n *ExplainNode) finish() {
	stack := []*ExplainNode{n}
	for len(stack) > 0 {
		x := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		sort.Slice(x.Children, func(i, j int) bool {
			a, b := x.Children[i], x.Children[j]
			if a.Cost != b.Cost {
				return a.Cost > b.Cost
			}
			if a.Function != b.Function {
				return a.Function < b.Function
			}
			return a.Line < b.Line
		})
		for _, d := range x.details {
			x.Statements = append(x.Statements, *d)
		}
		SortDetails(x.Statements)
		stack = append(stack, x.Children...)
	}
}
