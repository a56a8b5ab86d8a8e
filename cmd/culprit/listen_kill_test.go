package main

import (
	"bufio"
	"bytes"
	"context"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"
)

// TestListenHelperProcess is `culprit listen` in a child process for
// TestListenSIGKILL; it does nothing in a normal run.
func TestListenHelperProcess(t *testing.T) {
	if os.Getenv("CULPRIT_LISTEN_CHILD") != "1" {
		return
	}
	args := os.Args
	for i, a := range args {
		if a == "--" {
			args = args[i+1:]
			break
		}
	}
	os.Exit(run(args, systemStreams()))
}

// TestListenSIGKILL kills a listener process mid-run: every span it
// acknowledged is in the capture (counted on the sender), and the
// capture reads as an input.
func TestListenSIGKILL(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "capture")
	cmd := exec.Command(os.Args[0], "-test.run=^TestListenHelperProcess$", "--", "listen",
		"--http", "127.0.0.1:0", "--grpc", "", "--dir", dir, "--segment-bytes", "200000")
	cmd.Env = append(os.Environ(), "CULPRIT_LISTEN_CHILD=1")
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	addrRe := regexp.MustCompile(`http://([0-9.:]+)/v1/traces`)
	sc := bufio.NewScanner(stderr)
	var addr string
	for sc.Scan() {
		if m := addrRe.FindStringSubmatch(sc.Text()); m != nil {
			addr = m[1]
			break
		}
	}
	if addr == "" {
		t.Fatal("the child did not say where it listens")
	}
	go func() {
		for sc.Scan() {
		}
	}()

	var mu sync.Mutex
	acked := map[int]bool{} // request sequence numbers answered 200
	var seq atomic.Int64
	var wg sync.WaitGroup
	stop := make(chan struct{})
	for range 4 {
		wg.Go(func() {
			client := &http.Client{Timeout: 5 * time.Second}
			for {
				select {
				case <-stop:
					return
				default:
				}
				n := int(seq.Add(1))
				req, _ := http.NewRequest(http.MethodPost, "http://"+addr+"/v1/traces", bytes.NewReader(marshal(t, testRequest(n, 50, 0))))
				req.Header.Set("Content-Type", mediaProto)
				resp, err := client.Do(req)
				if err != nil {
					continue // killed mid-request: not acknowledged
				}
				resp.Body.Close()
				if resp.StatusCode == http.StatusOK {
					mu.Lock()
					acked[n] = true
					mu.Unlock()
				}
			}
		})
	}
	deadline := time.Now().Add(20 * time.Second)
	for {
		mu.Lock()
		n := len(acked)
		mu.Unlock()
		if n >= 300 || time.Now().After(deadline) {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	cmd.Process.Kill() // SIGKILL, while the senders are still sending
	cmd.Wait()
	close(stop)
	wg.Wait()

	got := captureSpans(t, dir)
	mu.Lock()
	defer mu.Unlock()
	if len(acked) == 0 {
		t.Fatal("nothing was acknowledged")
	}
	for n := range acked {
		for i, sp := range testRequest(n, 50, 0).ResourceSpans[0].ScopeSpans[0].Spans {
			if !got[string(sp.TraceId)+string(sp.SpanId)] {
				t.Fatalf("acknowledged request %d: span %d is not in the capture", n, i)
			}
		}
	}
	t.Logf("%d requests acknowledged, %d spans in the capture", len(acked), len(got))
	if code, _, errOut := runTest(t, "", "rank", dir); code != 0 {
		t.Fatalf("rank of the capture: %s", errOut)
	}
}

// TestListenSIGTERM stops a listener process with SIGTERM: it stores
// what it acknowledged, writes the report and exits 0.
func TestListenSIGTERM(t *testing.T) {
	dir := t.TempDir()
	report := filepath.Join(dir, "rank.json")
	cmd := exec.Command(os.Args[0], "-test.run=^TestListenHelperProcess$", "--", "listen",
		"--http", "127.0.0.1:0", "--grpc", "", "--dir", filepath.Join(dir, "capture"), "--format", "json", "-o", report)
	cmd.Env = append(os.Environ(), "CULPRIT_LISTEN_CHILD=1")
	var stderr syncBuffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	defer cmd.Process.Kill()
	addrRe := regexp.MustCompile(`http://([0-9.:]+)/v1/traces`)
	var addr string
	for range 500 {
		if m := addrRe.FindStringSubmatch(stderr.String()); m != nil {
			addr = m[1]
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	if addr == "" {
		t.Fatalf("the child did not say where it listens: %s", stderr.String())
	}
	for i := range 3 {
		if code, _, body := post(t, addr, mediaProto, "", bytes.NewReader(marshal(t, benchRequest(i, 30)))); code != 200 {
			t.Fatalf("%d %s", code, body)
		}
	}
	cmd.Process.Signal(syscall.SIGTERM)
	if err := cmd.Wait(); err != nil {
		t.Fatalf("exit: %v\n%s", err, stderr.String())
	}
	if !strings.Contains(stderr.String(), "stored 90 spans in 3 requests") {
		t.Errorf("stderr: %s", stderr.String())
	}
	doc := jsonDoc(t, report)
	if causes, _ := doc["rootCauses"].([]any); len(causes) == 0 {
		t.Fatalf("the report has no root causes: %v", doc)
	}
}

// TestListenUsage: addresses other than loopback need --allow-remote; a
// directory holding a capture is not reused.
func TestListenUsage(t *testing.T) {
	if code, _, errOut := runTest(t, "", "listen", "--http", "0.0.0.0:0", "--grpc", ""); code != exitUsage || !strings.Contains(errOut, "--allow-remote") {
		t.Errorf("non-loopback address: exit %d: %s", code, errOut)
	}
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "seg-000001.culprit-capture"), nil, 0o644)
	if code, _, errOut := runTest(t, "", "listen", "--http", "127.0.0.1:0", "--grpc", "", "--dir", dir); code != exitUsage || !strings.Contains(errOut, "already holds a capture") {
		t.Errorf("reused capture directory: exit %d: %s", code, errOut)
	}
}

// A stop by SIGTERM reaches listen twice: through run's context and on
// listen's own channel, in either order. The copy that comes late, while
// the report is written, is the same stop, not a second signal that
// aborts the report.
func TestListenStopSignalArrivingLate(t *testing.T) {
	dir := t.TempDir()
	report := filepath.Join(dir, "rank.json")
	s, _, _ := testStreams("")
	errb := &syncBuffer{}
	s.Err = errb
	sigs := make(chan os.Signal, 2)
	ctx, cancel := context.WithCancelCause(context.Background())
	defer cancel(nil)
	ready := make(chan string, 1)
	cmd := newListenCmd(s, func(ctx context.Context, o *listenOptions) error {
		o.signals = sigs
		o.ready = func(h, _ string) { ready <- h }
		return runListen(ctx, o)
	})
	cmd.SetArgs([]string{"--http", "127.0.0.1:0", "--grpc", "", "--dir", filepath.Join(dir, "capture"), "--format", "json", "-o", report})
	done := make(chan error, 1)
	go func() { done <- cmd.ExecuteContext(ctx) }()
	addr := <-ready
	if code, _, body := post(t, addr, mediaProto, "", bytes.NewReader(marshal(t, benchRequest(0, 30)))); code != 200 {
		t.Fatalf("%d %s", code, body)
	}
	cancel(&signalError{sig: syscall.SIGTERM})
	// The echo arrives once the capture is closed, as the report starts.
	for !strings.Contains(errb.String(), "stored 30 spans") {
		time.Sleep(time.Millisecond)
	}
	sigs <- syscall.SIGTERM
	if err := <-done; err != nil {
		t.Fatalf("listen: %v\n%s", err, errb)
	}
	if causes, _ := jsonDoc(t, report)["rootCauses"].([]any); len(causes) == 0 {
		t.Fatalf("the report has no root causes\n%s", errb)
	}
}
