package main

import (
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"github.com/google/pprof/profile"
)

// bigProfileOptions are the flags of the profile command.
type bigProfileOptions struct {
	samples int64 // total sample count (sum of samples/count)
	stacks  int   // distinct stacks, one pprof Sample each
	seed    uint64
}

const (
	bigMinDepth = 10
	bigMaxDepth = 40
)

// bigProfile makes a CPU-like profile of the synthetic code base: o.stacks
// distinct stacks of depth 10–40 whose sample counts add up to o.samples
// and follow a heavy-tailed (Pareto) distribution, every stack at least one.
func bigProfile(o bigProfileOptions) (*profile.Profile, error) {
	if o.stacks < 1 || o.samples < int64(o.stacks) {
		return nil, fmt.Errorf("need samples (%d) ≥ stacks (%d) ≥ 1", o.samples, o.stacks)
	}
	r := newRand(o.seed, "profile")
	cb := newCodebase(r, 30)
	tails := bigTails()

	type stackRoute struct {
		stack []frame
		route string
	}
	stacks := make([]stackRoute, 0, o.stacks)
	seen := make(map[[16]byte]bool, o.stacks)
	for attempts := 0; len(stacks) < o.stacks; attempts++ {
		if attempts > 50*o.stacks+1000 {
			return nil, fmt.Errorf("could only make %d distinct stacks of %d", len(stacks), o.stacks)
		}
		s, route := bigStack(r, cb, tails)
		k := stackHash(s, route)
		if seen[k] {
			continue
		}
		seen[k] = true
		stacks = append(stacks, stackRoute{s, route})
	}

	// Heavy-tailed weights; every stack gets 1, the rest is shared in
	// proportion to the weights with the largest-remainder method, so the
	// total is exact.
	weights := make([]float64, len(stacks))
	sum := 0.0
	for i := range weights {
		weights[i] = math.Pow(1-r.Float64(), -1/1.2) // Pareto, shape 1.2
		sum += weights[i]
	}
	rest := o.samples - int64(len(stacks))
	counts := make([]int64, len(stacks))
	rems := make([]float64, len(stacks))
	var given int64
	for i, w := range weights {
		share := float64(rest) * w / sum
		counts[i] = 1 + int64(share)
		rems[i] = share - math.Floor(share)
		given += int64(share)
	}
	order := make([]int, len(stacks))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		switch {
		case rems[a] > rems[b]:
			return -1
		case rems[a] < rems[b]:
			return 1
		}
		return 0
	})
	for i := int64(0); i < rest-given; i++ {
		counts[order[i%int64(len(order))]]++
	}

	p := &profile.Profile{
		SampleType: []*profile.ValueType{
			{Type: "samples", Unit: "count"},
			{Type: "cpu", Unit: "nanoseconds"},
		},
		PeriodType:    &profile.ValueType{Type: "cpu", Unit: "nanoseconds"},
		Period:        int64(cpuPeriod),
		TimeNanos:     time.Date(2026, 6, 3, 12, 0, 0, 0, time.UTC).UnixNano(),
		DurationNanos: int64(time.Minute),
	}
	pb := newProfileBuilder(p, demoExecutable, buildID(buildCandidate))
	for i, s := range stacks {
		pb.add(s.stack, []int64{counts[i], counts[i] * int64(cpuPeriod)}, s.route)
	}
	return p, nil
}

// bigTail is one kind of leaf fragment below the application.
type bigTail struct {
	w      int
	frames [][]frame
}

func bigTails() []bigTail {
	gcAssist := fr(rtMallocgc.at(1065), stdFn("runtime.deductAssistCredit", "runtime/malloc.go", 1685).at(1701),
		stdFn("runtime.gcAssistAlloc", "runtime/mgcmark.go", 415).at(510), rtSystemstack.at(514),
		stdFn("runtime.gcAssistAlloc.func1", "runtime/mgcmark.go", 510).at(511),
		stdFn("runtime.gcAssistAlloc1", "runtime/mgcmark.go", 533).at(633),
		stdFn("runtime.gcDrainN", "runtime/mgcmark.go", 1283).at(1330), rtScanobject.at(1446))
	var dbCPU [][]frame
	dbCPU = append(dbCPU, dbQueryCPU(false)...)
	dbCPU = append(dbCPU, dbQueryCPU(true)...)
	dbCPU = append(dbCPU, dbExecCPU...)
	dbCPU = append(dbCPU, dbNextCPU...)
	dbCPU = append(dbCPU, dbScanCPU...)
	httpTLS := fr(httpClientDo.at(590), httpClientDo2.at(725), httpClientSend.at(177), httpSend.at(259),
		httpRoundTrip.at(33), httpRoundTrip2.at(603), httpHeaderClone.at(102), rtMallocgc.at(1096))
	tls := fr(tlsWrite.at(1210), tlsWriteRec.at(1041), tlsEncrypt.at(538), tlsGCMSeal.at(85))
	return []bigTail{
		{w: 40, frames: append(slices.Clone(cpuLeaves), gcAssist)},
		{w: 30, frames: dbCPU},
		{w: 10, frames: append(slices.Clone(httpCPU), httpTLS, tls)},
		{w: 10, frames: append(slices.Clone(renderCPU), append(slices.Clone(jsonEncodeCPU), jsonDecodeCPU...)...)},
		{w: 10, frames: nil}, // the application function itself is on CPU
	}
}

// bigStack makes one random stack: an entry (HTTP request or background
// worker), a chain of application frames with an occasional library
// interlude or recursion, and a leaf fragment, 10–40 frames in all.
func bigStack(rr *rand.Rand, cb *codebase, tails []bigTail) ([]frame, string) {
	for {
		var entry []frame
		route := ""
		var top synthFn
		if rr.IntN(100) < 82 {
			h := cb.handlers[rr.IntN(len(cb.handlers))]
			entry = chain(serverRoot, fr(sessMiddleware.at(52)), toHandler)
			top, route = h.fn, h.route
		} else {
			top = cb.workers[rr.IntN(len(cb.workers))]
			entry = fr(appWorkersWrap.at(62))
		}
		ws := make([]int, len(tails))
		for i, t := range tails {
			ws[i] = t.w
		}
		ti := pick(rr, ws)
		var leaf []frame
		if tails[ti].frames != nil {
			leaf = tails[ti].frames[rr.IntN(len(tails[ti].frames))]
		}
		target := bigMinDepth + rr.IntN(bigMaxDepth-bigMinDepth+1)
		appN := target - len(entry) - len(leaf)
		if appN < 1 {
			appN = 1
		}
		if len(entry)+appN+len(leaf) > bigMaxDepth {
			continue
		}
		// Application chain, possibly with interludes and recursion.
		app := []synthFn{top}
		var libs [][]frame // library frames before app[i]
		libs = append(libs, nil)
		recursive := rr.IntN(100) < 5
		for len(app) < appN {
			f := cb.funcs[rr.IntN(len(cb.funcs))]
			if recursive && len(app) > 1 && rr.IntN(3) > 0 {
				f = app[len(app)-1]
			}
			var lib []frame
			if rr.IntN(100) < 12 {
				lib = cb.interludes[rr.IntN(len(cb.interludes))]
				if len(entry)+len(app)+len(lib)+1+len(leaf)+countFrames(libs) > bigMaxDepth {
					lib = nil
				}
			}
			if len(entry)+countFrames(libs)+len(app)+len(lib)+1+len(leaf) > bigMaxDepth {
				break
			}
			app = append(app, f)
			libs = append(libs, lib)
		}
		s := make([]frame, 0, bigMaxDepth)
		s = append(s, entry...)
		for i, f := range app {
			if i > 0 {
				s[len(s)-1].line = app[i-1].callLine(f.idx)
				s = append(s, libs[i]...)
			}
			s = append(s, f.def.at(f.def.start))
		}
		if leaf != nil {
			s[len(s)-1].line = app[len(app)-1].callLine(1_000_000 + ti)
			s = append(s, leaf...)
		} else {
			s[len(s)-1].line = app[len(app)-1].def.start + 1 + int64(rr.IntN(60))
		}
		if len(s) < bigMinDepth || len(s) > bigMaxDepth {
			continue
		}
		return s, route
	}
}

func countFrames(parts [][]frame) int {
	n := 0
	for _, p := range parts {
		n += len(p)
	}
	return n
}

// stackHash identifies a stack and route by a 128-bit FNV-1a hash.
func stackHash(s []frame, route string) [16]byte {
	h := fnv.New128a()
	for _, f := range s {
		h.Write([]byte(f.fn.name))
		var b [9]byte
		for i := 0; i < 8; i++ {
			b[i] = byte(f.line >> (8 * i))
		}
		if f.inl {
			b[8] = 1
		}
		h.Write(b[:])
	}
	h.Write([]byte(route))
	var k [16]byte
	h.Sum(k[:0])
	return k
}
