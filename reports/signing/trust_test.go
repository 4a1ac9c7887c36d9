package signing_test

import (
	"errors"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"trimline/reports/signing"
)

func keyIn(t *testing.T, dir, name string) *signing.Key {
	t.Helper()
	priv, _, err := signing.Init(dir, name)
	if err != nil {
		t.Fatal(err)
	}
	k, err := signing.Load(priv)
	if err != nil {
		t.Fatal(err)
	}
	return k
}

// STATION.pub binds its key to the station; approvers/NAME.pub is an approver.
func TestTrustDir(t *testing.T) {
	dir := t.TempDir()
	st := keyIn(t, dir, "TL1")
	qe := keyIn(t, filepath.Join(dir, "approvers"), "Demo QE")
	tr, err := signing.TrustDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !tr.Bound("TL1") || !tr.SignedByStation("TL1", st.ID()) || tr.Bound("TL2") {
		t.Errorf("station binding: TL1 bound %v, signed %v; TL2 bound %v", tr.Bound("TL1"), tr.SignedByStation("TL1", st.ID()), tr.Bound("TL2"))
	}
	a, ok := tr.Approver(qe.ID())
	if !ok || a.Name != "Demo QE" || !a.Can(signing.MayRelease) || !a.Can(signing.MayVoid) {
		t.Errorf("approver: %+v %v", a, ok)
	}
	if _, ok := tr.Approver(st.ID()); ok {
		t.Error("the station key is an approver")
	}
}

// A trust file binds stations by key file or by full fingerprint; a key found
// elsewhere is admitted only when its fingerprint is bound.
func TestLoadTrust(t *testing.T) {
	dir := t.TempDir()
	st := keyIn(t, filepath.Join(dir, "keys"), "TL1")
	other := keyIn(t, filepath.Join(dir, "elsewhere"), "TL2")
	forged := keyIn(t, filepath.Join(dir, "elsewhere"), "forged")
	qe := keyIn(t, filepath.Join(dir, "keys", "approvers"), "qe")
	path := filepath.Join(dir, "trust.yaml")
	data := "trust:\n  stations:\n    - {id: TL1, public_key: keys/TL1.pub}\n    - {id: TL2, fingerprint: \"" + signing.Fingerprint(other.Public) + "\"}\n" +
		"  approvers:\n    - {name: Demo Quality Engineer, public_key: keys/approvers/qe.pub, may: [release]}\n"
	if err := os.WriteFile(path, []byte(data), 0o644); err != nil {
		t.Fatal(err)
	}
	tr, err := signing.LoadTrust(path)
	if err != nil {
		t.Fatal(err)
	}
	if !tr.SignedByStation("TL1", st.ID()) || !tr.Bound("TL2") || tr.SignedByStation("TL2", other.ID()) {
		t.Fatal("bindings before Admit are wrong")
	}
	if tr.Admit(forged.Public) || tr.SignedByStation("TL2", forged.ID()) {
		t.Error("a key whose fingerprint is not bound was admitted")
	}
	if !tr.Admit(other.Public) || !tr.SignedByStation("TL2", other.ID()) {
		t.Error("the key with the bound fingerprint was not admitted")
	}
	a, ok := tr.Approver(qe.ID())
	if !ok || a.Name != "Demo Quality Engineer" || !a.Can(signing.MayRelease) || a.Can(signing.MayVoid) {
		t.Errorf("approver %+v %v", a, ok)
	}
	if got := strings.Join(tr.Stations(), ","); got != "TL1,TL2" {
		t.Errorf("stations %s", got)
	}
}

func TestLoadTrustErrors(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "trust.yaml")
	os.WriteFile(path, []byte("trust:\n  stations:\n    - {id: TL1}\n    - {id: TL2, fingerprint: abc}\n  approvers:\n    - {name: X, public_key: nope.pub, may: [sign]}\n"), 0o644)
	_, err := signing.LoadTrust(path)
	if err == nil {
		t.Fatal("a bad trust file loaded")
	}
	for _, want := range []string{"trust.yaml:3:", "exactly one of public_key", "trust.yaml:4:", "sha256: and 64 hex digits", `"sign": expected release or void`, "nope.pub"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error lacks %q:\n%v", want, err)
		}
	}
}

// A key folder or trust file that group or others may write is refused.
func TestTrustRefusesWritableFolders(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("modes do not express write access on Windows")
	}
	dir := t.TempDir()
	keyIn(t, dir, "TL1")
	if err := os.Chmod(dir, 0o777); err != nil {
		t.Fatal(err)
	}
	if _, err := signing.TrustDir(dir); !errors.Is(err, signing.ErrUnsafeKeyFolder) {
		t.Errorf("0777 key folder: %v", err)
	}
	os.Chmod(dir, 0o755)
	os.Chmod(filepath.Join(dir, "TL1.pub"), 0o666)
	if _, err := signing.TrustDir(dir); !errors.Is(err, signing.ErrUnsafeKeyFolder) {
		t.Errorf("0666 public key: %v", err)
	}
	os.Chmod(filepath.Join(dir, "TL1.pub"), 0o644)
	path := filepath.Join(dir, "trust.yaml")
	os.WriteFile(path, []byte("trust:\n  stations:\n    - {id: TL1, public_key: TL1.pub}\n"), 0o644)
	os.Chmod(path, 0o664)
	if _, err := signing.LoadTrust(path); !errors.Is(err, signing.ErrUnsafeKeyFolder) {
		t.Errorf("group-writable trust file: %v", err)
	}
	os.Chmod(path, 0o644)
	if _, err := signing.LoadTrust(path); err != nil {
		t.Errorf("a safe trust file: %v", err)
	}
}
