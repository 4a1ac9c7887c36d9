package ledger

import (
	"os"
	"path/filepath"
	"strings"
)

// Dir returns the absolute folder of the ledger file. Every path the ledger
// stores (a document's, and so its seal's beside it) is relative to it, and the
// station's keys folder lies in it, so a ledger is read the same from any
// working folder, and its folder can move as a whole.
func (l *Ledger) Dir() string { return l.dir }

// storedPath is the form in which path (absolute, or relative to the working
// folder) is stored: relative to the ledger's folder, with forward slashes, when
// it lies inside it; absolute otherwise.
func (l *Ledger) storedPath(path string) string {
	abs, err := filepath.Abs(path)
	if err != nil {
		return path
	}
	if rel, err := filepath.Rel(l.dir, abs); err == nil && filepath.IsLocal(rel) {
		return filepath.ToSlash(rel)
	}
	return abs
}

// Locate returns where a path the ledger stores is on this machine, never
// relative to the working folder. A relative path is resolved against the
// ledger's folder (Dir). Ledgers written before paths were stored that way hold
// paths relative to the working folder of the process that wrote them, or
// absolute ones from where the folder was then; for those Locate tries, in
// order, the path itself (absolute) or against the ledger's folder, then ever
// shorter tails of it against the ledger's folder (trimline-demo/certificates/X.pdf
// is found as certificates/X.pdf beside a ledger in trimline-demo), then, for a
// relative path, the working folder. The first candidate that exists wins; when
// none does (a deleted document), the first whose folder exists (a bare file name
// in the ledger's folder does not count), so that a document written back lands
// where it was issued; else the first candidate.
// Locate only stats files; it is safe for concurrent use.
func (l *Ledger) Locate(stored string) string {
	p := filepath.FromSlash(stored)
	type cand struct {
		path   string
		folder bool // may be chosen for its folder alone
	}
	var cands []cand
	if filepath.IsAbs(p) {
		cands = append(cands, cand{p, true})
	} else {
		cands = append(cands, cand{filepath.Join(l.dir, p), true})
	}
	parts := strings.Split(filepath.ToSlash(filepath.Clean(p)), "/")
	for i := 1; i < len(parts); i++ {
		if tail := filepath.Join(parts[i:]...); filepath.IsLocal(tail) {
			// A bare file name is no evidence of where a missing file was.
			cands = append(cands, cand{filepath.Join(l.dir, tail), i < len(parts)-1})
		}
	}
	if !filepath.IsAbs(p) {
		if abs, err := filepath.Abs(p); err == nil {
			cands = append(cands, cand{abs, true})
		}
	}
	for _, c := range cands {
		if _, err := os.Stat(c.path); err == nil {
			return c.path
		}
	}
	for _, c := range cands {
		if !c.folder {
			continue
		}
		if fi, err := os.Stat(filepath.Dir(c.path)); err == nil && fi.IsDir() {
			return c.path
		}
	}
	return cands[0].path
}
