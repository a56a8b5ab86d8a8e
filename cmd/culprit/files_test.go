//go:build unix

package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// demoProfile writes the demo's CPU profile into dir and returns its path.
func demoProfile(t *testing.T, dir string) string {
	t.Helper()
	data, err := demoData.ReadFile("demo/greenhouse-v42.cpu.pb.gz")
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "cpu.pb.gz")
	if err := os.WriteFile(p, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestSpecialOutputTargets is the attack of issue 13 item 7: -o and --save
// to a character device, a FIFO and a directory. The kernel's own file
// types are the reference: the device and the FIFO must still be what
// they were (stat(2) mode bits) and must receive the report.
func TestSpecialOutputTargets(t *testing.T) {
	dir := t.TempDir()
	profile := demoProfile(t, dir)

	// A character device: /dev/null stays a device (the attack, as root,
	// turned it into a regular file).
	for _, flag := range []string{"-o", "--save"} {
		code, _, errOut := runTest(t, "", "rank", profile, flag, os.DevNull)
		if code != exitOK {
			t.Fatalf("%s /dev/null: exit %d: %s", flag, code, errOut)
		}
		if st, err := os.Stat(os.DevNull); err != nil || st.Mode()&os.ModeCharDevice == 0 {
			t.Fatalf("%s /dev/null: it is no longer a character device (%v, %v)", flag, st.Mode(), err)
		}
	}

	// A FIFO: the report arrives through it and the FIFO stays a FIFO.
	fifo := filepath.Join(dir, "pipe")
	if err := syscall.Mkfifo(fifo, 0o600); err != nil {
		t.Skip("no FIFOs here:", err)
	}
	got := make(chan string, 1)
	go func() {
		b, _ := os.ReadFile(fifo) // opens when the writer opens
		got <- string(b)
	}()
	if code, _, errOut := runTest(t, "", "rank", profile, "--format", "csv", "-o", fifo); code != exitOK {
		t.Fatalf("-o FIFO: exit %d: %s", code, errOut)
	}
	if report := <-got; !strings.Contains(report, "catalog.(*Repo).VarietyByID") {
		t.Errorf("the FIFO did not carry the report: %.200q", report)
	}
	if st, err := os.Lstat(fifo); err != nil || st.Mode()&os.ModeNamedPipe == 0 {
		t.Errorf("the FIFO was replaced: %v, %v", st.Mode(), err)
	}

	// A descriptor the shell opened on a regular file (/dev/stdout after
	// '>>'): the report is appended through it, the file not replaced.
	logf, err := os.OpenFile(filepath.Join(dir, "log"), os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	defer logf.Close()
	logf.WriteString("before\n")
	if code, _, errOut := runTest(t, "", "rank", profile, "--format", "csv", "-o", fmt.Sprintf("/dev/fd/%d", logf.Fd())); code != exitOK {
		t.Fatalf("-o /dev/fd/N: exit %d: %s", code, errOut)
	}
	if b, _ := os.ReadFile(logf.Name()); !strings.HasPrefix(string(b), "before\nrank,") {
		t.Errorf("/dev/fd/N: the file holds %.60q, want the earlier line and the report after it", b)
	}

	// A directory is refused with a clear error and left as it was.
	code, _, errOut := runTest(t, "", "rank", profile, "-o", dir)
	if code != exitUsage || !strings.Contains(errOut, "is a directory") {
		t.Errorf("-o DIR: exit %d, %q", code, errOut)
	}
	if left := tempFiles(t, dir); len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// tempFiles lists the culprit temporaries (".NAME.tmp-*") below dir.
func tempFiles(t *testing.T, dir string) []string {
	t.Helper()
	var out []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && strings.Contains(d.Name(), ".tmp-") {
			out = append(out, p)
		}
		return nil
	})
	return out
}

// TestInputsAreSacred is issue 13 item 8: an input found inside an input
// directory, or reached through a symbolic link, is never written over;
// and a failed report leaves no new snapshot.
func TestInputsAreSacred(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "profiles")
	os.Mkdir(in, 0o755)
	profile := demoProfile(t, in)
	data, _ := os.ReadFile(profile)
	rules := filepath.Join(dir, "rules.json")
	os.WriteFile(rules, []byte(`{"rules":[]}`), 0o644)
	link := filepath.Join(dir, "link.pb.gz")
	if err := os.Symlink(profile, link); err != nil {
		t.Fatal(err)
	}
	for _, tc := range [][]string{
		{"rank", in, "-o", profile},     // found inside the directory
		{"rank", in, "--save", profile}, // the snapshot too
		{"rank", link, "-o", profile},   // the file a link names
		{"rank", profile, "-o", link},   // a link to the input
		{"rank", in, "-o", filepath.Join(dir, "x"), "--save", filepath.Join(dir, "x")}, // one file for both
		{"rank", in, "--rules", rules, "-o", rules},                                    // the rules file
	} {
		code, _, errOut := runTest(t, "", tc...)
		if code != exitUsage || !strings.Contains(errOut, "refusing to write") && !strings.Contains(errOut, "same file") {
			t.Errorf("%v: exit %d, %q", tc, code, errOut)
		}
		if after, _ := os.ReadFile(profile); string(after) != string(data) {
			t.Fatalf("%v: the input was changed", tc)
		}
	}

	// The report fails (its directory does not exist): no snapshot.
	snap := filepath.Join(dir, "run.snapshot.json")
	code, _, errOut := runTest(t, "", "rank", in, "--save", snap, "-o", filepath.Join(dir, "missing", "r.txt"))
	if code != exitError {
		t.Errorf("report into a missing directory: exit %d, %q", code, errOut)
	}
	if _, err := os.Stat(snap); err == nil {
		t.Error("a failed report left a new snapshot")
	}
	// The snapshot fails: no report.
	report := filepath.Join(dir, "r.txt")
	code, _, errOut = runTest(t, "", "rank", in, "--save", filepath.Join(dir, "missing", "s.json"), "-o", report)
	if code != exitError || !strings.Contains(errOut, "writing snapshot") {
		t.Errorf("snapshot into a missing directory: exit %d, %q", code, errOut)
	}
	if _, err := os.Stat(report); err == nil {
		t.Error("a failed snapshot left a new report")
	}
	// Both succeed together.
	if code, _, errOut := runTest(t, "", "rank", in, "--save", snap, "-o", report); code != exitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, p := range []string{snap, report} {
		if _, err := os.Stat(p); err != nil {
			t.Error(err)
		}
	}
	if left := tempFiles(t, dir); len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// TestSymlinkedInputs is issue 13 item 12's links: a directory argument
// that is a symbolic link is read, links inside are followed once, and a
// loop (a link to an ancestor) neither hangs nor reads a file twice.
func TestSymlinkedInputs(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join(dir, "real")
	os.MkdirAll(filepath.Join(real, "sub"), 0o755)
	demoProfile(t, real)
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(os.Symlink(real, filepath.Join(dir, "dirlink")))
	must(os.Symlink("..", filepath.Join(real, "sub", "loop")))                 // a loop
	must(os.Symlink("../cpu.pb.gz", filepath.Join(real, "sub", "same.pb.gz"))) // the same file again
	files, err := expandInputs([]string{filepath.Join(dir, "dirlink")})
	if err != nil {
		t.Fatal(err)
	}
	if len(files) != 1 || !strings.HasSuffix(files[0], "cpu.pb.gz") {
		t.Errorf("expanded to %v, want the one profile once", files)
	}
	code, out, errOut := runTest(t, "", "rank", filepath.Join(dir, "dirlink"), "--format", "csv")
	if code != exitOK || !strings.Contains(out, "catalog.(*Repo).VarietyByID") {
		t.Errorf("symlinked directory: exit %d, %s", code, errOut)
	}
	must(os.Symlink("nowhere", filepath.Join(real, "broken")))
	if _, err := expandInputs([]string{real}); err == nil || !strings.Contains(err.Error(), "broken symbolic link") {
		t.Errorf("broken link: %v", err)
	}
}

// TestManyInputFiles is issue 13 item 11: 1,100 profiles in one directory
// read under a descriptor limit of 256 (each input is closed when read;
// the attack failed at the default limit with every input held open).
// The limit is set by prlimit(2) on a child process: the kernel enforces
// it.
func TestManyInputFiles(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary")
	}
	bin := buildCulprit(t)
	dir := t.TempDir()
	data, _ := demoData.ReadFile("demo/greenhouse-v42.goroutine.1.pb.gz")
	for i := range 1100 {
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("g%04d.pb.gz", i)), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	cmd := limitedCommand(bin, 256, "rank", dir, "--format", "csv", "--limit", "1")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("%v: %s", err, out)
	}
	if !strings.Contains(string(out), "samples") && !strings.Contains(string(out), "function") {
		t.Errorf("unexpected output: %.300s", out)
	}
}
