// Package proc tells whether a process of this host still exists, so that work a
// killed process left held (a lease on a run) can be taken over at once instead of
// after the lease expires.
package proc

// Alive reports whether a process with id pid exists on this host. It errs on the
// side of true: when it cannot tell (no permission to look), the process is taken
// to be alive. A pid the system has reused for another process also reads as
// alive; a lease's expiry bounds that case.
func Alive(pid int) bool {
	if pid <= 0 {
		return false
	}
	return alive(pid)
}
