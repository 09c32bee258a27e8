package sinks

import (
	"encoding/json"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
)

var wt0 = time.Date(2026, 11, 30, 8, 0, 0, 123456789, time.UTC)

func TestRecordJSON(t *testing.T) {
	r := compute.Record{Time: wt0, Site: "north", Machine: "c1", MachineKind: "compressor", Quality: compute.QualityBad,
		Reasons: []string{"flow_missing"},
		Figures: []compute.Figure{
			{Name: "polytropic_efficiency", Value: 0.81, U95: 0.02, HasU95: true, Quality: compute.QualityUncertain, Reasons: []string{"near_surge"}},
			{Name: "power_w", Value: math.NaN(), U95: 5, HasU95: true, Quality: compute.QualityBad},
		}}
	b, err := MarshalRecord(r)
	if err != nil {
		t.Fatal(err)
	}
	// the Bad figure carries neither value nor u95 (compute/record.go: a Bad
	// figure never reaches a sink as a plain number)
	want := `{"name":"power_w","quality":"bad","quality_code":3}`
	if !strings.Contains(string(b), want) || strings.Contains(string(b), "NaN") {
		t.Errorf("json %s\nwant it to contain %s", b, want)
	}
	got, err := UnmarshalRecord(b)
	if err != nil {
		t.Fatal(err)
	}
	r.Figures[1].Value, r.Figures[1].U95, r.Figures[1].HasU95 = 0, 0, false
	if !reflect.DeepEqual(got, r) {
		t.Errorf("round trip\n got %+v\nwant %+v", got, r)
	}
}

func TestWireRejects(t *testing.T) {
	for name, s := range map[string]string{
		"not json":           `{`,
		"wrong version":      `{"v":2,"time":"2026-11-30T08:00:00Z","machine":"a","quality":"good","quality_code":0}`,
		"quality mismatch":   `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","quality":"good","quality_code":2}`,
		"unknown quality":    `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","quality":"fine","quality_code":0}`,
		"good without value": `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","quality":"good","quality_code":0,"figures":[{"name":"x","quality":"good","quality_code":0}]}`,
		"no machine":         `{"v":1,"time":"2026-11-30T08:00:00Z","quality":"good","quality_code":0}`,
		"negative u95":       `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","quality":"good","quality_code":0,"figures":[{"name":"x","value":1,"u95":-1,"quality":"good","quality_code":0}]}`,
	} {
		if _, err := UnmarshalRecord([]byte(s)); !errors.Is(err, ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	for name, s := range map[string]string{
		"state mismatch": `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","rule":"r","from":"inactive","to":"firing","from_code":0,"to_code":1}`,
		"unknown state":  `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","rule":"r","from":"AlertState(7)","to":"firing","from_code":7,"to_code":2}`,
		"no rule":        `{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","from":"inactive","to":"pending","from_code":0,"to_code":1}`,
	} {
		if _, err := UnmarshalEvent([]byte(s)); !errors.Is(err, ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	if _, err := MarshalEvent(compute.Event{Time: wt0, Machine: "a", Rule: "r", Value: math.Inf(1)}); !errors.Is(err, ErrInvalid) {
		t.Errorf("Inf event: %v", err)
	}
}

func FuzzUnmarshalRecord(f *testing.F) {
	r := compute.Record{Time: wt0, Site: "s", Machine: "m", Quality: compute.QualityUncertain, Reasons: []string{"x"},
		Figures: []compute.Figure{{Name: "a", Value: 1.5, U95: 0.1, HasU95: true, Quality: compute.QualityUncertain}, {Name: "b", Quality: compute.QualityBad}}}
	b, _ := MarshalRecord(r)
	f.Add(b)
	f.Add([]byte(`{"v":1,"time":"2026-11-30T08:00:00Z","machine":"a","quality":"good","quality_code":0,"figures":[{"name":"x","value":1e308,"quality":"good","quality_code":0}]}`))
	f.Add([]byte(`null`))
	f.Fuzz(func(t *testing.T, b []byte) {
		r, err := UnmarshalRecord(b)
		if err != nil {
			if !errors.Is(err, ErrInvalid) {
				t.Fatalf("error not ErrInvalid: %v", err)
			}
			return
		}
		b2, err := MarshalRecord(r)
		if err != nil {
			t.Fatalf("decoded record does not encode: %v", err)
		}
		r2, err := UnmarshalRecord(b2)
		if err != nil || !reflect.DeepEqual(normal(r), normal(r2)) {
			t.Fatalf("round trip: %v\n%+v\n%+v", err, r, r2)
		}
	})
}

// normal makes nil and empty slices equal for comparison.
func normal(r compute.Record) string {
	b, _ := json.Marshal(r)
	return strings.ReplaceAll(string(b), "null", "[]")
}

func FuzzUnmarshalEvent(f *testing.F) {
	b, _ := MarshalEvent(compute.Event{Time: wt0, Site: "s", Machine: "m", Rule: "r", Class: compute.AlertPerformance, From: compute.AlertFiring,
		To: compute.AlertResolved, Value: 1, Limit: 2, Since: wt0, Reason: "because"})
	f.Add(b)
	f.Add([]byte(`{"v":1}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		e, err := UnmarshalEvent(b)
		if err != nil {
			if !errors.Is(err, ErrInvalid) {
				t.Fatalf("error not ErrInvalid: %v", err)
			}
			return
		}
		b2, err := MarshalEvent(e)
		if err != nil {
			t.Fatalf("decoded event does not encode: %v", err)
		}
		e2, err := UnmarshalEvent(b2)
		if err != nil || !reflect.DeepEqual(e, e2) {
			t.Fatalf("round trip: %v\n%+v\n%+v", err, e, e2)
		}
	})
}
