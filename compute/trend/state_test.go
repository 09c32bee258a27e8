package trend

import (
	"encoding/json"
	"errors"
	"math"
	"reflect"
	"testing"
	"time"
)

// A restart in mid-day, with the state saved as JSON and restored into a
// fresh accumulator, gives exactly the days of an uninterrupted run: the
// same observations, the same median, the same steady coverage. The
// restored accumulator also does not credit the downtime: the last
// observation before the stop was not steady in the second case.
func TestDailyStateRoundTrip(t *testing.T) {
	loc, _ := time.LoadLocation("Europe/Berlin")
	start := time.Date(2026, 3, 28, 0, 0, 0, 0, loc) // the day before a DST change
	obs := func(i int) (time.Time, float64, bool) {
		return start.Add(time.Duration(i) * time.Minute), float64(i%17) * 0.25, i%90 < 60
	}
	const n = 2*24*60 + 30
	for _, stopAt := range []int{1, 600, 24*60 - 1, 24 * 60, 24*60 + 61, 2*24*60 - 5} {
		ref, _ := NewDaily("Europe/Berlin")
		var want []Day
		for i := 0; i < n; i++ {
			at, v, st := obs(i)
			done, err := ref.Add(at, v, st)
			if err != nil {
				t.Fatal(err)
			}
			want = append(want, done...)
		}
		a, _ := NewDaily("Europe/Berlin")
		var got []Day
		for i := 0; i < stopAt; i++ {
			at, v, st := obs(i)
			done, _ := a.Add(at, v, st)
			got = append(got, done...)
		}
		b, err := json.Marshal(a.State())
		if err != nil {
			t.Fatal(err)
		}
		var s DailyState
		if err := json.Unmarshal(b, &s); err != nil {
			t.Fatal(err)
		}
		r, _ := NewDaily("Europe/Berlin")
		if err := r.Restore(s); err != nil {
			t.Fatalf("stop at %d: %v", stopAt, err)
		}
		for i := stopAt; i < n; i++ {
			at, v, st := obs(i)
			done, err := r.Add(at, v, st)
			if err != nil {
				t.Fatal(err)
			}
			got = append(got, done...)
		}
		if !reflect.DeepEqual(dayKeys(got), dayKeys(want)) {
			t.Errorf("stop at %d: days after restore\n got %+v\nwant %+v", stopAt, dayKeys(got), dayKeys(want))
		}
		cg, _ := r.Current()
		cw, _ := ref.Current()
		if !reflect.DeepEqual(dayKeys([]Day{cg}), dayKeys([]Day{cw})) {
			t.Errorf("stop at %d: current day %+v, want %+v", stopAt, cg, cw)
		}
	}
}

// dayKeys drops the time.Location pointers so days compare by content.
func dayKeys(ds []Day) []Day {
	out := make([]Day, len(ds))
	for i, d := range ds {
		d.Start, d.End = d.Start.UTC(), d.End.UTC()
		out[i] = d
	}
	return out
}

// A state saved under one time zone whose day no longer fits (the site's
// time zone was changed in the configuration), or with impossible content,
// is refused and leaves the accumulator as it was.
func TestDailyRestoreRefused(t *testing.T) {
	a, _ := NewDaily("UTC")
	at := time.Date(2026, 6, 1, 23, 30, 0, 0, time.UTC)
	a.Add(at, 1, true)
	good := a.State()
	for name, mut := range map[string]func(s *DailyState){
		"zone changed":     nil, // restored into Asia/Tokyo below: 23:30 UTC is 08:30 on June 2 there
		"negative steady":  func(s *DailyState) { s.SteadySeconds = -1 },
		"too much steady":  func(s *DailyState) { s.SteadySeconds = 90000 },
		"NaN steady":       func(s *DailyState) { s.SteadySeconds = math.NaN() },
		"NaN value":        func(s *DailyState) { s.Values = []float64{1, math.NaN()} },
		"day without time": func(s *DailyState) { s.Last = time.Time{} },
	} {
		s := good
		s.Values = append([]float64(nil), good.Values...)
		tz := "UTC"
		if mut == nil {
			tz = "Asia/Tokyo"
		} else {
			mut(&s)
		}
		r, _ := NewDaily(tz)
		r.Add(at.Add(-time.Hour), 7, true)
		before := r.State()
		if err := r.Restore(s); !errors.Is(err, ErrStateMismatch) {
			t.Errorf("%s: err = %v, want ErrStateMismatch", name, err)
		}
		if !reflect.DeepEqual(r.State(), before) {
			t.Errorf("%s: a refused restore changed the accumulator", name)
		}
	}
	var empty Daily
	empty.loc = time.UTC
	if err := empty.Restore(DailyState{}); err != nil {
		t.Errorf("empty state: %v", err)
	}
}
