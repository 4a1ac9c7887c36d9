package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/signing"
)

// forgeUnsigned records serials in a new ledger in dir the way a forger without
// the station key would: the demo's files with the station's signing key taken
// out of the station file (and no release required), so every run is unsigned
// and the certificates carry the genuine station id and numbers. It returns the
// run ids, in the order recorded.
func forgeUnsigned(t *testing.T, dir string, serials ...string) []string {
	t.Helper()
	station, sequence, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	data, _ := os.ReadFile(station)
	data = regexp.MustCompile(`(?m)^signing:\n.*\n.*\n`).ReplaceAll(data, nil)
	data = []byte(strings.Replace(string(data), "require_release: true", "require_release: false", 1))
	if strings.Contains(string(data), "signing:") {
		t.Fatal("the signing key is still in the station file")
	}
	os.WriteFile(station, data, 0o644)
	args := []string{"run", "--station", station, "--sequence", sequence, "--out", dir}
	for _, sn := range serials {
		args = append(args, "--serial", sn)
	}
	if code, out, errOut := runCLI(t, args...); code != exitPass && code != exitFail {
		t.Fatalf("forged run: exit %d\n%s%s", code, out, errOut)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	runs, err := led.Runs(context.Background(), "")
	if err != nil || len(runs) != len(serials) {
		t.Fatalf("forged runs: %d %v", len(runs), err)
	}
	ids := make([]string, len(runs))
	for i, r := range runs {
		ids[len(runs)-1-i] = r.RunID // Runs lists newest first
	}
	return ids
}

// Issue 11, item 1: a ledger rebuilt without the station key (every run unsigned)
// passed every audit. With the station's public key trusted (TL1.pub in --keys),
// every run of TL1 must be signed by it: audit ledger, replay, verify and import
// of such a ledger now fail and name the unsigned runs, while the genuine demo's
// signed ledger still passes all four.
func TestUnsignedLedgerOfATrustedStationFailsEveryAudit(t *testing.T) {
	genuine := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", genuine, "--units", "3"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	keys := filepath.Join(genuine, "keys") // the auditor's copy: TL1.pub binds the key to station TL1

	forged := t.TempDir()
	ids := forgeUnsigned(t, forged, "BRX-00001", "BRX-00002", "BRX-00003")
	led := filepath.Join(forged, "ledger.db")
	names := func(out string) bool {
		for _, id := range ids {
			if !strings.Contains(out, id) {
				return false
			}
		}
		return true
	}

	code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", keys)
	if code != exitFail || strings.Contains(out, "chain intact") || !strings.Contains(out, "unsigned") || !names(out) {
		t.Errorf("audit ledger of the unsigned ledger: exit %d, want 1 naming every unsigned run %v\n%s%s", code, ids, out, errOut)
	}
	code, out, errOut = runCLI(t, "audit", "replay", "BRX-00002", "--ledger", led, "--keys", keys)
	if code != exitFail || strings.Contains(out, "reproduced exactly") || !strings.Contains(out, ids[1]) || !strings.Contains(out, "unsigned") {
		t.Errorf("audit replay of an unsigned run: exit %d, want 1 naming run %s\n%s%s", code, ids[1], out, errOut)
	}
	cert := filepath.Join(forged, "certificates", "TL1-000001_BRX-00001.pdf")
	code, out, errOut = runCLI(t, "audit", "verify", cert, "--ledger", led, "--keys", keys)
	if code == exitPass || strings.HasPrefix(out, "GENUINE") || !strings.Contains(out, ids[0]) || !strings.Contains(out, "unsigned") {
		t.Errorf("audit verify of an unsigned certificate: exit %d, want not genuine naming run %s\n%s%s", code, ids[0], out, errOut)
	}
	zip := filepath.Join(t.TempDir(), "forged.zip")
	if code, out, errOut := runCLI(t, "export", "TL1-000003", "--ledger", led, "--out", zip); code != 0 {
		t.Fatalf("export: exit %d\n%s%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "import", zip, "--ledger", filepath.Join(t.TempDir(), "audit.db"), "--keys", keys)
	if code == exitPass || !strings.Contains(errOut, ids[2]) || !strings.Contains(errOut, "unsigned") {
		t.Errorf("import of an unsigned bundle: exit %d, want refused naming run %s\n%s%s", code, ids[2], out, errOut)
	}

	// The genuine, signed ledger passes all four.
	gled := filepath.Join(genuine, "ledger.db")
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", gled, "--keys", keys); code != exitPass || !strings.Contains(out, "chain intact") {
		t.Errorf("audit ledger of the signed demo: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "audit", "replay", "BRX-00002", "--ledger", gled, "--keys", keys); code != exitPass || !strings.Contains(out, "reproduced exactly") {
		t.Errorf("audit replay of the signed demo: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "audit", "verify", filepath.Join(genuine, "certificates", "TL1-000001_BRX-00001.pdf"), "--keys", keys); code != exitPass || !strings.HasPrefix(out, "GENUINE") {
		t.Errorf("audit verify of the signed demo: exit %d\n%s%s", code, out, errOut)
	}
	gzip := filepath.Join(t.TempDir(), "genuine.zip")
	if code, out, errOut := runCLI(t, "export", "TL1-000003", "--ledger", gled, "--out", gzip); code != 0 {
		t.Fatalf("export: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "import", gzip, "--ledger", filepath.Join(t.TempDir(), "audit.db"), "--keys", keys); code != exitPass {
		t.Errorf("import of the signed demo's bundle: exit %d\n%s%s", code, out, errOut)
	}
}

// fingerprint is signing.Fingerprint, worked here so that the test reads the same
// on code that has none.
func fingerprint(t *testing.T, pubFile string) string {
	t.Helper()
	pub, err := signing.LoadPublic(pubFile)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(pub)
	return "sha256:" + hex.EncodeToString(sum[:])
}

// Issue 11, item 3: keys beside the ledger were trusted by default, so a forger
// who signed with a key of their own and left its public key there got GENUINE.
// No key is trusted by default now: without --keys or --trust, audit verify,
// audit ledger, audit replay and import cannot decide (exit 2, saying so); with
// the genuine station key the forger's certificate is not genuine; a key beside
// the ledger counts only when a trust file bound its full fingerprint.
func TestNoKeyIsTrustedByDefault(t *testing.T) {
	genuine := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", genuine, "--units", "1"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	// The forger's demo makes a key of its own, keys/TL1.pub beside its ledger.
	forged := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", forged, "--units", "1"); code != 0 {
		t.Fatalf("forger's demo: exit %d\n%s%s", code, out, errOut)
	}
	cert := filepath.Join(forged, "certificates", "TL1-000001_BRX-00001.pdf")
	led := filepath.Join(forged, "ledger.db")
	for _, args := range [][]string{
		{"audit", "verify", cert},
		{"audit", "verify", cert, "--no-ledger"},
		{"audit", "ledger", "--ledger", led},
		{"audit", "replay", "BRX-00001", "--ledger", led},
	} {
		code, out, errOut := runCLI(t, args...)
		if code != exitUsage || strings.HasPrefix(out, "GENUINE") || !strings.Contains(errOut, "no trusted keys: give --keys DIR or --trust FILE") {
			t.Errorf("%v without trusted keys: exit %d, want 2 saying it cannot decide\n%s%s", args, code, out, errOut)
		}
	}
	zip := filepath.Join(t.TempDir(), "b.zip")
	if code, out, errOut := runCLI(t, "export", "TL1-000001", "--ledger", led, "--out", zip); code != 0 {
		t.Fatalf("export: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "import", zip, "--ledger", filepath.Join(t.TempDir(), "a.db")); code != exitUsage || !strings.Contains(errOut, "no trusted keys") {
		t.Errorf("import without trusted keys: exit %d, want 2\n%s%s", code, out, errOut)
	}
	// With the genuine station's key the forger's signature is another key's.
	code, out, errOut := runCLI(t, "audit", "verify", cert, "--keys", filepath.Join(genuine, "keys"))
	if code != exitFail || !strings.HasPrefix(out, "UNKNOWN") || !strings.Contains(out, "not a trusted key of station TL1") {
		t.Errorf("forger's certificate against the genuine key: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "import", zip, "--ledger", filepath.Join(t.TempDir(), "a.db"), "--keys", filepath.Join(genuine, "keys")); code != exitFail {
		t.Errorf("import of the forger's bundle against the genuine key: exit %d\n%s%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "audit", "ledger", "--ledger", led, "--keys", filepath.Join(genuine, "keys"))
	if code != exitFail || strings.Contains(out, "chain intact") || !strings.Contains(out, "which is not a trusted key of station TL1") {
		t.Errorf("audit ledger of the forger's ledger against the genuine key: exit %d, want 1 naming the other key\n%s%s", code, out, errOut)
	}
	// A folder that binds no key to TL1 leaves its runs unchecked: said, and not intact.
	code, out, errOut = runCLI(t, "audit", "ledger", "--ledger", led, "--keys", t.TempDir())
	if code != exitFail || strings.Contains(out, "chain intact") || !strings.Contains(out, "station TL1: no trusted key is bound to it") {
		t.Errorf("audit ledger with no key for its station: exit %d, want 1 naming the station\n%s%s", code, out, errOut)
	}

	// A trust file kept by the auditor: by key file, or by full fingerprint, whose
	// key is then admitted from beside the ledger or from a bundle.
	adir := t.TempDir()
	os.WriteFile(filepath.Join(adir, "TL1.pub"), mustRead(t, filepath.Join(genuine, "keys", "TL1.pub")), 0o644)
	byFile := filepath.Join(adir, "by-file.yaml")
	os.WriteFile(byFile, []byte("trust:\n  stations:\n    - {id: TL1, public_key: TL1.pub}\n"), 0o644)
	byPrint := filepath.Join(adir, "by-fingerprint.yaml")
	os.WriteFile(byPrint, []byte("trust:\n  stations:\n    - {id: TL1, fingerprint: \""+fingerprint(t, filepath.Join(genuine, "keys", "TL1.pub"))+"\"}\n"), 0o644)
	gcert := filepath.Join(genuine, "certificates", "TL1-000001_BRX-00001.pdf")
	for _, tf := range []string{byFile, byPrint} {
		if code, out, errOut := runCLI(t, "audit", "verify", gcert, "--trust", tf); code != exitPass || !strings.HasPrefix(out, "GENUINE") {
			t.Errorf("genuine certificate with %s: exit %d\n%s%s", filepath.Base(tf), code, out, errOut)
		}
		if code, out, errOut := runCLI(t, "audit", "verify", cert, "--trust", tf); code != exitFail || strings.HasPrefix(out, "GENUINE") {
			t.Errorf("forger's certificate with %s: exit %d\n%s%s", filepath.Base(tf), code, out, errOut)
		}
	}
	gzip := filepath.Join(t.TempDir(), "g.zip")
	if code, out, errOut := runCLI(t, "export", "TL1-000001", "--ledger", filepath.Join(genuine, "ledger.db"), "--out", gzip); code != 0 {
		t.Fatalf("export: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "import", gzip, "--ledger", filepath.Join(t.TempDir(), "a.db"), "--trust", byPrint); code != exitPass {
		t.Errorf("import with the key admitted from the bundle by its fingerprint: exit %d\n%s%s", code, out, errOut)
	}
	if code, _, errOut := runCLI(t, "audit", "verify", gcert, "--trust", byFile, "--keys", adir); code != exitUsage {
		t.Errorf("--keys and --trust together: exit %d %s", code, errOut)
	}
}

func mustRead(t *testing.T, path string) []byte {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// Issue 11, item 4: inside certificates/ with a bare file name the ledger was not
// found and verify fell back to the seal in silence, calling a voided certificate
// GENUINE. The ledger is found from the certificate's own folder (its parent holds
// ledger.db), and with no ledger there verify refuses unless --no-ledger asks
// for the seal alone, whose verdict says what it did not check.
func TestVoidedCertificateVerifiedByBareNameInsideCertificates(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "2"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	if code, _, errOut := runCLI(t, "audit", "void", "TL1-000001", "--ledger", filepath.Join(dir, "ledger.db"), "--key", filepath.Join(dir, "keys", "approvers", "demo-qe.key"),
		"--trust", filepath.Join(dir, "keys", "trust.yaml"), "--reason", "wrong fixture"); code != 0 {
		t.Fatalf("void: exit %d %s", code, errOut)
	}
	t.Chdir(filepath.Join(dir, "certificates"))
	code, out, errOut := runCLI(t, "audit", "verify", "TL1-000001_BRX-00001.pdf", "--keys", filepath.Join("..", "keys"))
	if code != exitFail || strings.Contains(out, "GENUINE") || !strings.HasPrefix(out, "VOIDED") || !strings.Contains(out, "wrong fixture") {
		t.Errorf("voided certificate by its bare name: exit %d, want VOIDED and 1\n%s%s", code, out, errOut)
	}

	// A copy away from any ledger: refused, never a silent seal-only GENUINE.
	lone := t.TempDir()
	for _, f := range []string{"TL1-000002_BRX-00002.pdf", "TL1-000002_BRX-00002.pdf.seal"} {
		os.WriteFile(filepath.Join(lone, f), mustRead(t, f), 0o644)
	}
	t.Chdir(lone)
	code, out, errOut = runCLI(t, "audit", "verify", "TL1-000002_BRX-00002.pdf", "--keys", filepath.Join(dir, "keys"))
	if code != exitUsage || strings.Contains(out, "GENUINE") || !strings.Contains(errOut, "--no-ledger") {
		t.Errorf("certificate without a ledger: exit %d, want 2 pointing at --ledger and --no-ledger\n%s%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "audit", "verify", "TL1-000002_BRX-00002.pdf", "--no-ledger", "--keys", filepath.Join(dir, "keys"))
	if code != exitPass || !strings.Contains(strings.SplitN(out, "\n", 2)[0], "voids, supersedes and the chain not checked") {
		t.Errorf("seal alone: exit %d, want 0 with the caveat in its verdict line\n%s%s", code, out, errOut)
	}
}

// Issue 11, item 7: key folders that group or others may write were accepted
// (mode 0777). The auditor's --keys folder, the station's release_keys folder and
// the folder of the station's own private key are refused, naming the folder and
// the fix, exit 2.
func TestKeyFoldersWritableByOthersRefused(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("Windows file modes say nothing of who may write a folder")
	}
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	if code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-00001"); code != exitPass {
		t.Fatalf("run: exit %d\n%s%s", code, out, errOut)
	}
	keys, approvers := filepath.Join(dir, "keys"), filepath.Join(dir, "keys", "approvers")
	cert := filepath.Join(dir, "certificates", "TL1-000001_BRX-00001.pdf")
	refused := func(what string, wantIn string, args ...string) {
		t.Helper()
		code, out, errOut := runCLI(t, args...)
		if code != exitUsage || !strings.Contains(errOut, "group or others may write") || !strings.Contains(errOut, wantIn) {
			t.Errorf("%s: exit %d, want 2 naming %s\n%s%s", what, code, wantIn, out, errOut)
		}
	}

	os.Chmod(keys, 0o777)
	refused("audit verify --keys of a folder anyone may write", keys, "audit", "verify", cert, "--keys", keys)
	refused("audit ledger --keys of a folder anyone may write", keys, "audit", "ledger", "--ledger", filepath.Join(dir, "ledger.db"), "--keys", keys)
	refused("a run signing with a private key in a folder anyone may write", keys,
		"run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-00002")
	os.Chmod(keys, 0o700)

	os.Chmod(approvers, 0o777)
	refused("a run whose release_keys folder anyone may write", approvers,
		"run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-00003")
	os.Chmod(approvers, 0o775)
	refused("a run whose release_keys folder its group may write", approvers,
		"run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-00003")
	os.Chmod(approvers, 0o700)

	if code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-00004"); code != exitPass {
		t.Errorf("with the folders put right: exit %d\n%s%s", code, out, errOut)
	}
}

// Issue 11, item 1, the rule for the whole station: an unsigned run appended to a
// station's signed chain makes its earlier, signed certificates not genuine too,
// and audit ledger names the run.
func TestUnsignedRunInASignedChain(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "1"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	keys := t.TempDir()
	os.WriteFile(filepath.Join(keys, "TL1.pub"), mustRead(t, filepath.Join(dir, "keys", "TL1.pub")), 0o644)
	station := filepath.Join(dir, "brx200-station.yaml")
	data := regexp.MustCompile(`(?m)^signing:\n.*\n.*\n`).ReplaceAll(mustRead(t, station), nil)
	os.WriteFile(station, data, 0o644)
	if code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", filepath.Join(dir, "brx200-sequence.yaml"), "--out", dir, "--serial", "BRX-00002"); code != exitPass {
		t.Fatalf("unsigned run: exit %d\n%s%s", code, out, errOut)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	runs, _ := led.Runs(context.Background(), "BRX-00002")
	led.Close()
	if len(runs) != 1 {
		t.Fatalf("%d runs of BRX-00002", len(runs))
	}
	code, out, errOut := runCLI(t, "audit", "verify", filepath.Join(dir, "certificates", "TL1-000001_BRX-00001.pdf"), "--keys", keys)
	if code != exitFail || !strings.HasPrefix(out, "ALTERED") || !strings.Contains(out, runs[0].RunID) {
		t.Errorf("signed certificate of a chain holding an unsigned run: exit %d, want ALTERED naming run %s\n%s%s", code, runs[0].RunID, out, errOut)
	}
	code, out, errOut = runCLI(t, "audit", "ledger", "--ledger", filepath.Join(dir, "ledger.db"), "--keys", keys)
	if code != exitFail || !strings.Contains(out, runs[0].RunID+" (TL1-000002, serial BRX-00002) of station TL1: unsigned") {
		t.Errorf("audit ledger: exit %d, want 1 naming run %s\n%s%s", code, runs[0].RunID, out, errOut)
	}
}
