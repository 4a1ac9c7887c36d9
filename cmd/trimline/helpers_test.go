package main

import (
	"context"
	"errors"
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
