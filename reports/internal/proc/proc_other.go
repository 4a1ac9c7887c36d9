//go:build !unix && !windows

package proc

// alive cannot tell here; a lease's expiry decides alone.
func alive(int) bool { return true }
