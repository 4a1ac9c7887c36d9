package main

import "time"

// testNow is a fixed "today" for tests that write demo files.
func testNow() time.Time { return time.Now() }
