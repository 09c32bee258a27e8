package trend

import (
	"math"
	"testing"
	"time"
)

var t0 = time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)

// Hand computation: tau = 60 s, values 1 then 2 after 60 s: alpha = 1 - e^-1 =
// 0.6321205588; EWMA = 1 + 0.6321205588 = 1.6321205588.
func TestEWMAHand(t *testing.T) {
	e := EWMA{Tau: time.Minute}
	e.Add(t0, 1)
	e.Add(t0.Add(time.Minute), 2)
	if want := 1 + (1 - math.Exp(-1)); math.Abs(e.Value-want) > 1e-12 {
		t.Fatalf("EWMA = %.12g, want %.12g", e.Value, want)
	}
	if err := e.Add(t0, 3); err != ErrOutOfOrder {
		t.Errorf("out of order: %v", err)
	}
	if err := e.Add(t0.Add(2*time.Minute), math.Inf(1)); err != ErrNotFinite {
		t.Errorf("inf: %v", err)
	}
}

// Daylight-saving change in Europe/Berlin on 2026-03-29 (clocks 02:00 -> 03:00;
// the day has 23 hours, from the EU summer-time rule, common knowledge). A
// machine steady all day has coverage 1, not 23/24; a machine steady for 11.5 h
// has 0.5.
func TestDailyAcrossDST(t *testing.T) {
	d, err := NewDaily("Europe/Berlin")
	if err != nil {
		t.Fatal(err)
	}
	loc, _ := time.LoadLocation("Europe/Berlin")
	start := time.Date(2026, 3, 29, 0, 0, 0, 0, loc)
	var days []Day
	for i := 0; i <= 23*60; i++ { // every minute through the 23-hour day, plus the next midnight
		now := start.Add(time.Duration(i) * time.Minute)
		done, err := d.Add(now, float64(i%10), true)
		if err != nil {
			t.Fatal(err)
		}
		days = append(days, done...)
	}
	if len(days) != 1 {
		t.Fatalf("completed %d days, want 1", len(days))
	}
	day := days[0]
	if day.Date != "2026-03-29" || day.End.Sub(day.Start) != 23*time.Hour {
		t.Fatalf("day %s lasts %v, want 2026-03-29 of 23h", day.Date, day.End.Sub(day.Start))
	}
	if math.Abs(day.SteadyCoverage-1) > 1e-12 {
		t.Errorf("coverage %v, want 1", day.SteadyCoverage)
	}
	if day.N != 23*60 || day.Min != 0 || day.Max != 9 || math.Abs(day.Median-4.5) > 1e-12 {
		t.Errorf("aggregates %+v", day)
	}

	d2, _ := NewDaily("Europe/Berlin")
	for i := 0; i <= 23*60; i++ {
		now := start.Add(time.Duration(i) * time.Minute)
		steady := i < 690 // 11.5 h of 23 h
		d2.Add(now, 1, steady)
	}
	c, _ := d2.Current()
	if c.Date != "2026-03-30" {
		t.Fatalf("current day %s", c.Date)
	}
}

func TestDailyCoverageHalf(t *testing.T) {
	d, _ := NewDaily("UTC")
	var got []Day
	for i := 0; i <= 24*60; i++ {
		done, _ := d.Add(t0.Add(time.Duration(i)*time.Minute), 5, i < 12*60)
		got = append(got, done...)
	}
	// Steady credited from each steady observation to the next: minutes 0..720 -> 12 h of 24 h.
	if len(got) != 1 || math.Abs(got[0].SteadyCoverage-0.5) > 1e-9 {
		t.Fatalf("coverage %+v, want 0.5", got)
	}
	if _, err := NewDaily("Not/AZone"); err == nil {
		t.Errorf("bad zone accepted")
	}
}
