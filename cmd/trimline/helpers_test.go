package main

import (
	"errors"
	"time"
)

// testNow is a fixed "today" for tests that write demo files.
func testNow() time.Time { return time.Now() }

func errorsAs(err error, target any) bool { return errors.As(err, target) }
