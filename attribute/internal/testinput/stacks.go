// Package testinput makes the inputs the tests of attribute and
// attribute/compare share: profiles encoded by the pprof library itself
// (the reference encoder of profile.proto), span sources shaped as the
// OTLP reader makes them, and OTLP/JSON lines written by hand as the
// OTLP/JSON encoding specifies them. Only tests import it.
package testinput

import (
	"bytes"
	"fmt"
	"strings"

	"github.com/google/pprof/profile"
)

// Stack is one sample of a test profile: frames root first, written
// "function@file:line", a count and labels.
type Stack struct {
	Frames []string
	Count  int64
	Labels map[string][]string
}

// Frames of an invented shop service and of the libraries it calls, as
// Go's runtime names them.
const (
	Main       = "main.main@/home/ci/shop/main.go:20"
	Handler    = "example.com/shop/api.handler@/home/ci/shop/api/api.go:31"
	LoadUser   = "example.com/shop/store.loadUser@/home/ci/shop/store/user.go:12"
	LoadOrders = "example.com/shop/store.loadOrders@/home/ci/shop/store/orders.go:44"
	Render     = "example.com/shop/api.render@/home/ci/shop/api/render.go:9"
	Walk       = "example.com/shop/tree.walk@/home/ci/shop/tree/walk.go:17"
	Query      = "database/sql.(*DB).Query@/usr/local/go/src/database/sql/sql.go:1720"
	Driver     = "github.com/lib/pq.(*conn).query@/home/ci/go/pkg/mod/github.com/lib/pq@v1.10.9/conn.go:870"
	HTTP       = "net/http.(*Client).Do@/usr/local/go/src/net/http/client.go:590"
	Mux        = "net/http.HandlerFunc.ServeHTTP@/usr/local/go/src/net/http/server.go:2220"
	Serve      = "net/http.(*conn).serve@/usr/local/go/src/net/http/server.go:2090"
)

// Profile encodes stacks with the pprof library, as a goroutine-style
// profile (samples/count and cpu/nanoseconds, 10 ms a sample).
func Profile(stacks []Stack) ([]byte, error) {
	p := &profile.Profile{
		SampleType: []*profile.ValueType{{Type: "samples", Unit: "count"}, {Type: "cpu", Unit: "nanoseconds"}},
		PeriodType: &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:     10_000_000,
	}
	funcs := map[string]*profile.Function{}
	locs := map[string]*profile.Location{}
	for _, st := range stacks {
		var sl []*profile.Location
		for i := len(st.Frames) - 1; i >= 0; i-- { // leaf first
			spec := st.Frames[i]
			loc := locs[spec]
			if loc == nil {
				name, file, line := parseFrameSpec(spec)
				fn := funcs[name+"@"+file]
				if fn == nil {
					fn = &profile.Function{ID: uint64(len(funcs) + 1), Name: name, SystemName: name, Filename: file}
					funcs[name+"@"+file] = fn
					p.Function = append(p.Function, fn)
				}
				loc = &profile.Location{ID: uint64(len(locs) + 1), Line: []profile.Line{{Function: fn, Line: line}}}
				locs[spec] = loc
				p.Location = append(p.Location, loc)
			}
			sl = append(sl, loc)
		}
		p.Sample = append(p.Sample, &profile.Sample{Location: sl, Value: []int64{st.Count, st.Count * 10_000_000}, Label: st.Labels})
	}
	var buf bytes.Buffer
	if err := p.Write(&buf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

func parseFrameSpec(spec string) (name, file string, line int64) {
	name, rest, _ := strings.Cut(spec, "@")
	file, ln, _ := strings.Cut(rest, ":")
	for _, c := range ln {
		line = line*10 + int64(c-'0')
	}
	return name, file, line
}

// RequestStacks returns the stacks of requests first..last of a small shop
// service: every request loads its user and orders, every third calls a
// payment service, every fourth walks a category tree recursively down to
// the database, and the mux makes calls with no application frame.
func RequestStacks(first, last int) []Stack {
	var out []Stack
	for r := first; r <= last; r++ {
		req := map[string][]string{"request_id": {fmt.Sprintf("req-%03d", r)}}
		route := map[string][]string{"request_id": {fmt.Sprintf("req-%03d", r)}, "http.route": {"/orders"}}
		out = append(out,
			Stack{Frames: []string{Serve, Mux, Handler, LoadUser, Query, Driver}, Count: int64(1 + r%3), Labels: req},
			Stack{Frames: []string{Serve, Mux, Handler, LoadOrders, Query, Driver}, Count: int64(2 + r%5), Labels: route},
			Stack{Frames: []string{Serve, Mux, Handler, Render}, Count: 4, Labels: req},
		)
		if r%3 == 0 {
			out = append(out, Stack{Frames: []string{Serve, Mux, Handler, HTTP}, Count: int64(1 + r%4), Labels: req})
		}
		if r%4 == 0 {
			out = append(out, Stack{Frames: []string{Serve, Mux, Handler, Walk, Walk, Query}, Count: int64(1 + r%2), Labels: req})
		}
		if r%4 == 1 {
			out = append(out, Stack{Frames: []string{Serve, Mux, Handler, Walk, Walk, Walk, Query}, Count: 1, Labels: req})
		}
		if r%5 == 0 {
			out = append(out, Stack{Frames: []string{Serve, Mux, HTTP}, Count: 1, Labels: req})
		}
	}
	return out
}

// TB is the part of testing.TB that MustProfile uses.
type TB interface {
	Helper()
	Fatal(args ...any)
}

// MustProfile is Profile for tests: an encoding error fails t.
func MustProfile(t TB, stacks []Stack) []byte {
	t.Helper()
	data, err := Profile(stacks)
	if err != nil {
		t.Fatal(err)
	}
	return data
}
