package payload

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"time"

	"github.com/exergywatch/exergywatch/ingest"
)

type jsonSample struct {
	Tag     *string         `json:"tag"`
	TS      json.RawMessage `json:"ts"`
	Value   json.RawMessage `json:"value"`
	Quality *string         `json:"quality"`
	Status  json.RawMessage `json:"status"`
}

func (d *Decoder) decodeJSON(data []byte, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	t := bytes.TrimLeft(data, " \t\r\n")
	if len(t) == 0 {
		return dst, append(errs, Error{Err: fmt.Errorf("%w: empty payload", ErrSyntax)})
	}
	if t[0] == '[' {
		var items []json.RawMessage
		if err := json.Unmarshal(t, &items); err != nil {
			return dst, append(errs, Error{Err: fmt.Errorf("%w: %v", ErrSyntax, err)})
		}
		for _, it := range items {
			dst, errs = d.jsonOne(it, nil, recv, dst, errs)
		}
		return dst, errs
	}
	// An object: a batch if it has "samples", else one sample.
	var probe struct {
		TS      json.RawMessage   `json:"ts"`
		Samples []json.RawMessage `json:"samples"`
		Tag     json.RawMessage   `json:"tag"`
	}
	if err := json.Unmarshal(t, &probe); err != nil {
		return dst, append(errs, Error{Err: fmt.Errorf("%w: %v", ErrSyntax, err)})
	}
	if probe.Samples != nil {
		var def *time.Time
		if len(probe.TS) > 0 && string(probe.TS) != "null" {
			ts, err := parseJSONTime(probe.TS)
			if err != nil {
				return dst, append(errs, Error{Err: err})
			}
			def = &ts
		}
		for _, it := range probe.Samples {
			dst, errs = d.jsonOne(it, def, recv, dst, errs)
		}
		return dst, errs
	}
	return d.jsonOne(t, nil, recv, dst, errs)
}

func (d *Decoder) jsonOne(raw []byte, defTS *time.Time, recv time.Time, dst []ingest.Sample, errs []Error) ([]ingest.Sample, []Error) {
	var js jsonSample
	if err := json.Unmarshal(raw, &js); err != nil {
		return dst, append(errs, Error{Err: fmt.Errorf("%w: %v", ErrSyntax, err)})
	}
	if js.Tag == nil || *js.Tag == "" {
		return dst, append(errs, Error{Err: ErrNoTag})
	}
	tag := d.name([]byte(*js.Tag))
	s := ingest.Sample{Tag: tag, ReceiveTime: recv}
	if len(js.Value) == 0 || string(js.Value) == "null" {
		return dst, append(errs, Error{Tag: tag, Err: ErrNoValue})
	}
	switch string(js.Value) {
	case "true":
		s.Value = 1
	case "false":
		s.Value = 0
	default:
		if c := js.Value[0]; c != '-' && (c < '0' || c > '9') {
			return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: %s", ErrBadValue, truncate(js.Value))})
		}
		v, err := strconv.ParseFloat(string(js.Value), 64)
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: %s", ErrBadValue, truncate(js.Value))})
		}
		s.Value = v
	}
	if len(js.TS) > 0 && string(js.TS) != "null" {
		ts, err := parseJSONTime(js.TS)
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: err})
		}
		s.SourceTime = ts
	} else if defTS != nil {
		s.SourceTime = *defTS
	}
	if len(js.Status) > 0 && string(js.Status) != "null" {
		c, err := strconv.ParseUint(string(js.Status), 10, 32)
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: fmt.Errorf("%w: %s", ErrBadStatus, truncate(js.Status))})
		}
		s.StatusCode, s.HasStatus = uint32(c), true
		s.Quality = ingest.QualityFromStatus(uint32(c))
	}
	if js.Quality != nil {
		q, err := parseQuality(*js.Quality)
		if err != nil {
			return dst, append(errs, Error{Tag: tag, Err: err})
		}
		s.Quality = q
	}
	return append(dst, s), errs
}

// Unix milliseconds accepted for "ts": a float64 keeps 1 µs resolution up
// to year 2255 at this magnitude; values beyond ±1e15 ms (year 33658) are
// refused here, the pipeline judges plausibility.
const maxAbsMillis = 1e15

func parseJSONTime(raw json.RawMessage) (time.Time, error) {
	if len(raw) > 0 && raw[0] == '"' {
		var s string
		if err := json.Unmarshal(raw, &s); err != nil {
			return time.Time{}, fmt.Errorf("%w: %v", ErrBadTime, err)
		}
		t, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			return time.Time{}, fmt.Errorf("%w: %v", ErrBadTime, err)
		}
		return t, nil
	}
	ms, err := strconv.ParseFloat(string(raw), 64)
	if err != nil || math.IsNaN(ms) || math.Abs(ms) > maxAbsMillis {
		return time.Time{}, fmt.Errorf("%w: %s is not RFC 3339 text or Unix milliseconds", ErrBadTime, truncate(raw))
	}
	sec := math.Floor(ms / 1000)
	ns := math.Round((ms - sec*1000) * 1e6)
	return time.Unix(int64(sec), int64(ns)).UTC(), nil
}

func truncate(b []byte) string {
	if len(b) > 40 {
		return string(b[:40]) + "..."
	}
	return string(b)
}
