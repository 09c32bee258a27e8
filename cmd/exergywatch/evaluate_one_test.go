package main

import (
	"context"
	"fmt"
	"reflect"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/exergywatch/exergywatch/compute"
	"github.com/exergywatch/exergywatch/config"
	"github.com/exergywatch/exergywatch/ingest"
)

// evaluateBatch evaluates the machines of a tick concurrently (one lock per
// evaluator); the records it writes are the records of evaluating the same
// snapshots one at a time with evaluateOne, machine by machine in tick
// order, while the status API reads every evaluator under its lock. The
// reference is the sequential evaluation of the same code; run it with
// -race.
func TestEvaluateBatchConcurrentEqualsSequential(t *testing.T) {
	const ticks = 40
	sp := newSynthPlant(t, yearOptions(replayStart, 2), time.Minute, ticks*time.Minute, time.Hour)
	type key struct {
		machine string
		at      time.Time
	}
	build := func(dir string, got map[key]compute.Record, mu *sync.Mutex) *pipeline {
		cfg, err := config.Load(replayConfig(t, dir, 2, time.Minute, time.Minute))
		if err != nil {
			t.Fatal(err)
		}
		cfg.Sinks = nil
		p, err := buildPipeline(cfg, pipelineOptions{log: testLog(t), onRecord: func(r compute.Record) {
			mu.Lock()
			got[key{r.Machine, r.Time}] = cloneRecord(r)
			mu.Unlock()
		}})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { _ = p.close() })
		return p
	}
	var muC, muS sync.Mutex
	conc, seq := map[key]compute.Record{}, map[key]compute.Record{}
	pc, ps := build(t.TempDir(), conc, &muC), build(t.TempDir(), seq, &muS)
	if len(pc.order) < 4 {
		t.Fatalf("%d machines: too few to exercise concurrency", len(pc.order))
	}
	stop := make(chan struct{})
	var reads atomic.Int64
	var wg sync.WaitGroup
	wg.Add(1)
	go func() { // the status API, reading while the machines evaluate
		defer wg.Done()
		for {
			select {
			case <-stop:
				return
			default:
			}
			_ = pc.status()
			_ = pc.alertsView(5)
			reads.Add(1)
			time.Sleep(200 * time.Microsecond)
		}
	}()
	var batch []ingest.Sample
	evals := 0
	for k := 1; k <= ticks; k++ {
		tick := replayStart.Add(time.Duration(k) * time.Minute)
		batch = batch[:0]
		for {
			at, more := sp.nextTime()
			if !more || at.After(tick) {
				break
			}
			s, _, _ := sp.next()
			batch = append(batch, s)
		}
		pc.engine.Ingest(batch, tick)
		ps.engine.Ingest(batch, tick)
		sc := pc.engine.Evaluate(tick)
		pc.evaluateBatch(context.Background(), sc)
		for _, s := range ps.engine.Evaluate(tick) {
			if o := ps.evaluateOne(context.Background(), s); o.evaluated {
				evals++
			}
		}
	}
	close(stop)
	wg.Wait()
	if evals < ticks*len(ps.order)/2 {
		t.Fatalf("only %d evaluations of %d machines in %d ticks", evals, len(ps.order), ticks)
	}
	if len(conc) != len(seq) || len(seq) != evals {
		t.Fatalf("concurrent %d records, sequential %d, evaluations %d", len(conc), len(seq), evals)
	}
	for k, want := range seq {
		got, ok := conc[k]
		if !ok {
			t.Errorf("%s %v: no record from the concurrent batch", k.machine, k.at)
			continue
		}
		if fmt.Sprint(got) != fmt.Sprint(want) && !reflect.DeepEqual(got, want) {
			t.Errorf("%s %v: concurrent %+v\nsequential %+v", k.machine, k.at, got, want)
		}
	}
	if pc.evaluated.Load() != uint64(evals) {
		t.Errorf("evaluated counter %d, want %d", pc.evaluated.Load(), evals)
	}
	t.Logf("%d evaluations of %d machines, %d status reads during them", evals, len(pc.order), reads.Load())
}
