package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/signing"
)

// voidFixture runs the demo for three units and returns its folder, the ledger,
// the first certificate's number and PDF, the demo approver's key and the demo's
// trust file.
func voidFixture(t *testing.T) (dir, led, num, pdf, key, trust string) {
	t.Helper()
	dir = t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "3"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf"))
	if len(pdfs) != 3 {
		t.Fatalf("%d certificates", len(pdfs))
	}
	return dir, filepath.Join(dir, "ledger.db"), strings.SplitN(filepath.Base(pdfs[0]), "_", 2)[0], pdfs[0],
		filepath.Join(dir, "keys", "approvers", "demo-qe.key"), filepath.Join(dir, "keys", "trust.yaml")
}

// A void is signed by an approver trusted to void: without a key, with a key no
// trust names, with an approver who may only release, or with a --by that is not
// the trust entry's name it is refused and nothing is voided; the name recorded
// is the trust entry's, and verify names the approver who signed.
func TestVoidNeedsTrustedApprover(t *testing.T) {
	dir, led, num, pdf, key, trust := voidFixture(t)
	stranger, _, err := signing.Init(filepath.Join(dir, "elsewhere"), "stranger")
	if err != nil {
		t.Fatal(err)
	}
	releaseOnly := filepath.Join(dir, "keys", "release-only.yaml")
	os.WriteFile(releaseOnly, []byte("trust:\n  approvers:\n    - {name: Rel Only, public_key: approvers/demo-qe.pub, may: [release]}\n"), 0o600)
	for name, args := range map[string][]string{
		"no key":        {"--by", "Q. Engineer", "--trust", trust},
		"no trust":      {"--key", key},
		"untrusted key": {"--key", stranger, "--trust", trust},
		"may not void":  {"--key", key, "--trust", releaseOnly},
		"--by differs":  {"--key", key, "--trust", trust, "--by", "Q. Engineer"},
	} {
		code, out, errOut := runCLI(t, append([]string{"audit", "void", num, "--ledger", led, "--reason", "wrong fixture"}, args...)...)
		if code != exitUsage {
			t.Errorf("%s: exit %d\n%s%s", name, code, out, errOut)
		}
		if name == "untrusted key" && !strings.Contains(errOut, "not an approver's") {
			t.Errorf("untrusted key: %s", errOut)
		}
		if name == "may not void" && !strings.Contains(errOut, "Rel Only") {
			t.Errorf("may not void: %s", errOut)
		}
	}
	if code, out, _ := runCLI(t, "audit", "verify", pdf, "--trust", trust); code != 0 || !strings.HasPrefix(out, "GENUINE") {
		t.Fatalf("a refused void voided the certificate: exit %d\n%s", code, out)
	}
	code, out, errOut := runCLI(t, "audit", "void", num, "--ledger", led, "--reason", "wrong fixture", "--key", key, "--keys", filepath.Join(dir, "keys"))
	if code != 0 || !strings.Contains(out, "voided by demo-qe (signed ed25519:") {
		t.Fatalf("void by the approver of --keys: exit %d\n%s%s", code, out, errOut)
	}
	code, out, _ = runCLI(t, "audit", "verify", pdf, "--keys", filepath.Join(dir, "keys"))
	if code != exitFail || !strings.Contains(out, "VOIDED by demo-qe on ") || !strings.Contains(out, "signed ed25519:") || strings.Contains(out, "unsigned") {
		t.Errorf("verify a signed void: exit %d\n%s", code, out)
	}
	// The auditor's trust file names the same key Demo Quality Engineer: the
	// name shown is the auditor's trust entry's, beside the one recorded.
	code, out, _ = runCLI(t, "audit", "verify", pdf, "--trust", trust)
	if code != exitFail || !strings.Contains(out, "VOIDED by Demo Quality Engineer (recorded as demo-qe) on ") {
		t.Errorf("verify with the trust file: exit %d\n%s", code, out)
	}
	// A key the auditor does not trust to void: still voided, flagged.
	releaseOnlyVerify := filepath.Join(dir, "keys", "release-only-verify.yaml")
	os.WriteFile(releaseOnlyVerify, []byte("trust:\n  stations:\n    - {id: TL1, public_key: TL1.pub}\n"+
		"  approvers:\n    - {name: Rel Only, public_key: approvers/demo-qe.pub, may: [release]}\n"), 0o600)
	code, out, _ = runCLI(t, "audit", "verify", pdf, "--trust", releaseOnlyVerify)
	if code != exitFail || !strings.HasPrefix(out, "VOIDED") || !strings.Contains(out, "not signed by a trusted approver") {
		t.Errorf("verify with an approver who may not void: exit %d\n%s", code, out)
	}
}

// A void recorded without a signature (as every void before voids were signed)
// still voids, but verify flags it: no trusted approver stands behind it.
func TestUnsignedVoidIsFlagged(t *testing.T) {
	_, ledPath, num, pdf, _, trust := voidFixture(t)
	led, err := ledger.Open(context.Background(), ledPath)
	if err != nil {
		t.Fatal(err)
	}
	if err := led.VoidCertificate(context.Background(), num, "Q. Engineer", "wrong fixture"); err != nil {
		t.Fatal(err)
	}
	led.Close()
	code, out, _ := runCLI(t, "audit", "verify", pdf, "--trust", trust)
	if code != exitFail || !strings.HasPrefix(out, "VOIDED") || !strings.Contains(out, "unsigned void") || !strings.Contains(out, "recorded as by Q. Engineer") {
		t.Errorf("unsigned void: exit %d\n%s", code, out)
	}
}

// From the seal alone, verify says it cannot know about voids.
func TestSealOnlySaysNothingOfVoids(t *testing.T) {
	dir, _, _, pdf, _, _ := voidFixture(t)
	code, out, _ := runCLI(t, "audit", "verify", "--no-ledger", "--keys", filepath.Join(dir, "keys"), pdf)
	if code != 0 || !strings.HasPrefix(out, "GENUINE") || !strings.Contains(out, "cannot tell whether the certificate was voided") {
		t.Errorf("seal only: exit %d\n%s", code, out)
	}
}
