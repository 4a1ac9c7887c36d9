package signing

import (
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"

	"trimline/instruments/files"
)

// What an approver may sign: the Approver.May words.
const (
	MayRelease = "release" // approve, reject or withdraw a file's release
	MayVoid    = "void"    // void a certificate
)

// ErrNoTrust is returned where a decision needs trusted keys and none were given:
// no key is trusted by default, not even one found beside a ledger.
var ErrNoTrust = errors.New("no trusted keys: give --keys DIR or --trust FILE")

// ErrUnsafeKeyFolder is returned for a trust folder or file that group or others
// may write: anyone who can write it can make a forgery trusted.
var ErrUnsafeKeyFolder = errors.New("trusted keys writable by others")

// Approver is a person whose signed releases and voids count, as a trust entry
// names them: the name printed for what they sign comes from here, never from a
// command-line flag.
type Approver struct {
	Name string
	Key  ed25519.PublicKey
	May  []string // MayRelease, MayVoid
}

// Can reports whether a may sign what (MayRelease or MayVoid).
func (a Approver) Can(what string) bool {
	for _, m := range a.May {
		if m == what {
			return true
		}
	}
	return false
}

// Trust is the set of keys an auditor, an import or a station trusts, and what
// each is trusted for. A station key bound to a station id means every run of that
// station must be signed by one of its bound keys, whatever a ledger, a bundle or a
// station file says. Keys are named by KeyID; bindings by a station's key may also
// be given as a full fingerprint (Fingerprint), whose key is admitted from an
// untrusted place (a ledger's folder, a bundle) only when it matches.
//
// A Trust is read-only after loading and safe for concurrent use.
type Trust struct {
	// Source says where the trust came from, for the reports that name it
	// ("--keys DIR", "--trust FILE").
	Source string

	keys      map[string]ed25519.PublicKey // by KeyID: every key trusted for something
	stations  map[string][]string          // station id → key IDs bound to it
	pending   map[string]string            // fingerprint → station id, key not seen yet
	approvers map[string]Approver          // by KeyID
}

// Fingerprint is a public key's full fingerprint: "sha256:" and the 64 hex digits
// of the SHA-256 of its 32 bytes. KeyID is its first 16 digits.
func Fingerprint(pub ed25519.PublicKey) string {
	sum := sha256.Sum256(pub)
	return "sha256:" + hex.EncodeToString(sum[:])
}

func newTrust(source string) *Trust {
	return &Trust{Source: source, keys: map[string]ed25519.PublicKey{}, stations: map[string][]string{},
		pending: map[string]string{}, approvers: map[string]Approver{}}
}

// TrustDir reads a folder of trusted public keys. STATION.pub binds its key to the
// station whose id is the file name (TL1.pub: station TL1); a key in the folder
// approvers/ belongs to the approver named by its file name and may sign releases
// and voids. The folder (and approvers/) must not be writable by group or others
// (ErrUnsafeKeyFolder; not checked on Windows, whose modes say nothing of ACLs).
func TrustDir(dir string) (*Trust, error) {
	t := newTrust("--keys " + dir)
	if err := checkFolder(dir); err != nil {
		return nil, err
	}
	keys, names, err := readPubs(dir)
	if err != nil {
		return nil, err
	}
	for i, pub := range keys {
		t.bindStation(strings.TrimSuffix(names[i], ".pub"), pub)
	}
	adir := filepath.Join(dir, "approvers")
	if fi, err := os.Stat(adir); err == nil && fi.IsDir() {
		if err := t.addApproverDir(adir); err != nil {
			return nil, err
		}
	}
	return t, nil
}

// addApproverDir adds every NAME.pub in dir as the approver NAME, who may
// release files and void certificates; dir must not be writable by others.
func (t *Trust) addApproverDir(dir string) error {
	if err := checkFolder(dir); err != nil {
		return err
	}
	keys, names, err := readPubs(dir)
	if err != nil {
		return err
	}
	for i, pub := range keys {
		t.addApprover(Approver{Name: strings.TrimSuffix(names[i], ".pub"), Key: pub, May: []string{MayRelease, MayVoid}})
	}
	return nil
}

// trustFile is the trust file's layout.
type trustFile struct {
	Trust struct {
		Stations []struct {
			ID          string `yaml:"id"`
			PublicKey   string `yaml:"public_key"`  // a .pub file, relative to the trust file
			Fingerprint string `yaml:"fingerprint"` // or the key's full fingerprint
		} `yaml:"stations"`
		Approvers []struct {
			Name      string   `yaml:"name"`
			PublicKey string   `yaml:"public_key"`
			May       []string `yaml:"may"`
		} `yaml:"approvers"`
	} `yaml:"trust"`
}

// LoadTrust reads a trust file (strict YAML, errors as file:line:col):
//
//	trust:
//	  stations:
//	    - {id: TL1, public_key: keys/TL1.pub}       # a key file, relative to this file
//	    - {id: TL2, fingerprint: "sha256:9f2c…"}   # or the key's full fingerprint
//	  approvers:
//	    - {name: Demo Quality Engineer, public_key: keys/approvers/demo-qe.pub, may: [release, void]}
//
// The file, the folder holding it, and every key file it names and that file's
// folder must not be writable by group or others (ErrUnsafeKeyFolder).
func LoadTrust(path string) (*Trust, error) {
	if err := checkFolder(filepath.Dir(path)); err != nil {
		return nil, err
	}
	if err := checkWritable(path, "trust file"); err != nil {
		return nil, err
	}
	data, err := files.ReadFile(path)
	if err != nil {
		return nil, err
	}
	doc, err := files.Parse(path, data)
	if err != nil {
		return nil, err
	}
	var f trustFile
	if err := doc.Decode(&f); err != nil {
		return nil, err
	}
	t := newTrust("--trust " + path)
	var errs files.List
	base := filepath.Dir(path)
	load := func(at, p string) ed25519.PublicKey {
		if !filepath.IsAbs(p) {
			p = filepath.Join(base, p)
		}
		// A key file anyone may replace is no more trusted than its folder.
		if err := checkFolder(filepath.Dir(p)); err != nil {
			errs = append(errs, doc.Errorf(at, "%v", err))
			return nil
		}
		if err := checkWritable(p, "public key"); err != nil {
			errs = append(errs, doc.Errorf(at, "%v", err))
			return nil
		}
		pub, err := LoadPublic(p)
		if err != nil {
			errs = append(errs, doc.Errorf(at, "%v", err))
			return nil
		}
		return pub
	}
	for i, s := range f.Trust.Stations {
		at := fmt.Sprintf("$.trust.stations[%d]", i)
		switch {
		case s.ID == "":
			errs = append(errs, doc.Errorf(at, "a station entry needs its id"))
		case (s.PublicKey == "") == (s.Fingerprint == ""):
			errs = append(errs, doc.Errorf(at, "give the station's key as exactly one of public_key (a .pub file) or fingerprint (sha256:… of 64 hex digits)"))
		case s.PublicKey != "":
			if pub := load(at+".public_key", s.PublicKey); pub != nil {
				t.bindStation(s.ID, pub)
			}
		default:
			fp := strings.ToLower(s.Fingerprint)
			if h, ok := strings.CutPrefix(fp, "sha256:"); !ok || len(h) != 64 || strings.Trim(h, "0123456789abcdef") != "" {
				errs = append(errs, doc.Errorf(at+".fingerprint", "%q: expected sha256: and 64 hex digits (trimline keys prints it)", s.Fingerprint))
				continue
			}
			t.pending[fp] = s.ID
		}
	}
	for i, a := range f.Trust.Approvers {
		at := fmt.Sprintf("$.trust.approvers[%d]", i)
		if strings.TrimSpace(a.Name) == "" || a.PublicKey == "" {
			errs = append(errs, doc.Errorf(at, "an approver needs a name and a public_key"))
			continue
		}
		for j, m := range a.May {
			if m != MayRelease && m != MayVoid {
				errs = append(errs, doc.Errorf(fmt.Sprintf("%s.may[%d]", at, j), "%q: expected %s or %s", m, MayRelease, MayVoid))
			}
		}
		if pub := load(at+".public_key", a.PublicKey); pub != nil {
			t.addApprover(Approver{Name: a.Name, Key: pub, May: a.May})
		}
	}
	if len(errs) > 0 {
		errs.Sort()
		return nil, errs
	}
	return t, nil
}

func (t *Trust) bindStation(id string, pub ed25519.PublicKey) {
	kid := KeyID(pub)
	t.keys[kid] = pub
	for _, k := range t.stations[id] {
		if k == kid {
			return
		}
	}
	t.stations[id] = append(t.stations[id], kid)
}

func (t *Trust) addApprover(a Approver) {
	kid := KeyID(a.Key)
	t.keys[kid] = a.Key
	t.approvers[kid] = a
}

// Admit offers a key found in an untrusted place (beside a ledger, in a bundle).
// It is trusted, for its station, only when a trust file bound that station to its
// full fingerprint; Admit reports whether it was.
func (t *Trust) Admit(pub ed25519.PublicKey) bool {
	id, ok := t.pending[Fingerprint(pub)]
	if ok {
		t.bindStation(id, pub)
	}
	return ok
}

// Key returns the trusted key with ID keyID.
func (t *Trust) Key(keyID string) (ed25519.PublicKey, bool) {
	k, ok := t.keys[keyID]
	return k, ok
}

// Keys returns every trusted key by ID (a copy).
func (t *Trust) Keys() map[string]ed25519.PublicKey {
	m := make(map[string]ed25519.PublicKey, len(t.keys))
	for k, v := range t.keys {
		m[k] = v
	}
	return m
}

// Bound reports whether the station has keys bound to it (a STATION.pub, a trust
// file entry, or a fingerprint still waiting for its key): then every run of that
// station must be signed by one of them.
func (t *Trust) Bound(station string) bool {
	if len(t.stations[station]) > 0 {
		return true
	}
	for _, id := range t.pending {
		if id == station {
			return true
		}
	}
	return false
}

// SignedByStation reports whether keyID is bound to station.
func (t *Trust) SignedByStation(station, keyID string) bool {
	for _, k := range t.stations[station] {
		if k == keyID {
			return true
		}
	}
	return false
}

// Stations lists the station ids with bound keys, sorted.
func (t *Trust) Stations() []string {
	seen := map[string]bool{}
	for id := range t.stations {
		seen[id] = true
	}
	for _, id := range t.pending {
		seen[id] = true
	}
	out := make([]string, 0, len(seen))
	for id := range seen {
		out = append(out, id)
	}
	sort.Strings(out)
	return out
}

// Approver returns the approver whose key has ID keyID.
func (t *Trust) Approver(keyID string) (Approver, bool) {
	a, ok := t.approvers[keyID]
	return a, ok
}

// readPubs reads every *.pub in dir, sorted by name.
func readPubs(dir string) ([]ed25519.PublicKey, []string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, nil, fmt.Errorf("signing: %w", err)
	}
	var names []string
	for _, e := range entries {
		if !e.IsDir() && strings.HasSuffix(e.Name(), ".pub") {
			names = append(names, e.Name())
		}
	}
	sort.Strings(names)
	keys := make([]ed25519.PublicKey, len(names))
	for i, n := range names {
		p := filepath.Join(dir, n)
		if err := checkWritable(p, "public key"); err != nil {
			return nil, nil, err
		}
		if keys[i], err = LoadPublic(p); err != nil {
			return nil, nil, err
		}
	}
	return keys, names, nil
}

// checkFolder refuses a folder of trusted keys that group or others may write.
func checkFolder(dir string) error {
	fi, err := os.Stat(dir)
	if err != nil {
		return fmt.Errorf("signing: %w", err)
	}
	if !fi.IsDir() {
		return fmt.Errorf("signing: %s is not a folder", dir)
	}
	return checkWritable(dir, "key folder")
}

// checkWritable refuses a file or folder that group or others may write (not
// checked on Windows).
func checkWritable(path, what string) error {
	if runtime.GOOS == "windows" {
		return nil
	}
	fi, err := os.Stat(path)
	if err != nil {
		return fmt.Errorf("signing: %w", err)
	}
	if perm := fi.Mode().Perm(); perm&0o022 != 0 {
		return fmt.Errorf("signing: %s %s has mode %#o: group or others may write it, so anyone could make a forged key trusted; fix with: chmod go-w %s: %w",
			what, path, perm, path, ErrUnsafeKeyFolder)
	}
	return nil
}

// PublicKeyFile is a public key found in a folder, with its file.
type PublicKeyFile struct {
	Path string
	Key  ed25519.PublicKey
}

// PublicKeysIn lists the readable public keys (*.pub) in dir, sorted by file
// name; files that are not keys are skipped. Nothing it finds is trusted: a caller
// offers them to Trust.Admit, or looks one up by KeyID.
func PublicKeysIn(dir string) []PublicKeyFile {
	matches, _ := filepath.Glob(filepath.Join(dir, "*.pub"))
	sort.Strings(matches)
	var out []PublicKeyFile
	for _, p := range matches {
		if k, err := LoadPublic(p); err == nil {
			out = append(out, PublicKeyFile{Path: p, Key: k})
		}
	}
	return out
}
