package main

import (
	"bufio"
	"bytes"
	"context"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/cmd/exergywatch/internal/plantsim"
	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/config/units"
	"github.com/exergywatch/exergywatch/ingest"
	"github.com/exergywatch/exergywatch/ingest/align"
	"github.com/exergywatch/exergywatch/sinks/store"
	"github.com/exergywatch/exergywatch/sinks/vmtest"
	"github.com/exergywatch/exergywatch/thermo/fluids"
)

var updateReplay = flag.Bool("update-replay", false, "regenerate testdata/replay/quillmoor-4min.csv with the simulator")

// The committed input: 4 minutes of the demo plant (scenario demo, seed 7,
// one reading per tag per second from replayStart), written by
//
//	exergywatch simulate --out testdata/replay/quillmoor-4min.csv --duration 4m --rate 1s --start 2026-06-01T00:00:00Z
const replayCSV = "testdata/replay/quillmoor-4min.csv"

var replayStart = time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)

// The committed file must be the simulator's output. plantsim draws its
// noise in map-iteration order (Plant.Step ranges over a map), so two runs
// with the same seed give the same tags and times but noise on different
// tags; the check is therefore: the same rows (tag, time, quality) and
// every value within 10 noise standard deviations of a fresh run (both
// values carry noise), except the two tags the scenario disturbs on purpose
// (feed-pump flow spikes, the stuck gas-compressor thermocouple).
func TestReplayTestdataIsTheSimulatorsOutput(t *testing.T) {
	o, err := simOptions("demo", replayStart, 1, 7)
	if err != nil {
		t.Fatal(err)
	}
	if *updateReplay {
		if _, err := recordPlant(replayCSV, o, time.Second, 4*time.Minute); err != nil {
			t.Fatal(err)
		}
	}
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	noise := map[string]float64{}
	for _, tg := range plant.Tags() {
		noise[tg.Name] = tg.Noise
	}
	var b bytes.Buffer
	if _, err := writeReadings(&b, plant, replayStart, time.Second, 4*time.Minute, false); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(replayCSV)
	if err != nil {
		t.Fatal(err)
	}
	rows := func(data []byte) map[string]float64 {
		out := map[string]float64{}
		lines := strings.Split(strings.TrimSpace(string(data)), "\n")
		for _, l := range lines[1:] {
			f := strings.Split(l, ",")
			if len(f) != 4 {
				t.Fatalf("row %q", l)
			}
			v, err := strconv.ParseFloat(f[2], 64)
			if err != nil {
				t.Fatal(err)
			}
			out[f[0]+","+f[1]+","+f[3]] = v
		}
		return out
	}
	want, have := rows(b.Bytes()), rows(got)
	if len(want) != len(have) || len(have) != 8194 { // 241 steps x 34 tags
		t.Fatalf("%d rows committed, %d simulated, want 8194", len(have), len(want))
	}
	for k, v := range want {
		h, ok := have[k]
		if !ok {
			t.Fatalf("row %s missing from %s; run go test -run TestReplayTestdata -update-replay if the simulator changed on purpose", k, replayCSV)
		}
		tag := strings.SplitN(k, ",", 2)[0]
		if tag == "QM.FP1.FT301" || tag == "QM.GC1.TT502" {
			continue
		}
		if math.Abs(h-v) > 10*noise[tag] {
			t.Errorf("%s: committed %v, simulated %v (noise %v); regenerate with -update-replay if the simulator changed on purpose", k, h, v, noise[tag])
		}
	}
}

// replayConfig writes the simulator's configuration for copies plants at
// the given rate and interval, with the store sink and state in dir.
func replayConfig(t testing.TB, dir string, copies int, rate, iv time.Duration) string {
	t.Helper()
	b, err := simulatorConfig(copies, rate, iv, "quillmoor.tags", "nats://127.0.0.1:4222")
	if err != nil {
		t.Fatal(err)
	}
	s := strings.Replace(string(b), "path: exergywatch-sim.db", "path: "+filepath.Join(dir, "history.db"), 1)
	// Replayed data is older than the wall clock: keep it (10 years).
	s = strings.Replace(s, "retention: 24h", "retention: 87600h", 1)
	s = strings.Replace(s, "path: exergywatch-sim-state.db", "path: "+filepath.Join(dir, "state.db"), 1)
	path := filepath.Join(dir, "replay.yaml")
	if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func rpReadStore(t *testing.T, path string) map[string][]compute.Record {
	t.Helper()
	st, err := store.Open("check", store.Config{Path: path, Retention: 87600 * time.Hour}, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close(context.Background())
	ms, err := st.Machines()
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]compute.Record{}
	for _, m := range ms {
		rs, err := st.Range(m.Site, m.Machine, time.Time{}, time.Time{}, 0)
		if err != nil {
			t.Fatal(err)
		}
		out[m.Machine] = rs
	}
	return out
}

// steadyTrusted: a record computed in steady state whose inputs the daemon
// did not doubt (good, or uncertain only for a record-level reason such as
// the polytropic figure of a wet exhaust). Records with "input:" reasons (a
// stuck or spiking sensor) are flagged by the daemon itself and excluded.
func steadyTrusted(r compute.Record) bool {
	if r.Quality != compute.QualityGood && r.Quality != compute.QualityUncertain {
		return false
	}
	for _, why := range r.Reasons {
		if strings.HasPrefix(why, "input:") {
			return false
		}
	}
	return true
}

func rpFigure(r compute.Record, name string) (compute.Figure, bool) {
	for _, f := range r.Figures {
		if f.Name == name {
			return f, true
		}
	}
	return compute.Figure{}, false
}

// Replaying the simulator's own tags through the daemon's pipeline must give
// back the simulator's true isentropic efficiency (plantsim.TrueEfficiency,
// the answer key) within the U95 the daemon reports, for every steady
// (quality good) record. The tolerance is the daemon's own U95 (k = 2,
// propagated from the instrument classes in the demo configuration); the
// simulator's noise is smaller than those classes, so no steady record may
// miss it.
func TestReplayReproducesTrueEfficiency(t *testing.T) {
	dir := t.TempDir()
	cfgPath := replayConfig(t, dir, 1, time.Second, 2*time.Second)
	// The demo configuration declares the feed pump's RTDs at 0.05 K,
	// independent, as the simulator draws them (plantsim designs.go); the
	// check below therefore uses the configuration unchanged.
	var out, errb bytes.Buffer
	code := dispatch([]string{"replay", "-c", cfgPath, "--input", replayCSV, "--progress-every", "0"}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", code, out.String(), errb.String())
	}
	t.Log(out.String())
	for _, want := range []string{"samples read      8194 ", "rows rejected     0", "evaluations       720 (120 ticks)", "sink history      written 72"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("summary lacks %q", want)
		}
	}
	o, _ := simOptions("demo", replayStart, 1, 7)
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		t.Fatal(err)
	}
	recs := rpReadStore(t, filepath.Join(dir, "history.db"))
	if len(recs) != 6 {
		t.Fatalf("store holds %d machines, want 6", len(recs))
	}
	steadyPerMachine := map[string]int{}
	for id, rs := range recs {
		if len(rs) != 120 {
			t.Errorf("%s: %d records in the store, want 120 (one per 2 s tick over 4 min)", id, len(rs))
		}
		worst := 0.0
		for _, r := range rs {
			if !steadyTrusted(r) {
				continue
			}
			f, ok := rpFigure(r, "isentropic_efficiency")
			if !ok || !f.HasU95 {
				t.Errorf("%s %v: good record without isentropic efficiency and U95", id, r.Time)
				continue
			}
			// The window is the 2 s before the tick; the truth at its middle.
			truth, ok := plant.TrueEfficiency(id, r.Time.Add(-time.Second).Sub(replayStart))
			if !ok {
				t.Fatalf("unknown machine %s", id)
			}
			steadyPerMachine[id]++
			dev := math.Abs(f.Value - truth)
			worst = max(worst, dev/f.U95)
			if dev > f.U95 {
				t.Errorf("%s at %v: eta_s %.5f, true %.5f, |diff| %.5f > U95 %.5f", id, r.Time.Format("15:04:05"), f.Value, truth, dev, f.U95)
			}
		}
		t.Logf("%s: %d steady records, worst |eta - true|/U95 = %.2f", id, steadyPerMachine[id], worst)
	}
	total := 0
	for _, n := range steadyPerMachine {
		total += n
	}
	if total < 100 {
		t.Fatalf("only %d steady records over all machines: the comparison checks too little", total)
	}
}

// The same history split into per-tag files, half CSV (Unix ms times, the
// quality column first) and half line protocol, with malformed rows, must
// give the same records as the single CSV; every malformed row is counted
// with its reason and line.
func TestReplayMergedPerTagFilesAndMalformedRows(t *testing.T) {
	dir := t.TempDir()
	f, err := os.Open(replayCSV)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	files := map[string]*bytes.Buffer{}
	isCSV := map[string]bool{}
	var order []string
	sc := bufio.NewScanner(f)
	sc.Scan() // header
	for sc.Scan() {
		parts := strings.Split(sc.Text(), ",")
		tag := parts[0]
		buf, ok := files[tag]
		if !ok {
			buf = &bytes.Buffer{}
			files[tag] = buf
			isCSV[tag] = len(order)%2 == 0
			order = append(order, tag)
			if isCSV[tag] {
				buf.WriteString("quality,time,value,tag\n")
			}
		}
		tm, err := time.Parse(time.RFC3339Nano, parts[1])
		if err != nil {
			t.Fatal(err)
		}
		if isCSV[tag] {
			fmt.Fprintf(buf, "%s,%d,%s,%s\n", parts[3], tm.UnixMilli(), parts[2], tag)
		} else {
			fmt.Fprintf(buf, "%s value=%s,quality=%q %d\n", tag, parts[2], parts[3], tm.UnixNano())
		}
	}
	var inputs []string
	for _, tag := range order {
		ext := ".lp"
		if isCSV[tag] {
			ext = ".csv"
		}
		p := filepath.Join(dir, strings.ReplaceAll(tag, ".", "_")+ext)
		if err := os.WriteFile(p, files[tag].Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		inputs = append(inputs, p)
	}
	// Malformed rows appended to one CSV and one line-protocol file.
	bad := filepath.Join(dir, "bad.csv")
	if err := os.WriteFile(bad, []byte("tag,time,value,quality\n"+
		"QM.XX.A,2026-06-01T00:00:01Z,12,good\n"+ // line 2: fine (unknown tag: dropped by the tag map, not here)
		"QM.XX.A,yesterday,12,good\n"+ // 3: bad time
		"QM.XX.A,2026-06-01T00:00:02Z,twelve,good\n"+ // 4: bad value
		"QM.XX.A,2026-06-01T00:00:03Z,NaN,good\n"+ // 5: non-finite
		"QM.XX.A,2026-06-01T00:00:04Z,1,perfect\n"+ // 6: quality
		"QM.XX.A,2026-06-01T00:00:05Z\n"+ // 7: missing field
		"\"QM.XX.A,2026-06-01T00:00:06Z,1,good\n"+ // 8: bad quoting
		",2026-06-01T00:00:07Z,1,good\n"+ // 9: empty tag
		"QM.XX.A,0,1,good\n"+ // 10: time before 2000 (Unix ms 0)
		strings.Repeat("x", maxLine+10)+"\n"+ // 11: too long
		"\"QM.XX.A\",1780272008000,1,\n"), 0o644); err != nil { // 12: fine (quoted tag, Unix ms, empty quality)
		t.Fatal(err)
	}
	badLP := filepath.Join(dir, "bad.lp")
	if err := os.WriteFile(badLP, []byte("QM.XX.B value=1 1780272001000000000\nQM.XX.B value= 1780272002000000000\nQM.XX.B value=2\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	inputs = append(inputs, bad, badLP)

	run := func(in []string) (string, map[string][]compute.Record) {
		sub := t.TempDir()
		cfgPath := replayConfig(t, sub, 1, time.Second, 2*time.Second)
		args := append([]string{"replay", "-c", cfgPath, "--progress-every", "0"}, in...)
		var out, errb bytes.Buffer
		if code := dispatch(args, &out, &errb); code != 0 {
			t.Fatalf("exit %d\n%s\n%s", code, out.String(), errb.String())
		}
		return out.String(), rpReadStore(t, filepath.Join(sub, "history.db"))
	}
	sumSplit, split := run(inputs)
	t.Log(sumSplit)
	_, single := run([]string{replayCSV})
	for _, want := range []string{
		"rows rejected     11", "time before 2000             1", "bad.csv:10: time before 2000",
		"bad time                     1", "bad value                    1", "non-finite value             1",
		"unknown quality              1", "missing field                1", "bad quoting                  1",
		"empty tag                    1", "line too long                1",
		"line protocol: value is not a number or boolean 1",
		"no timestamp",
		"bad.csv:3: bad time", "bad.csv:4: bad value",
		"samples read      8197 ",
	} {
		if !strings.Contains(sumSplit, want) {
			t.Errorf("summary lacks %q", want)
		}
	}
	for id, rs := range single {
		got := split[id]
		if len(got) != len(rs) {
			t.Errorf("%s: %d records from the split files, %d from the single file", id, len(got), len(rs))
			continue
		}
		for i := range rs {
			a, _ := rpFigure(rs[i], "isentropic_efficiency")
			b, _ := rpFigure(got[i], "isentropic_efficiency")
			if !rs[i].Time.Equal(got[i].Time) || rs[i].Quality != got[i].Quality || a.Value != b.Value && !(math.IsNaN(a.Value) && math.IsNaN(b.Value)) {
				t.Errorf("%s record %d: split %v %v %v, single %v %v %v", id, i, got[i].Time, got[i].Quality, b.Value, rs[i].Time, rs[i].Quality, a.Value)
				break
			}
		}
	}
}

func TestReplayUsageErrors(t *testing.T) {
	dir := t.TempDir()
	cfgPath := replayConfig(t, dir, 1, time.Second, 2*time.Second)
	noHeader := filepath.Join(dir, "noheader.csv")
	if err := os.WriteFile(noHeader, []byte("QM.HP1.PT101,2026-06-01T00:00:00Z,16\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		args []string
		code int
		msg  string
	}{
		{"no config", []string{"--input", replayCSV}, 2, "-c FILE is required"},
		{"no input", []string{"-c", cfgPath}, 2, "no input"},
		{"bad format", []string{"-c", cfgPath, "--format", "xml", replayCSV}, 2, `--format "xml"`},
		{"missing file", []string{"-c", cfgPath, filepath.Join(dir, "nope.csv")}, 2, "no such file"},
		{"bad from", []string{"-c", cfgPath, "--from", "soon", replayCSV}, 2, "--from"},
		{"to before from", []string{"-c", cfgPath, "--from", "2026-06-02T00:00:00Z", "--to", "2026-06-01T00:00:00Z", replayCSV}, 2, "--to must be after --from"},
		{"no header", []string{"-c", cfgPath, noHeader}, 2, "noheader.csv:1: csv header"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var out, errb bytes.Buffer
			code := dispatch(append([]string{"replay", "--progress-every", "0"}, tc.args...), &out, &errb)
			if code != tc.code || !strings.Contains(errb.String(), tc.msg) {
				t.Fatalf("exit %d (want %d), stderr %q (want %q)", code, tc.code, errb.String(), tc.msg)
			}
		})
	}
}

// --from/--to select a span: 1 minute of the 4 gives 30 ticks.
func TestReplayFromTo(t *testing.T) {
	dir := t.TempDir()
	cfgPath := replayConfig(t, dir, 1, time.Second, 2*time.Second)
	var out, errb bytes.Buffer
	code := dispatch([]string{"replay", "-c", cfgPath, "--progress-every", "0", "--from", "2026-06-01T00:01:00Z", "--to", "1780272120000", replayCSV}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	// 60 steps of 34 tags inside [00:01:00, 00:02:00); the first tick is
	// 00:01:02 and the last 00:02:00 (covering the sample at 00:01:59).
	for _, want := range []string{"replayed 2040, outside --from/--to 6154", "(30 ticks)"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("summary lacks %q:\n%s", want, out.String())
		}
	}
}

func TestParseTime(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want time.Time
		ok   bool
	}{
		{"2026-06-01T00:00:00Z", replayStart, true},
		{"2026-06-01T02:00:00.5+02:00", replayStart.Add(500 * time.Millisecond), true},
		{"1780272000000", replayStart, true}, // 2026-06-01T00:00:00Z in Unix ms (date -d @1780272000)
		{"1780272000000.25", replayStart.Add(250 * time.Microsecond), true},
		{"-1000", time.Unix(-1, 0).UTC(), true},
		{"1780272000000.", time.Time{}, false},
		{"1780272000000.1234567", time.Time{}, false},
		{"+1780272000000", time.Time{}, false},
		{"99999999999999999999", time.Time{}, false},
		{"9223372036854775", time.Time{}, false},
		{"2026-06-01", time.Time{}, false},
		{"", time.Time{}, false},
	} {
		got, err := parseTime([]byte(tc.in))
		if (err == nil) != tc.ok || tc.ok && !got.Equal(tc.want) {
			t.Errorf("parseTime(%q) = %v, %v; want %v ok=%v", tc.in, got, err, tc.want, tc.ok)
		}
	}
}

// FuzzCSVReader: any input yields only well-formed samples (a tag, a
// finite value, a known quality, a time) or counted rejections, never a
// panic; every line is either a sample, skipped (blank, comment, header) or
// counted.
func FuzzCSVReader(f *testing.F) {
	f.Add([]byte("tag,time,value,quality\nA,2026-06-01T00:00:00Z,1,good\n"))
	f.Add([]byte("value,tag,time\n1,A,1780272000000\n\"B,1\",1780272000000.5,2e3\n"))
	f.Add([]byte("\xef\xbb\xbftag,time,value\r\nA,2026-06-01T00:00:00Z,1\r\n#c\r\n\r\nA,x,1\n"))
	f.Add([]byte("tag,time,value,quality\n\"A\"\"x\",1,NaN,bad\n\"A,1,1\nA,1,1,uncertain,extra\n"))
	f.Add([]byte("time,value\n1,2\n"))
	f.Add([]byte(""))
	f.Fuzz(func(t *testing.T, data []byte) {
		var rej rejects
		r := newCSVReader("fuzz.csv", bytes.NewReader(data), &rej)
		n := 0
		for {
			s, ok, err := r.next()
			if err != nil || !ok {
				break
			}
			n++
			if s.Tag == "" || math.IsNaN(s.Value) || math.IsInf(s.Value, 0) || s.SourceTime.Before(align.Earliest) {
				t.Fatalf("bad sample %+v", s)
			}
			if s.Quality != ingest.Good && s.Quality != ingest.Uncertain && s.Quality != ingest.Bad {
				t.Fatalf("bad quality %v", s.Quality)
			}
		}
		lines := bytes.Count(data, []byte{'\n'}) + 1
		if n+int(rej.Total) > lines {
			t.Fatalf("%d samples + %d rejections from %d lines", n, rej.Total, lines)
		}
	})
}

// FuzzSplitCSV: splitting never panics and a line without quotes splits at
// every comma.
func FuzzSplitCSV(f *testing.F) {
	f.Add([]byte(`a,"b,c",d`))
	f.Add([]byte(`"a""b"`))
	f.Add([]byte(`a,b,`))
	f.Fuzz(func(t *testing.T, line []byte) {
		fs, _, ok := splitCSV(line, nil, nil)
		if !bytes.ContainsRune(line, '"') {
			if !ok || len(fs) != bytes.Count(line, []byte{','})+1 {
				t.Fatalf("%q: %d fields, ok %v", line, len(fs), ok)
			}
		}
	})
}

// ---- the year benchmark ---------------------------------------------------

// synthPlant streams simulator data without writing it anywhere: the
// noise-free tag values of the plant are computed with plantsim every
// truthEvery (the plant changes slowly: degradation and a load change), and
// every step (one minute) each tag gets a fresh reading with the
// simulator's noise for that tag. Generating a year at plantsim's full
// thermodynamic cost per minute would take longer than the replay itself.
type synthPlant struct {
	tags       []plantsim.Tag
	truth      [][]float64 // per truth step, per tag, in the tag's unit
	start      time.Time
	step       time.Duration
	truthEvery int // steps per truth step
	steps      int
	i, j       int
	rng        *rand.Rand
}

// yearOptions is a year of plant life: fouling of the air compressors from
// day 30 (3 points over the year), a load drop to 70 % from day 120 to
// day 240 with a one-hour ramp; no sensor faults.
func yearOptions(start time.Time, copies int) plantsim.Options {
	const minutesPerYear = 365 * 24 * 60
	return plantsim.Options{Seed: 11, Start: start, Copies: copies, Noiseless: true,
		DegradeAfter: 30 * 24 * time.Hour, DegradeRate: 0.03 / minutesPerYear,
		LoadChangeAfter: 120 * 24 * time.Hour, LoadRestoreAfter: 240 * 24 * time.Hour, LoadRamp: time.Hour, LoadDrop: 0.3}
}

func newSynthPlant(tb testing.TB, o plantsim.Options, step, span, truthStep time.Duration) *synthPlant {
	tb.Helper()
	plant, err := plantsim.New(o, fluids.New)
	if err != nil {
		tb.Fatal(err)
	}
	sp := &synthPlant{tags: plant.Tags(), start: o.Start, step: step, truthEvery: int(truthStep / step), steps: int(span/step) + 1,
		rng: rand.New(rand.NewPCG(uint64(o.Seed), 1))}
	idx := map[string]int{}
	for i, t := range sp.tags {
		idx[t.Name] = i
	}
	nTruth := (sp.steps + sp.truthEvery - 1) / sp.truthEvery
	sp.truth = make([][]float64, nTruth)
	// plantsim steps are independent of each other when noiseless and
	// fault-free, so the truth table is computed on every core.
	var wg sync.WaitGroup
	workers := runtime.GOMAXPROCS(0)
	errs := make([]error, workers)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			p, err := plantsim.New(o, fluids.New)
			if err != nil {
				errs[w] = err
				return
			}
			for k := w; k < nTruth; k += workers {
				rs, err := p.Step(o.Start.Add(time.Duration(k) * truthStep))
				if err != nil {
					errs[w] = err
					return
				}
				row := make([]float64, len(sp.tags))
				for _, r := range rs {
					row[idx[r.Tag]] = r.Value
				}
				sp.truth[k] = row
			}
		}(w)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			tb.Fatal(err)
		}
	}
	return sp
}

func (s *synthPlant) next() (ingest.Sample, bool, error) {
	if s.j == len(s.tags) {
		s.j = 0
		s.i++
	}
	if s.i >= s.steps {
		return ingest.Sample{}, false, nil
	}
	t := s.start.Add(time.Duration(s.i) * s.step)
	tag := &s.tags[s.j]
	v := s.truth[s.i/s.truthEvery][s.j] + tag.Noise*s.rng.NormFloat64()
	s.j++
	return ingest.Sample{Tag: tag.Name, SourceTime: t, ReceiveTime: t, Value: v}, true, nil
}

// nextTime is the time of the sample next returns; false at the end.
func (s *synthPlant) nextTime() (time.Time, bool) {
	if s.j == len(s.tags) {
		s.j = 0
		s.i++
	}
	return s.start.Add(time.Duration(s.i) * s.step), s.i < s.steps
}

func (s *synthPlant) progress() float64 { return float64(s.i) / float64(s.steps) }

// BenchmarkReplay replays 1-minute data of 4 plant copies (24 machines,
// 136 tags) through the whole pipeline with a 1-minute evaluation interval:
// a day, a week and a year, with the embedded store sink and with no sink
// (compute only). The day and week streams are generated into memory before
// the clock runs (s/op is the pipeline's alone); the year (71 M samples) is
// generated while it is replayed (see synthPlant), on the goroutine that
// feeds the pipeline. gen-s/op is what generating the span's stream costs
// on its own (one goroutine; timed once per span): for the year it is
// inside s/op, for day and week it is not. A real replay parses files
// instead (BenchmarkReplayParse). Metrics: s/op is the wall time of the
// span; cpu-s/op the process CPU time per run (both cores busy: about
// twice s/op); worker-util the share of the replay's wall time the
// evaluation workers spent evaluating (1: never idle; on a shared machine
// time taken by other processes counts as busy); samples/s and evals/s
// the throughput.
// Issue 6's target: a year of 1-minute data for 20 machines in under 60 s.
//
//	go test -run XXX -bench 'Replay/year' -benchtime 1x ./cmd/exergywatch/
func BenchmarkReplay(b *testing.B) {
	start := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
	for _, span := range []struct {
		name     string
		d        time.Duration
		inMemory bool
	}{{"day", 24 * time.Hour, true}, {"week", 7 * 24 * time.Hour, true}, {"year", 365 * 24 * time.Hour, false}} {
		var sp *synthPlant
		var mem []ingest.Sample
		genSecs := -1.0
		for _, sink := range []string{"nosink", "store"} {
			b.Run(span.name+"/"+sink, func(b *testing.B) {
				if sp == nil {
					sp = newSynthPlant(b, yearOptions(start, 4), time.Minute, span.d, time.Hour)
				}
				if genSecs < 0 {
					t0 := time.Now()
					if span.inMemory {
						mem = sp.generate(1, 2)
					} else {
						src := *sp
						src.rng = rand.New(rand.NewPCG(1, 2))
						for {
							if _, ok, _ := src.next(); !ok {
								break
							}
						}
					}
					genSecs = time.Since(t0).Seconds()
				}
				var res replayResult
				var cpu time.Duration
				for b.Loop() {
					b.StopTimer()
					dir := b.TempDir()
					cfg, err := config.Load(replayConfig(b, dir, 4, time.Minute, time.Minute))
					if err != nil {
						b.Fatal(err)
					}
					if sink == "nosink" {
						cfg.Sinks = nil
					}
					p, err := buildPipeline(cfg, pipelineOptions{})
					if err != nil {
						b.Fatal(err)
					}
					var in replaySource = &sliceSource{s: mem}
					if !span.inMemory {
						src := *sp
						src.rng = rand.New(rand.NewPCG(1, 2))
						in = &src
					}
					cpu0 := cpuTime()
					b.StartTimer()
					res, err = replay(context.Background(), p, in, replayOptions{})
					if err != nil {
						b.Fatal(err)
					}
					if err := p.close(); err != nil {
						b.Fatal(err)
					}
					b.StopTimer()
					cpu += cpuTime() - cpu0
					b.StartTimer()
				}
				if res.SinkDrops > 0 {
					b.Fatalf("%d records dropped by sinks", res.SinkDrops)
				}
				b.ReportMetric(cpu.Seconds()/float64(b.N), "cpu-s/op")
				b.ReportMetric(genSecs, "gen-s/op")
				secs := b.Elapsed().Seconds() / float64(b.N)
				b.ReportMetric(float64(res.Samples)/secs, "samples/s")
				b.ReportMetric(float64(res.Evaluations)/secs, "evals/s")
				b.ReportMetric(float64(res.Evaluations), "evals/op")
				b.ReportMetric(res.Busy.Seconds()/(float64(res.Workers)*res.Wall.Seconds()), "worker-util")
				b.ReportMetric(float64(res.ByQuality[compute.QualityGood])/float64(max(res.Evaluations, 1)), "good-fraction")
			})
		}
	}
}

// The generated stream is the simulator's: the noise-free value of every
// tag at a truth step converts to SI through the tag's unit, and its
// statistics match the tag's noise (sample standard deviation within 10 %
// of plantsim's Noise over 2000 draws; common practice, no source).
func TestSynthPlantNoise(t *testing.T) {
	sp := newSynthPlant(t, yearOptions(replayStart, 1), time.Minute, 2000*time.Minute, 4000*time.Minute)
	sums := make([]float64, len(sp.tags))
	sq := make([]float64, len(sp.tags))
	n := 0
	for {
		s, ok, _ := sp.next()
		if !ok {
			break
		}
		k := sp.j - 1
		d := s.Value - sp.truth[0][k]
		sums[k] += d
		sq[k] += d * d
		if k == 0 {
			n++
		}
	}
	for k, tg := range sp.tags {
		if _, err := units.Lookup(tg.Unit); err != nil {
			t.Errorf("%s: unit %q: %v", tg.Name, tg.Unit, err)
		}
		sd := math.Sqrt(sq[k]/float64(n) - (sums[k]/float64(n))*(sums[k]/float64(n)))
		if math.Abs(sd-tg.Noise) > 0.1*tg.Noise {
			t.Errorf("%s: noise sd %.4g, want %.4g", tg.Name, sd, tg.Noise)
		}
	}
}

// BenchmarkEvaluateMachine: the cost of one evaluation (evaluator.evaluate:
// mode, steady state, machine model with U95, alerts, trends) per machine of
// the plant, on 1-minute snapshots of the synthetic year data; this is where
// a replay spends its time.
func BenchmarkEvaluateMachine(b *testing.B) {
	cfg, p, snaps := evaluationBench(b)
	defer p.close()
	for _, id := range p.order {
		b.Run(id, func(b *testing.B) {
			ss := snaps[id]
			i := 0
			for b.Loop() {
				if i == len(ss) {
					b.StopTimer()
					e, err := newEvaluator(cfg, &cfg.Machines[slicesIndex(cfg, id)], cfg.Keys()[id])
					if err != nil {
						b.Fatal(err)
					}
					p.evals[id] = e
					i = 0
					b.StartTimer()
				}
				p.evals[id].evaluate(ss[i])
				i++
			}
		})
	}
}

// evaluationBench builds the one-plant replay pipeline (no sinks) and the
// aligned 1-minute snapshots of each machine over 240 ticks of the
// synthetic year data, for the per-evaluation benchmarks. The caller
// closes the pipeline.
func evaluationBench(b *testing.B) (*config.Config, *pipeline, map[string][]*align.Snapshot) {
	b.Helper()
	start := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
	const ticks = 240
	sp := newSynthPlant(b, yearOptions(start, 1), time.Minute, ticks*time.Minute, time.Hour)
	cfg, err := config.Load(replayConfig(b, b.TempDir(), 1, time.Minute, time.Minute))
	if err != nil {
		b.Fatal(err)
	}
	cfg.Sinks = nil
	p, err := buildPipeline(cfg, pipelineOptions{})
	if err != nil {
		b.Fatal(err)
	}
	snaps := map[string][]*align.Snapshot{}
	var batch []ingest.Sample
	for k := 1; k <= ticks; k++ {
		tick := start.Add(time.Duration(k) * time.Minute)
		batch = batch[:0]
		for {
			at, more := sp.nextTime()
			if !more || at.After(tick) {
				break
			}
			s, _, _ := sp.next()
			batch = append(batch, s)
		}
		p.engine.Ingest(batch, tick)
		for _, s := range p.engine.Evaluate(tick) {
			snaps[s.Machine] = append(snaps[s.Machine], s)
		}
	}
	return cfg, p, snaps
}

func slicesIndex(cfg *config.Config, id string) int {
	for i := range cfg.Machines {
		if cfg.Machines[i].ID == id {
			return i
		}
	}
	return -1
}

// replay writes to every configured sink: with an InfluxDB sink (a real
// VictoriaMetrics server through its InfluxDB v2 write API) next to the
// store, every record of the store is in the database: one
// exw_machine_quality_code point per record with the record's quality code,
// and the same isentropic efficiency (VictoriaMetrics keeps ~15 significant
// digits; relative 1e-12, judgement, no source).
func TestReplayWritesInfluxSink(t *testing.T) {
	vm := vmtest.StartServer(t)
	dir := t.TempDir()
	cfgPath := replayConfig(t, dir, 1, time.Second, 2*time.Second)
	b, err := os.ReadFile(cfgPath)
	if err != nil {
		t.Fatal(err)
	}
	sink := fmt.Sprintf("sinks:\n  - {name: tsdb, kind: influxdb, influxdb: {url: %q, org: quillmoor, bucket: exergywatch, spool_dir: %q, flush_interval: 100ms}}\n",
		vm.URL, filepath.Join(dir, "spool"))
	s := strings.Replace(string(b), "sinks:\n", sink, 1)
	if s == string(b) {
		t.Fatal("no sinks section in the generated configuration")
	}
	if err := os.WriteFile(cfgPath, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	var out, errb bytes.Buffer
	if code := dispatch([]string{"replay", "-c", cfgPath, "--progress-every", "0", replayCSV}, &out, &errb); code != 0 {
		t.Fatalf("exit %d\n%s\n%s", code, out.String(), errb.String())
	}
	if !strings.Contains(out.String(), "sink tsdb") {
		t.Errorf("summary does not report the influx sink:\n%s", out.String())
	}
	recs := rpReadStore(t, filepath.Join(dir, "history.db"))
	want := 0
	for _, rs := range recs {
		want += len(rs)
	}
	type key struct {
		name, machine string
		ms            int64
	}
	got := map[key]float64{}
	deadline := time.Now().Add(20 * time.Second)
	for {
		vm.ForceFlush(t)
		clear(got)
		n := 0
		for _, ser := range vm.Export(t, `{__name__=~"exw_machine_(quality_code|isentropic_efficiency)"}`) {
			for i, ts := range ser.Timestamps {
				got[key{ser.Metric["__name__"], ser.Metric["machine"], ts}] = ser.Values[i]
				if ser.Metric["__name__"] == "exw_machine_quality_code" {
					n++
				}
			}
		}
		// Points written just before force_flush can take a few seconds to
		// show in the export (VictoriaMetrics 1.79); poll instead of sleeping.
		if n >= want || time.Now().After(deadline) {
			break
		}
		time.Sleep(250 * time.Millisecond)
	}
	if want != 720 {
		t.Fatalf("store holds %d records, want 720", want)
	}
	for id, rs := range recs {
		for _, r := range rs {
			ms := r.Time.UnixMilli()
			q, ok := got[key{"exw_machine_quality_code", id, ms}]
			if !ok || int(q) != int(r.Quality) {
				t.Errorf("%s %v: quality code %v (present %v) in the database, %d in the store", id, r.Time, q, ok, int(r.Quality))
				continue
			}
			if f, ok := rpFigure(r, "isentropic_efficiency"); ok && f.Quality != compute.QualityBad {
				v, ok := got[key{"exw_machine_isentropic_efficiency", id, ms}]
				if !ok || math.Abs(v-f.Value) > 1e-12*math.Abs(f.Value) {
					t.Errorf("%s %v: isentropic efficiency %v (present %v) in the database, %v in the store", id, r.Time, v, ok, f.Value)
				}
			}
		}
	}
}

func TestAssignLPT(t *testing.T) {
	for _, tc := range []struct {
		costs   []int64
		workers int
		want    []int64 // resulting loads per worker, sorted
	}{
		// Round-robin would give loads 10+1+1 = 12 and 1+1 = 2.
		{[]int64{10, 1, 1, 1, 1}, 2, []int64{4, 10}},
		// Four gas compressors and four pumps (about 340 and 24 us per
		// evaluation, BenchmarkEvaluateMachine): 2 + 2 each side.
		{[]int64{340, 340, 340, 340, 24, 24, 24, 24}, 2, []int64{728, 728}},
		{[]int64{5, 4, 3, 3, 3}, 2, []int64{8, 10}}, // LPT is a heuristic: the optimum 9/9 is missed (Graham 1969, from memory)
		{[]int64{7}, 3, []int64{0, 0, 7}},
	} {
		got := assignLPT(tc.costs, tc.workers)
		load := make([]int64, tc.workers)
		for j, w := range got {
			load[w] += tc.costs[j]
		}
		slices.Sort(load)
		if !slices.Equal(load, tc.want) {
			t.Errorf("assignLPT(%v, %d) loads %v, want %v", tc.costs, tc.workers, load, tc.want)
		}
		if m := makespan(tc.costs, got, tc.workers); m != tc.want[len(tc.want)-1] {
			t.Errorf("makespan %d, want %d", m, tc.want[len(tc.want)-1])
		}
	}
}
