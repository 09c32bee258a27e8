package influx

import (
	"bytes"
	"context"
	"errors"
	"io"
	"log/slog"
	"math"
	"net/http"
	"net/http/httptest"
	"net/http/httputil"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/sinks"
	"github.com/exergywatch/exergywatch/sinks/vmtest"
)

func testLogger(t *testing.T) *slog.Logger {
	if testing.Verbose() {
		return slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelDebug}))
	}
	return slog.New(slog.NewTextHandler(io.Discard, nil))
}

func testConfig(url, spool string) Config {
	return Config{
		URL: url, Org: "exergywatch", Bucket: "test", SpoolDir: spool,
		BatchPoints: 500, FlushInterval: 50 * time.Millisecond, RetryInitial: 20 * time.Millisecond, RetryMax: 200 * time.Millisecond, DirectAttempts: 2,
		RequestTimeout: 2 * time.Second, SpoolSegmentBytes: 64 << 10, SpoolMaxBytes: 64 << 20,
	}
}

// flushAll calls Flush until nothing is left or the deadline passes.
func flushAll(t *testing.T, s *Sink, within time.Duration) {
	t.Helper()
	deadline := time.Now().Add(within)
	var err error
	for time.Now().Before(deadline) {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		err = s.Flush(ctx)
		cancel()
		if err == nil {
			return
		}
		time.Sleep(50 * time.Millisecond)
	}
	t.Fatalf("sink did not drain within %v: %v (stats %+v)", within, err, s.Stats())
}

// TestVMWriteReadBack writes records and events to a real VictoriaMetrics
// and reads every point back: values, millisecond timestamps and labels.
func TestVMWriteReadBack(t *testing.T) {
	vm := vmtest.StartServer(t)
	s, err := New("vm", testConfig(vm.URL, t.TempDir()), testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := s.Ping(ctx); err != nil {
		t.Fatalf("ping: %v", err)
	}
	want := map[string][]sample{}
	const machines, steps = 4, 150
	for k := 0; k < steps; k++ {
		for m := 0; m < machines; m++ {
			r := testRecord(m, k)
			if err := s.WriteRecord(ctx, r); err != nil {
				t.Fatalf("write: %v", err)
			}
			expectRecord(want, r)
		}
	}
	// an invalid record (NaN in a Good figure) is rejected, counted, and
	// nothing of it reaches the server
	badRec := testRecord(0, steps+1)
	badRec.Machine = "nan_machine"
	badRec.Figures[0].Value = math.NaN()
	if err := s.WriteRecord(ctx, badRec); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("NaN record: err %v, want ErrInvalid", err)
	}
	infRec := testRecord(0, steps+2)
	infRec.Machine = "inf_machine"
	infRec.Figures[1].U95 = math.Inf(1)
	if err := s.WriteRecord(ctx, infRec); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("Inf U95 record: err %v, want ErrInvalid", err)
	}
	// alert events
	ev := compute.Event{Time: t0.Add(42 * time.Second), Site: "north plant", Machine: "m1", Rule: "eff_drop", Class: compute.AlertPerformance,
		Figure: "isentropic_efficiency", From: compute.AlertPending, To: compute.AlertFiring, Value: 0.781, Limit: 0.79, U95: 0.01,
		Since: t0.Add(12 * time.Second), Reason: "efficiency 2 points below baseline"}
	if err := s.WriteEvent(ctx, ev); err != nil {
		t.Fatal(err)
	}
	evLab := func(name string) string {
		return vmtest.Series{Metric: map[string]string{"__name__": name, "site": "north plant", "machine": "m1", "rule": "eff_drop",
			"class": "performance", "figure": "isentropic_efficiency"}}.Key()
	}
	evMS := ev.Time.UnixMilli()
	want[evLab("exw_alert_state_code")] = []sample{{evMS, 2}}      // AlertFiring = 2 (compute/record.go)
	want[evLab("exw_alert_from_state_code")] = []sample{{evMS, 1}} // AlertPending = 1
	want[evLab("exw_alert_value")] = []sample{{evMS, 0.781}}
	want[evLab("exw_alert_limit")] = []sample{{evMS, 0.79}}
	want[evLab("exw_alert_value_u95")] = []sample{{evMS, 0.01}}
	want[evLab("exw_alert_condition_age_s")] = []sample{{evMS, 30}}
	nanEv := ev
	nanEv.Value = math.NaN()
	if err := s.WriteEvent(ctx, nanEv); !errors.Is(err, sinks.ErrInvalid) {
		t.Errorf("NaN event: err %v, want ErrInvalid", err)
	}

	flushAll(t, s, 20*time.Second)
	vm.ForceFlush(t)
	got := vm.Export(t, `{__name__=~"exw_.*"}`)
	compareExport(t, got, want)

	st := s.Stats()
	var points uint64
	for _, w := range want {
		points += uint64(len(w))
	}
	t.Logf("stats %+v; expected samples %d", st, points)
	if st.Rejected != 3 || st.Dropped != 0 || st.SpooledItems != 0 {
		t.Errorf("stats %+v: want 3 rejected, 0 dropped, empty spool", st)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatalf("second close: %v", err)
	}
	if err := s.WriteRecord(ctx, testRecord(0, 1)); !errors.Is(err, sinks.ErrClosed) {
		t.Errorf("write after close: %v, want ErrClosed", err)
	}
}

// recorder is a reverse proxy in front of the real server that keeps the
// bodies of the writes the server acknowledged, in arrival order, so the test
// can check the delivery order. It also lets a test force an HTTP status.
type recorder struct {
	mu     sync.Mutex
	bodies [][]byte
	force  int // status to answer instead of forwarding, 0 = forward
	proxy  *httputil.ReverseProxy
}

func newRecorder(t *testing.T, target string) (*recorder, string) {
	u, err := url.Parse(target)
	if err != nil {
		t.Fatal(err)
	}
	rec := &recorder{proxy: httputil.NewSingleHostReverseProxy(u)}
	rec.proxy.ErrorLog = nil
	srv := httptest.NewServer(rec)
	t.Cleanup(srv.Close)
	return rec, srv.URL
}

func (rec *recorder) setForce(code int) {
	rec.mu.Lock()
	rec.force = code
	rec.mu.Unlock()
}

func (rec *recorder) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	rec.mu.Lock()
	force := rec.force
	rec.mu.Unlock()
	if force != 0 && r.URL.Path == "/api/v2/write" {
		w.Header().Set("Content-Type", "application/json")
		w.WriteHeader(force)
		_, _ = io.WriteString(w, `{"code":"forced","message":"forced by test"}`)
		return
	}
	body, _ := io.ReadAll(r.Body)
	r.Body = io.NopCloser(bytes.NewReader(body))
	sw := &statusWriter{ResponseWriter: w}
	rec.proxy.ServeHTTP(sw, r)
	if r.URL.Path == "/api/v2/write" && sw.code/100 == 2 {
		rec.mu.Lock()
		rec.bodies = append(rec.bodies, body)
		rec.mu.Unlock()
	}
}

type statusWriter struct {
	http.ResponseWriter
	code int
}

func (w *statusWriter) WriteHeader(c int) { w.code = c; w.ResponseWriter.WriteHeader(c) }
func (w *statusWriter) Write(b []byte) (int, error) {
	if w.code == 0 {
		w.code = 200
	}
	return w.ResponseWriter.Write(b)
}

// acknowledgedOrder checks that, per series (measurement and tags), the
// acknowledged points arrived in strictly increasing time, i.e. in order and
// never twice.
func (rec *recorder) acknowledgedOrder(t *testing.T) int {
	t.Helper()
	rec.mu.Lock()
	defer rec.mu.Unlock()
	last := map[string]int64{}
	n := 0
	for _, b := range rec.bodies {
		for _, line := range bytes.Split(b, []byte{'\n'}) {
			if len(line) == 0 {
				continue
			}
			p, err := parseLine(line)
			if err != nil {
				t.Fatalf("server got a line we cannot parse: %q: %v", line, err)
			}
			key := string(line[:bytes.IndexByte(line, ' ')])
			if prev, ok := last[key]; ok && p.ms <= prev {
				t.Fatalf("series %s: point at %d ms arrived after %d ms (out of order or duplicate)", key, p.ms, prev)
			}
			last[key] = p.ms
			n++
		}
	}
	return n
}

// TestVMOutageNoLoss stops the real server in the middle of a stream, keeps
// writing, restarts the sink process-wise (close and reopen on the same spool
// directory) during the outage, restarts the server, and checks that every
// point arrives exactly once and, per series, in order.
//
// Compressed clock: a 10-minute outage at one evaluation per second for 5
// machines is 3000 records; the test writes exactly those 3000 records while
// the server is down (timestamps 1 s apart), which is what the spool has to
// hold regardless of how long the outage lasts on the wall clock.
func TestVMOutageNoLoss(t *testing.T) {
	vm := vmtest.StartServer(t)
	rec, proxyURL := newRecorder(t, vm.URL)
	spoolDir := t.TempDir()
	cfg := testConfig(proxyURL, spoolDir)
	s, err := New("vm", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	want := map[string][]sample{}
	const machines = 5
	k := 0
	write := func(steps int) {
		for end := k + steps; k < end; k++ {
			for m := 0; m < machines; m++ {
				r := testRecord(m, k)
				if err := s.WriteRecord(ctx, r); err != nil {
					t.Fatalf("write step %d: %v", k, err)
				}
				expectRecord(want, r)
			}
		}
	}
	write(100) // server up
	flushAll(t, s, 10*time.Second)

	vm.Stop() // outage starts
	write(300)
	// the daemon restarts during the outage: what it held goes to the spool
	cctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	if err := s.Close(cctx); err != nil {
		t.Fatal(err)
	}
	cancel()
	mid := s.Stats()
	if mid.SpooledItems == 0 {
		t.Fatalf("nothing spooled during the outage: %+v", mid)
	}
	s, err = New("vm", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	write(300) // 600 steps x 5 machines = 3000 records during the outage
	time.Sleep(2 * time.Second)
	if st := s.Stats(); st.SpooledItems == 0 || st.Dropped != 0 {
		t.Fatalf("during outage: %+v, want points in the spool and none dropped", st)
	}
	t.Logf("spool during outage: %d points, %d bytes", s.Stats().SpooledItems, s.Stats().SpooledBytes)
	vm.Restart() // outage ends
	write(100)
	flushAll(t, s, 60*time.Second)
	vm.ForceFlush(t)
	compareExport(t, vm.Export(t, `{__name__=~"exw_.*"}`), want)
	n := rec.acknowledgedOrder(t)
	var total int
	for _, w := range want {
		total += len(w)
	}
	t.Logf("acknowledged lines %d, expected samples %d, final stats %+v", n, total, s.Stats())
	if st := s.Stats(); st.Dropped != 0 || st.Rejected != 0 {
		t.Errorf("stats %+v: want nothing dropped or rejected", st)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	ents, _ := os.ReadDir(spoolDir)
	var names []string
	for _, e := range ents {
		if e.Name() != "lock" {
			names = append(names, e.Name())
		}
	}
	if len(names) != 0 {
		t.Errorf("spool not empty after replay: %v", names)
	}
}

// TestVMErrorClasses drives the sink through forced HTTP answers in front of
// the real server: 503 and 429 keep the data (retry, spool, replay), 401
// keeps it too (configuration error), 400 drops the batch and counts it.
func TestVMErrorClasses(t *testing.T) {
	vm := vmtest.StartServer(t)
	rec, proxyURL := newRecorder(t, vm.URL)
	s, err := New("vm", testConfig(proxyURL, t.TempDir()), testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close(context.Background())
	ctx := context.Background()
	want := map[string][]sample{}
	k := 0
	for _, code := range []int{503, 429, 401} {
		rec.setForce(code)
		for end := k + 20; k < end; k++ {
			r := testRecord(0, k)
			if err := s.WriteRecord(ctx, r); err != nil {
				t.Fatal(err)
			}
			expectRecord(want, r)
		}
		deadline := time.Now().Add(10 * time.Second)
		for s.Stats().SpooledItems == 0 && time.Now().Before(deadline) {
			time.Sleep(10 * time.Millisecond)
		}
		if st := s.Stats(); st.SpooledItems == 0 || st.Dropped != 0 {
			t.Fatalf("status %d: stats %+v, want spooled and nothing dropped", code, st)
		}
	}
	rec.setForce(0)
	flushAll(t, s, 10*time.Second)
	// 400: the server refuses the data; the batch is dropped and counted
	rec.setForce(400)
	if err := s.WriteRecord(ctx, testRecord(0, k)); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(5 * time.Second)
	for s.Stats().Dropped == 0 && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	if st := s.Stats(); st.Dropped == 0 || st.SpooledItems != 0 {
		t.Errorf("status 400: stats %+v, want the batch dropped (counted) and not spooled", st)
	}
	rec.setForce(0)
	vm.ForceFlush(t)
	compareExport(t, vm.Export(t, `{__name__=~"exw_.*"}`), want)
	rec.acknowledgedOrder(t)
}

// BenchmarkVMThroughput writes records through the sink into a real
// VictoriaMetrics and waits until all are acknowledged; ns/op is per record
// (three figures, about 1.4 points per record on average).
func BenchmarkVMThroughput(b *testing.B) {
	vm := vmtest.StartServer(b)
	cfg := testConfig(vm.URL, b.TempDir())
	cfg.BatchPoints, cfg.MaxQueuedPoints, cfg.FlushInterval = 5000, 200000, 200*time.Millisecond
	s, err := New("vm", cfg, slog.New(slog.NewTextHandler(io.Discard, nil)))
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close(context.Background())
	ctx := context.Background()
	b.ReportAllocs()
	k := 0
	for b.Loop() {
		if err := s.WriteRecord(ctx, testRecord(k%20, k/20)); err != nil {
			b.Fatal(err)
		}
		k++
	}
	if err := s.Flush(ctx); err != nil {
		b.Fatal(err)
	}
	if st := s.Stats(); st.Dropped != 0 || st.SpooledItems != 0 {
		b.Fatalf("stats %+v", st)
	}
}

// A crash in the middle of a spool append leaves a torn last line. The next
// start cuts and counts it, and delivers every complete point to the real
// server.
func TestVMReplayAfterCrash(t *testing.T) {
	vm := vmtest.StartServer(t)
	spoolDir := t.TempDir()
	// first run: the database is unreachable (dead address), all spooled
	cfg := testConfig("http://127.0.0.1:1", spoolDir)
	s, err := New("vm", cfg, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	want := map[string][]sample{}
	for k := 0; k < 200; k++ {
		r := testRecord(2, k)
		if err := s.WriteRecord(ctx, r); err != nil {
			t.Fatal(err)
		}
		expectRecord(want, r)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	// the crash: half a line at the end of the newest segment
	ents, _ := os.ReadDir(spoolDir)
	var last string
	for _, e := range ents {
		if strings.HasSuffix(e.Name(), ".lp") {
			last = e.Name()
		}
	}
	if last == "" {
		t.Fatal("nothing spooled")
	}
	f, err := os.OpenFile(filepath.Join(spoolDir, last), os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.WriteString("exw_machine,kind=pump,machine=m2,quality=good,site=north\\ plant quality_code=0i,isentropic_effic"); err != nil {
		t.Fatal(err)
	}
	f.Close()
	// second run: the database is there
	s, err = New("vm", testConfig(vm.URL, spoolDir), testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	flushAll(t, s, 20*time.Second)
	if torn, corrupt := s.SpoolHealth(); torn != 1 || corrupt != 0 {
		t.Errorf("torn %d corrupt %d, want 1 and 0", torn, corrupt)
	}
	if err := s.Close(ctx); err != nil {
		t.Fatal(err)
	}
	vm.ForceFlush(t)
	compareExport(t, vm.Export(t, `{__name__=~"exw_.*"}`), want)
}
