package attribute

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// closureProgram prints the names runtime.CallersFrames gives its
// closures, one a line, in a fixed order: closures made inside code the
// compiler may inline (a callback passed to an inlinable helper, a closure
// inside it), a deferred closure, a method's closure and a goroutine's.
const closureProgram = `package main

import (
	"fmt"
	"runtime"
)

// caller returns the name of the function that called it.
//
//go:noinline
func caller() string {
	pc := make([]uintptr, 1)
	runtime.Callers(2, pc)
	f, _ := runtime.CallersFrames(pc).Next()
	return f.Function
}

func each(items []int, f func(int)) {
	for _, it := range items {
		f(it)
	}
}

func handler(items []int) (names []string) {
	each(items, func(i int) {
		func() {
			names = append(names, caller())
		}()
	})
	defer func() { names = append(names, caller()) }()
	return names
}

type server struct{ names []string }

func (s *server) serve() {
	get := func() { s.names = append(s.names, caller()) }
	get()
	done := make(chan bool)
	go func() { s.names = append(s.names, caller()); done <- true }()
	<-done
}

func route() []string { return handler([]int{1}) }

func main() {
	for _, n := range route() {
		fmt.Println(n)
	}
	s := &server{}
	s.serve()
	for _, n := range s.names {
		fmt.Println(n)
	}
}
`

// TestIdentityAcrossBuilds builds one program with the Go toolchain twice,
// as is and with inlining off (-gcflags=-l), and reads the names its
// closures get from runtime.CallersFrames in each build (the outside
// reference: the names the real compiler and runtime give). The same
// closure must have the same Identity in both builds, although inlining
// changes its name (main.handler.each.handler.func1.func3 against
// main.handler.func1.1 with go1.26).
func TestIdentityAcrossBuilds(t *testing.T) {
	if testing.Short() {
		t.Skip("builds a program twice")
	}
	goCmd, err := exec.LookPath("go")
	if err != nil {
		t.Skip("the go command is not on PATH")
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte("module closures\n\ngo 1.26\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(closureProgram), 0o644); err != nil {
		t.Fatal(err)
	}
	names := func(flags ...string) []string {
		bin := filepath.Join(dir, "closures"+strings.Join(flags, ""))
		cmd := exec.Command(goCmd, append(append([]string{"build"}, flags...), "-o", bin, ".")...)
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=")
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("go build %v: %v\n%s", flags, err, out)
		}
		out, err := exec.Command(bin).Output()
		if err != nil {
			t.Fatal(err)
		}
		return strings.Fields(string(out))
	}
	inlined, plain := names(), names("-gcflags=-l")
	t.Logf("with inlining: %q", inlined)
	t.Logf("without:       %q", plain)
	want := []string{"main.handler.func*", "main.handler.func*", "main.(*server).serve.func*", "main.(*server).serve.func*"}
	if len(inlined) != len(want) || len(plain) != len(want) {
		t.Fatalf("got %d and %d names, want %d", len(inlined), len(plain), len(want))
	}
	differ := 0
	for i := range want {
		if inlined[i] != plain[i] {
			differ++
		}
		if a, b := Identity(inlined[i]), Identity(plain[i]); a != want[i] || b != want[i] {
			t.Errorf("closure %d: Identity(%q) = %q, Identity(%q) = %q, want both %q", i, inlined[i], a, plain[i], b, want[i])
		}
	}
	if differ == 0 {
		t.Error("this toolchain names every closure alike in both builds: change the program so that inlining changes a name, or the test checks nothing")
	}
}
