package signing_test

import (
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"trimline/reports/signing"
)

// A station's release_keys folder holds approvers only: NAME.pub is the approver
// NAME, and no station is bound by it.
func TestApproverDir(t *testing.T) {
	dir := t.TempDir()
	qe := keyIn(t, dir, "demo-qe")
	tr, err := signing.ApproverDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	a, ok := tr.Approver(qe.ID())
	if !ok || a.Name != "demo-qe" || !a.Can(signing.MayRelease) || !a.Can(signing.MayVoid) {
		t.Errorf("approver %+v %v", a, ok)
	}
	if tr.Bound("demo-qe") {
		t.Error("an approver's key was bound as a station's")
	}
	if runtime.GOOS != "windows" {
		if err := os.Chmod(dir, 0o777); err != nil {
			t.Fatal(err)
		}
		if _, err := signing.ApproverDir(dir); err == nil {
			t.Error("a folder anyone may write was trusted")
		}
	}
	if _, err := signing.ApproverDir(filepath.Join(dir, "missing")); err == nil {
		t.Error("a missing folder gave approvers")
	}
}
