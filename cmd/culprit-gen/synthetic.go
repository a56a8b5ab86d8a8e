package main

import (
	"fmt"
	"math/rand/v2"
	"strings"
)

// A synthetic code base shaped like greenhouse, for the large inputs:
// application packages with types and methods, a few closures and generic
// instantiations, HTTP handlers with routes, and background workers.

var (
	synthPackages = []string{
		"catalog", "pricing", "checkout", "reports", "inventory", "search", "accounts", "shipping",
		"notify", "media", "reviews", "wishlist", "promo", "loyalty", "gardenplan", "seeds",
		"orders", "payments", "stock", "internal/cache",
	}
	synthTypes   = []string{"Service", "Repo", "Handler", "Builder", "Cache", "Index", "Planner", "Store", "Client", "Worker"}
	synthMethods = []string{
		"List", "Get", "Find", "Load", "Save", "Build", "Apply", "Render", "Sync", "Resolve",
		"Score", "Merge", "Filter", "Expand", "Validate", "Compute", "Fetch", "Update", "Plan", "Match",
	}
)

// synthFn is a function of the synthetic code base.
type synthFn struct {
	def *fnDef
	idx int
}

// codebase is the synthetic application.
type codebase struct {
	funcs    []synthFn
	handlers []synthHandler
	workers  []synthFn
	// library frames that may sit between application frames
	interludes [][]frame
}

type synthHandler struct {
	fn    synthFn
	route string
}

// newCodebase makes a code base of about perPackage functions per package.
func newCodebase(r *rand.Rand, perPackage int) *codebase {
	cb := &codebase{}
	add := func(name, file string) synthFn {
		f := synthFn{def: &fnDef{name: name, file: file, start: int64(between(r, 18, 900))}, idx: len(cb.funcs)}
		cb.funcs = append(cb.funcs, f)
		return f
	}
	for _, pkg := range synthPackages {
		seen := map[string]bool{}
		for len(seen) < perPackage {
			typ := synthTypes[r.IntN(len(synthTypes))]
			m := synthMethods[r.IntN(len(synthMethods))]
			name := fmt.Sprintf("%s/%s.(*%s).%s", appModule, pkg, typ, m)
			switch x := r.IntN(20); {
			case x == 0:
				name += ".func1"
			case x == 1:
				name = fmt.Sprintf("%s/%s.%s%s[go.shape.int,go.shape.string]", appModule, pkg, m, typ)
			case x == 2:
				name = fmt.Sprintf("%s/%s.%s.func%d.1", appModule, pkg, strings.ToLower(m[:1])+m[1:], 1+r.IntN(3))
			}
			if seen[name] {
				continue
			}
			seen[name] = true
			add(name, appDir+pkg+"/"+strings.ToLower(typ)+".go")
		}
	}
	for i, pkg := range synthPackages[:16] {
		m := synthMethods[i]
		h := add(fmt.Sprintf("main.(*server).handle%s%s", strings.ToUpper(pkg[:1])+pkg[1:], m), appDir+"handlers.go")
		cb.handlers = append(cb.handlers, synthHandler{fn: h, route: "/" + pkg + "/" + strings.ToLower(m)})
	}
	for _, pkg := range []string{"inventory", "notify", "search", "reports"} {
		cb.workers = append(cb.workers, add(fmt.Sprintf("%s/%s.(*Worker).Run", appModule, pkg), appDir+pkg+"/worker.go"))
	}
	retry := &fnDef{"github.com/tillerlabs/retry.Do", modCache + "github.com/tillerlabs/retry@v1.1.0/retry.go", 40}
	retryF := &fnDef{"github.com/tillerlabs/retry.Do.func1", modCache + "github.com/tillerlabs/retry@v1.1.0/retry.go", 52}
	once := stdFn("sync.(*Once).Do", "sync/once.go", 62)
	onceSlow := stdFn("sync.(*Once).doSlow", "sync/once.go", 73)
	call := stdFn("reflect.Value.Call", "reflect/value.go", 365)
	call2 := stdFn("reflect.Value.call", "reflect/value.go", 433)
	cb.interludes = [][]frame{
		fr(retry.at(58), retryF.at(53)),
		fr(once.inl(68), onceSlow.at(78)),
		fr(call.at(368), call2.at(581)),
		fr(sortSlice.at(27), sortPdq.at(70), sortInsertion.at(15)),
	}
	return cb
}

// callLine returns the line in f that calls a callee identified by key. It is
// a fixed function of both, as in real code.
func (f synthFn) callLine(key int) int64 {
	return f.def.start + 2 + int64((f.idx*7919+key*104729)%97)
}
