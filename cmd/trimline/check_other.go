package main

import (
	"bytes"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"trimline/reports/ledger"
	"trimline/reports/signing"
)

// otherFile is a kind of file a station's folder holds besides its three input
// files: what check recognises it by (the first bytes and the name), what it says
// the file is, and either a cheap check through the owning package's loader
// (check) or the command that checks it (elsewhere, given the file's path).
type otherFile struct {
	kind      string
	is        func(name string, head []byte) bool
	check     func(path string) (what string, err error)
	elsewhere func(path string) string
}

// otherFiles are tried in order on a file that is not a station, sequence or
// limit file. The first that recognises the file speaks for it.
var otherFiles = []otherFile{
	{
		kind: "certificate or report (PDF)",
		is:   func(_ string, head []byte) bool { return bytes.HasPrefix(head, []byte("%PDF-")) },
		elsewhere: func(path string) string {
			return "not an input; verify a certificate with: trimline audit verify " + path + " --keys DIR"
		},
	},
	{
		kind: "seal",
		is: func(name string, head []byte) bool {
			return filepath.Ext(name) == ".seal" || bytes.Contains(head, []byte(`"format": "`+signing.SealFormat+`"`))
		},
		check: func(path string) (string, error) {
			s, err := signing.ReadSeal(path)
			if err != nil {
				return "", err
			}
			return fmt.Sprintf("certificate %s (%s), signed by %s; verify it with its PDF: trimline audit verify %s --keys DIR",
				s.Number, s.Serial, s.KeyID, strings.TrimSuffix(path, ".seal")), nil
		},
	},
	{
		kind: "ledger (SQLite)",
		is:   func(_ string, head []byte) bool { return bytes.HasPrefix(head, []byte("SQLite format 3\x00")) },
		elsewhere: func(path string) string {
			return "not an input; check its chain and signatures with: trimline audit ledger --ledger " + path + " --keys DIR"
		},
	},
	{
		kind: "ledger journal (SQLite)",
		is: func(name string, _ []byte) bool {
			return strings.HasSuffix(name, ".db-wal") || strings.HasSuffix(name, ".db-shm")
		},
		elsewhere: func(string) string {
			return "the ledger's own journal; keep it beside the ledger, which checks it"
		},
	},
	{
		kind: "private key",
		is:   func(_ string, head []byte) bool { return bytes.Contains(head, []byte("PRIVATE KEY-----")) },
		check: func(path string) (string, error) {
			k, err := signing.Load(path)
			if err != nil {
				return "", err
			}
			return "key " + k.ID() + "; keep it on the station or with its approver, never in a shared folder", nil
		},
	},
	{
		kind: "public key",
		is:   func(_ string, head []byte) bool { return bytes.Contains(head, []byte("-----BEGIN PUBLIC KEY-----")) },
		check: func(path string) (string, error) {
			pub, err := signing.LoadPublic(path)
			if err != nil {
				return "", err
			}
			return "key " + signing.KeyID(pub), nil
		},
	},
	{
		kind: "trust file",
		is: func(_ string, head []byte) bool {
			return bytes.HasPrefix(head, []byte("trust:")) || bytes.Contains(head, []byte("\ntrust:"))
		},
		check: func(path string) (string, error) {
			t, err := signing.LoadTrust(path)
			if err != nil {
				return "", err
			}
			return fmt.Sprintf("binds station(s) %s; %d key(s) in all", strings.Join(t.Stations(), ", "), len(t.Keys())), nil
		},
	},
	{
		kind: "chain heads",
		is:   func(_ string, head []byte) bool { return bytes.HasPrefix(head, []byte("# trimline chain heads")) },
		check: func(path string) (string, error) {
			f, err := os.Open(path)
			if err != nil {
				return "", err
			}
			defer f.Close()
			heads, err := ledger.ParseHeads(io.LimitReader(f, ledger.MaxHeadsFile))
			if err != nil {
				return "", err
			}
			return fmt.Sprintf("%d chain head(s); verify onward from them with: trimline audit ledger --heads %s", len(heads), path), nil
		},
	},
	{
		kind: "export bundle (zip)",
		is:   func(_ string, head []byte) bool { return bytes.HasPrefix(head, []byte("PK\x03\x04")) },
		elsewhere: func(path string) string {
			return "not an input; check and load it with: trimline import " + path + " --ledger DB --keys DIR"
		},
	},
	{
		kind: "run log (JSON lines)",
		is: func(name string, head []byte) bool {
			return filepath.Ext(name) == ".log" && bytes.HasPrefix(head, []byte("{"))
		},
		elsewhere: func(string) string { return "not an input; nothing to check" },
	},
}

// recogniseOther returns the otherFile that recognises path, or nil. It reads
// only the file's first bytes, so a large ledger is told without reading it.
func recogniseOther(path string) *otherFile {
	f, err := os.Open(path)
	if err != nil {
		return nil // the input loaders say why
	}
	defer f.Close()
	head := make([]byte, 512)
	n, _ := io.ReadFull(f, head)
	head = head[:n]
	for i := range otherFiles {
		if otherFiles[i].is(path, head) {
			return &otherFiles[i]
		}
	}
	return nil
}

// expandFolders replaces each folder among args by the files under it, in
// lexical order, so that check can be given a station's whole folder.
func expandFolders(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		fi, err := os.Stat(a)
		if err != nil || !fi.IsDir() {
			out = append(out, a) // a missing file is the loaders' to report
			continue
		}
		var found []string
		err = filepath.WalkDir(a, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if d.Type().IsRegular() {
				found = append(found, p)
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
		sort.Strings(found)
		out = append(out, found...)
	}
	return out, nil
}
