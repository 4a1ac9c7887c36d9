package main

import (
	"bytes"
	"context"
	"errors"
	"testing"
	"time"
)

// testNow is a fixed "today" for tests that write demo files.
func testNow() time.Time { return time.Now() }

func errorsAs(err error, target any) bool { return errors.As(err, target) }

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
