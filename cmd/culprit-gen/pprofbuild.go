package main

import (
	"fmt"
	"io"

	"github.com/google/pprof/profile"
)

// profileBuilder assembles a profile.Profile from root-first stacks the way
// Go's runtime/pprof lays one out: one Mapping for the executable, one
// Location per program counter (its Lines innermost first when calls were
// inlined), Function.Name == SystemName, Column 0, leaf-first sample
// locations.
type profileBuilder struct {
	p        *profile.Profile
	funcs    map[*fnDef]*profile.Function
	locs     map[locKey]*profile.Location
	fnBase   map[*fnDef]uint64 // code address of each function
	fnNext   map[*fnDef]uint64 // next free address inside it
	nextFunc uint64
}

// newProfileBuilder starts a profile of an executable; buildID tells builds
// apart.
func newProfileBuilder(p *profile.Profile, exe, buildID string) *profileBuilder {
	p.Mapping = []*profile.Mapping{{
		ID: 1, Start: 0x400000, Limit: 0x1a00000, Offset: 0, File: exe, BuildID: buildID,
		HasFunctions: true, // Go sets only this flag (see the reference notes).
	}}
	return &profileBuilder{
		p:        p,
		funcs:    map[*fnDef]*profile.Function{},
		locs:     map[locKey]*profile.Location{},
		fnBase:   map[*fnDef]uint64{},
		fnNext:   map[*fnDef]uint64{},
		nextFunc: 0x401000,
	}
}

func (b *profileBuilder) function(f *fnDef) *profile.Function {
	if pf, ok := b.funcs[f]; ok {
		return pf
	}
	pf := &profile.Function{
		ID: uint64(len(b.p.Function) + 1), Name: f.name, SystemName: f.name,
		Filename: f.file, StartLine: f.start,
	}
	b.p.Function = append(b.p.Function, pf)
	b.funcs[f] = pf
	return pf
}

// location interns the Location for frames, innermost first; frames[len-1]
// is the real function the others are inlined into.
func (b *profileBuilder) location(frames []frame) *profile.Location {
	var key locKey
	for i, f := range frames {
		if i < len(key.fns) {
			key.fns[i], key.lines[i] = f.fn, f.line
		} else {
			key.more += stackKey(frames[i : i+1])
		}
	}
	if l, ok := b.locs[key]; ok {
		return l
	}
	outer := frames[len(frames)-1].fn
	if _, ok := b.fnBase[outer]; !ok {
		base := b.nextFunc
		b.nextFunc += 0x800
		b.fnBase[outer] = base
		b.fnNext[outer] = base + 0x13
	}
	addr := b.fnNext[outer]
	b.fnNext[outer] += 0x1d
	l := &profile.Location{ID: uint64(len(b.p.Location) + 1), Mapping: b.p.Mapping[0], Address: addr}
	for _, f := range frames {
		l.Line = append(l.Line, profile.Line{Function: b.function(f.fn), Line: f.line})
	}
	b.p.Location = append(b.p.Location, l)
	b.locs[key] = l
	return l
}

// locKey identifies a Location by its lines: the first three inline, any
// further ones spelled out.
type locKey struct {
	fns   [3]*fnDef
	lines [3]int64
	more  string
}

// locations converts a root-first stack to leaf-first Locations, folding
// each inlined frame into its caller's Location.
func (b *profileBuilder) locations(stack []frame) []*profile.Location {
	var out []*profile.Location
	var group []frame
	for i := len(stack) - 1; i >= 0; i-- {
		group = append(group[:0], stack[i])
		for stack[i].inl && i > 0 {
			i--
			group = append(group, stack[i])
		}
		out = append(out, b.location(group))
	}
	return out
}

// add appends a sample for a root-first stack.
func (b *profileBuilder) add(stack []frame, values []int64, route string) {
	s := &profile.Sample{Location: b.locations(stack), Value: values}
	if route != "" {
		s.Label = map[string][]string{"http.route": {route}}
	}
	b.p.Sample = append(b.p.Sample, s)
}

// stackCounts counts samples per distinct (stack, route) in the order each
// was first seen, which keeps the output deterministic.
type stackCounts struct {
	index  map[string]int
	stacks [][]frame
	routes []string
	counts []float64
}

func newStackCounts() *stackCounts { return &stackCounts{index: map[string]int{}} }

func (c *stackCounts) add(stack []frame, route string, v float64) {
	k := stackKey(stack) + "|" + route
	i, ok := c.index[k]
	if !ok {
		i = len(c.stacks)
		c.index[k] = i
		c.stacks = append(c.stacks, stack)
		c.routes = append(c.routes, route)
		c.counts = append(c.counts, 0)
	}
	c.counts[i] += v
}

// writeProfile validates p and writes it gzip-compressed, as Go does.
func writeProfile(w io.Writer, p *profile.Profile) error {
	if err := p.CheckValid(); err != nil {
		return fmt.Errorf("generated an invalid profile: %w", err)
	}
	return p.Write(w)
}
