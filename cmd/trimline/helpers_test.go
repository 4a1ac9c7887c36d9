package main

import (
	"bytes"
	"context"
	"errors"
	"testing"
	"time"

	"trimline/reports/signing"
	"trimline/sequencer"
)

// testNow is a fixed "today" for tests that write demo files.
func testNow() time.Time { return time.Now() }

func errorsAs(err error, target any) bool { return errors.As(err, target) }

func sequencerOpen(st *sequencer.Station, seq *sequencer.Sequence) (*sequencer.Engine, error) {
	return sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
}

func signingLoad(path string) (*signing.Key, error) { return signing.Load(path) }

// writeReleasedDemo writes the demo files into dir and releases the sequence and
// limit files in dir's ledger, as the demo command does.
func writeReleasedDemo(t testing.TB, dir string, seed uint64) (station, sequence string) {
	t.Helper()
	station, sequence, err := writeDemoFiles(dir, seed, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := releaseDemo(context.Background(), &env{stdout: &out, stderr: &out}, dir); err != nil {
		t.Fatal(err)
	}
	return station, sequence
}
