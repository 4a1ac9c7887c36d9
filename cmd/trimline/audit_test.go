package main

import (
	"bytes"
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
)

// The demo's certificates verify as genuine, an altered copy does not, every demo
// unit replays to exactly its recorded verdicts, the ledger chain verifies, and a
// voided certificate is reported as voided.
func TestAuditDemo(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "25"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	led := filepath.Join(dir, "ledger.db")
	keys := filepath.Join(dir, "keys") // the auditor's copy of the station's public key
	pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf"))
	if len(pdfs) != 25 {
		t.Fatalf("%d certificates", len(pdfs))
	}
	for _, p := range pdfs[:3] {
		if code, out, _ := runCLI(t, "audit", "verify", p, "--keys", keys); code != 0 || !strings.HasPrefix(out, "GENUINE") {
			t.Errorf("%s: exit %d\n%s", p, code, out)
		} else if !strings.HasPrefix(out, "GENUINE — SIMULATED BENCH — NOT A MEASUREMENT: ") || !strings.Contains(out, "no measurement") {
			// A genuine document of a simulated run is not a measurement;
			// its verdict says so on the first line.
			t.Errorf("%s: a simulated run verifies without its mark:\n%s", p, out)
		}
	}
	// An altered copy, with and without its seal beside it, and with no ledger.
	data, _ := os.ReadFile(pdfs[0])
	bad := filepath.Join(t.TempDir(), "altered.pdf")
	data[len(data)/2] ^= 0x20
	os.WriteFile(bad, data, 0o644)
	if code, out, _ := runCLI(t, "audit", "verify", "--ledger", led, "--keys", keys, bad); code != exitFail || !strings.HasPrefix(out, "ALTERED") {
		t.Errorf("altered: exit %d\n%s", code, out)
	}
	seal, _ := os.ReadFile(pdfs[0] + ".seal")
	os.WriteFile(bad+".seal", seal, 0o644)
	if code, out, _ := runCLI(t, "audit", "verify", "--no-ledger", "--keys", keys, bad); code != exitFail || !strings.HasPrefix(out, "ALTERED") {
		t.Errorf("altered, seal only: exit %d\n%s", code, out)
	}
	if code, out, _ := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", keys); code != 0 || !strings.Contains(out, "chain intact") || !strings.Contains(out, "25 signed, 25 verified") {
		t.Errorf("audit ledger: exit %d\n%s", code, out)
	}
	// Replay of every demo unit reproduces its recorded verdicts exactly.
	for i := 1; i <= 25; i++ {
		sn := fmt.Sprintf("BRX-%05d", i)
		if code, out, errOut := runCLI(t, "audit", "replay", "--ledger", led, "--keys", keys, sn); code != 0 || !strings.Contains(out, "reproduced exactly") {
			t.Errorf("replay %s: exit %d\n%s%s", sn, code, out, errOut)
		}
	}
	// A ledger named but unreadable is an error, never a fallback to the seal.
	if code, _, _ := runCLI(t, "audit", "verify", "--ledger", filepath.Join(t.TempDir(), "typo.db"), "--keys", keys, pdfs[0]); code != exitUsage {
		t.Errorf("missing --ledger: exit %d, want 2", code)
	}
	num := strings.SplitN(filepath.Base(pdfs[0]), "_", 2)[0]
	if code, _, errOut := runCLI(t, "audit", "void", num, "--ledger", led, "--key", filepath.Join(dir, "keys", "approvers", "demo-qe.key"),
		"--trust", filepath.Join(dir, "keys", "trust.yaml"), "--reason", "wrong fixture"); code != 0 {
		t.Fatalf("void: %d %s", code, errOut)
	}
	if code, out, _ := runCLI(t, "audit", "verify", pdfs[0], "--trust", filepath.Join(dir, "keys", "trust.yaml")); code != exitFail || !strings.HasPrefix(out, "VOIDED") ||
		!strings.Contains(out, "wrong fixture") || !strings.Contains(out, "VOIDED by Demo Quality Engineer") {
		t.Errorf("voided: exit %d\n%s", code, out)
	}
}

// Kill -9 of a running station at random moments, over 50 runs: the ledger opens
// clean, the chain verifies, certificate numbers stay gap-free, and no published
// PDF lacks its record; the next start republishes any certificate whose document
// was lost, byte-identical.
func TestKillNineCrashSafety(t *testing.T) {
	if testing.Short() {
		t.Skip("50 subprocess kills")
	}
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	serials := make([]string, 40)
	for i := range serials {
		serials[i] = fmt.Sprintf("--serial BRX-9%04d", i)
	}
	rng := rand.New(rand.NewPCG(7, 11))
	ledgerPath := filepath.Join(dir, "ledger.db")
	for kill := 0; kill < 50; kill++ {
		cmd := exec.Command(os.Args[0], "-test.run=^$")
		cmd.Env = append(os.Environ(), "TRIMLINE_AS_MAIN=1",
			"TRIMLINE_ARGS=run --retest --station "+station+" --sequence "+sequence+" --out "+dir+" "+strings.Join(serials, " "))
		var out bytes.Buffer
		cmd.Stdout, cmd.Stderr = &out, &out
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		time.Sleep(time.Duration(20+rng.IntN(400)) * time.Millisecond)
		cmd.Process.Kill()
		cmd.Wait()

		led, err := ledger.Open(context.Background(), ledgerPath)
		if err != nil {
			t.Fatalf("kill %d: ledger does not open: %v\n%s", kill, err, out.String())
		}
		rep, err := led.VerifyChain(context.Background(), "")
		if err != nil || !rep.OK {
			t.Fatalf("kill %d: chain %+v %v", kill, rep, err)
		}
		pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf"))
		for _, p := range pdfs {
			num := strings.SplitN(filepath.Base(p), "_", 2)[0]
			if _, _, err := led.RunByCertificate(context.Background(), num); err != nil {
				t.Fatalf("kill %d: published %s has no record: %v", kill, p, err)
			}
		}
		led.Close()
	}
	// A clean start repairs what the kills left half done.
	code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-99999")
	if code != 0 && code != exitFail {
		t.Fatalf("restart: exit %d\n%s%s", code, out, errOut)
	}
	led, err := ledger.Open(context.Background(), ledgerPath)
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	if missing, err := led.MissingDocuments(context.Background()); err != nil || len(missing) != 0 {
		t.Fatalf("after restart %d certified runs still lack a document (%v)", len(missing), err)
	}
	rep, err := led.VerifyChain(context.Background(), "")
	if err != nil || !rep.OK {
		t.Fatalf("chain after restart: %+v %v", rep, err)
	}
	t.Logf("%d runs, %d certificates, %d documents after 50 kills", rep.Runs, rep.Certificates, rep.Documents)
	// Nor does it leave the temporary files of a certificate or seal being written.
	if tmps, _ := filepath.Glob(filepath.Join(dir, "certificates", ".*.tmp-*")); len(tmps) > 0 {
		t.Errorf("after restart, temporary files are left: %v", tmps)
	}
	if leases, err := led.Leases(context.Background()); err != nil || len(leases) != 0 {
		t.Errorf("after restart, leases are left: %+v %v", leases, err)
	}
	pdfs := mustGlob(t, filepath.Join(dir, "certificates", "*.pdf"))
	for i := 0; i < 10 && len(pdfs) > 0; i++ {
		p := pdfs[rng.IntN(len(pdfs))]
		// Each kill's next start retests the same serials: earlier certificates are
		// superseded, still authentic.
		if code, out, _ := runCLI(t, "audit", "verify", "--ledger", ledgerPath, "--keys", filepath.Join(dir, "keys"), p); code != 0 && !strings.HasPrefix(out, "SUPERSEDED") {
			t.Errorf("%s after crashes: %s", p, out)
		}
	}
	// However the kills fell, no serial holds two current certificates.
	runs, err := led.Runs(context.Background(), "")
	if err != nil {
		t.Fatal(err)
	}
	current := map[string][]string{}
	for _, r := range runs {
		if r.Certificate == "" {
			continue
		}
		st, err := led.CertificateStatus(context.Background(), r.Certificate)
		if err != nil {
			t.Fatal(err)
		}
		if st.Current() {
			current[r.Serial] = append(current[r.Serial], r.Certificate)
		}
	}
	for sn, certs := range current {
		if len(certs) > 1 {
			t.Errorf("%s holds %d current certificates: %v", sn, len(certs), certs)
		}
	}
}

func mustGlob(t *testing.T, pattern string) []string {
	t.Helper()
	m, err := filepath.Glob(pattern)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// A unit's record exports as one bundle, imports into an auditor's ledger on
// another machine, and replays there to exactly what was recorded.
func TestExportImportReplay(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "2"); code != 0 {
		t.Fatalf("demo: %d\n%s%s", code, out, errOut)
	}
	zip := filepath.Join(t.TempDir(), "b.zip")
	if code, out, errOut := runCLI(t, "export", "TL1-000002", "--ledger", filepath.Join(dir, "ledger.db"), "--out", zip); code != 0 {
		t.Fatalf("export: %d\n%s%s", code, out, errOut)
	}
	audit := filepath.Join(t.TempDir(), "audit.db")
	code, out, errOut := runCLI(t, "import", zip, "--ledger", audit, "--keys", filepath.Join(dir, "keys"))
	if code != 0 || !strings.Contains(out, "a trusted key of station TL1") {
		t.Fatalf("import: %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "audit", "replay", "TL1-000002", "--ledger", audit, "--keys", filepath.Join(dir, "keys")); code != 0 || !strings.Contains(out, "reproduced exactly") {
		t.Fatalf("replay of the imported run: %d\n%s%s", code, out, errOut)
	}
	// A bundle with one byte changed does not import.
	data, _ := os.ReadFile(zip)
	data[len(data)/3] ^= 1
	bad := filepath.Join(t.TempDir(), "bad.zip")
	os.WriteFile(bad, data, 0o644)
	if code, _, _ := runCLI(t, "import", bad, "--ledger", audit, "--keys", filepath.Join(dir, "keys")); code == 0 {
		t.Error("an altered bundle was imported")
	}
}
