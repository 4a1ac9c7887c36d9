package sequencer

// Who may work at a station: the station file's people list, and the hashed
// passphrases that let a person sign in on a console served beyond loopback.

import (
	"crypto/pbkdf2"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"fmt"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"trimline/instruments/files"
)

// Person is one entry of a station file's people: who may work at the station
// and what they may do.
type Person struct {
	Name  string   // as certificates and the audit trail print it
	Badge string   // what the badge scanner types; "" = sign in by name
	May   []string // rights: RightOperate, RightReview
	// Passphrase is a hashed passphrase (never plaintext), checked by
	// CheckPassphrase: the console asks for it at every sign-in of the person,
	// and beyond loopback only people with one may sign in. Key is the path
	// of an Ed25519 public key file whose private key signs the person's
	// review decisions on the command line (trimline review --key).
	Passphrase string
	Key        string
	Where      string // file:line:col of the entry
}

// The rights a Person may hold.
const (
	RightOperate = "operate" // sign in, run units, clear a station fault
	RightReview  = "review"  // accept or reject units held for REVIEW
)

// rights are the rights a station file may grant, in the order messages list them.
var rights = []string{RightOperate, RightReview}

// Person returns the person id names: the one whose badge is id, else the one
// whose name is id (both exact, after the spaces around id are trimmed, as a
// badge scanner or a typed name may leave them). ok is false when nobody
// matches, and for an empty id.
func (s *Station) Person(id string) (Person, bool) {
	id = strings.TrimSpace(id)
	if id == "" {
		return Person{}, false
	}
	for _, p := range s.People {
		if p.Badge != "" && p.Badge == id {
			return p, true
		}
	}
	for _, p := range s.People {
		if p.Name == id {
			return p, true
		}
	}
	return Person{}, false
}

// Can reports whether p holds right (RightOperate, RightReview).
func (p Person) Can(right string) bool { return slices.Contains(p.May, right) }

// CheckPassphrase reports whether pass is p's passphrase: false when p has no
// passphrase hash or it cannot be read. The hash is recomputed with the stored
// salt and iteration count and compared in constant time. It takes as long as
// one PBKDF2 derivation (a fraction of a second at 600 000 iterations), also
// when it returns false for want of a hash.
func (p Person) CheckPassphrase(pass string) bool {
	h, err := parsePassphraseHash(p.Passphrase)
	if err != nil || pass == "" {
		// The same work as a real check, so that the time taken does not tell
		// a person without a passphrase from one with.
		pbkdf2.Key(sha256.New, "x", make([]byte, passphraseSaltBytes), PassphraseIterations, passphraseHashBytes)
		return false
	}
	got, err := pbkdf2.Key(sha256.New, pass, h.salt, h.iter, len(h.sum))
	if err != nil {
		return false
	}
	return subtle.ConstantTimeCompare(got, h.sum) == 1
}

// Passphrase hashes: PBKDF2 with HMAC-SHA-256 (RFC 8018 §5.2), written
// "pbkdf2-sha256$ITERATIONS$SALT$HASH" with the salt and the 32-byte hash in
// unpadded standard base64.
const (
	passphraseScheme = "pbkdf2-sha256"
	// PassphraseIterations is the iteration count HashPassphrase uses: OWASP's
	// 2023 recommendation for PBKDF2-HMAC-SHA256 (Password Storage Cheat Sheet;
	// common practice). A station file's hash may not use fewer.
	PassphraseIterations = 600_000
	// maxPassphraseIterations bounds the work one sign-in can cost the station.
	maxPassphraseIterations = 10_000_000
	passphraseSaltBytes     = 16 // random salt, NIST SP 800-132 §5.1 asks at least 128 bits
	passphraseHashBytes     = 32 // one SHA-256 block of output
	// MaxPassphrase is the longest passphrase HashPassphrase takes, in bytes.
	MaxPassphrase = 1024
)

// HashPassphrase hashes pass for a station file's passphrase: key: PBKDF2-HMAC-
// SHA-256 with PassphraseIterations iterations and a fresh 16-byte random salt.
// An empty passphrase, one longer than MaxPassphrase bytes, or one with control
// characters is refused.
func HashPassphrase(pass string) (string, error) {
	switch {
	case pass == "":
		return "", errors.New("empty passphrase")
	case len(pass) > MaxPassphrase:
		return "", fmt.Errorf("passphrase longer than %d bytes", MaxPassphrase)
	case !utf8.ValidString(pass) || strings.IndexFunc(pass, unicode.IsControl) >= 0:
		return "", errors.New("passphrase with control characters or invalid UTF-8")
	}
	salt := make([]byte, passphraseSaltBytes)
	if _, err := rand.Read(salt); err != nil {
		return "", err
	}
	sum, err := pbkdf2.Key(sha256.New, pass, salt, PassphraseIterations, passphraseHashBytes)
	if err != nil {
		return "", err
	}
	enc := base64.RawStdEncoding
	return fmt.Sprintf("%s$%d$%s$%s", passphraseScheme, PassphraseIterations, enc.EncodeToString(salt), enc.EncodeToString(sum)), nil
}

type passphraseHash struct {
	iter      int
	salt, sum []byte
}

// parsePassphraseHash reads a hash HashPassphrase wrote.
func parsePassphraseHash(s string) (passphraseHash, error) {
	parts := strings.Split(s, "$")
	if len(parts) != 4 || parts[0] != passphraseScheme {
		return passphraseHash{}, fmt.Errorf("expected a passphrase hash %s$ITERATIONS$SALT$HASH", passphraseScheme)
	}
	iter, err := strconv.Atoi(parts[1])
	if err != nil || iter < PassphraseIterations || iter > maxPassphraseIterations {
		return passphraseHash{}, fmt.Errorf("expected %d to %d iterations in the passphrase hash, found %q", PassphraseIterations, maxPassphraseIterations, parts[1])
	}
	salt, err1 := decodeB64(parts[2])
	sum, err2 := decodeB64(parts[3])
	switch {
	case err1 != nil || len(salt) < passphraseSaltBytes:
		return passphraseHash{}, fmt.Errorf("expected a salt of at least %d bytes in base64 in the passphrase hash", passphraseSaltBytes)
	case err2 != nil || len(sum) != passphraseHashBytes:
		return passphraseHash{}, fmt.Errorf("expected a hash of %d bytes in base64 in the passphrase hash", passphraseHashBytes)
	}
	return passphraseHash{iter: iter, salt: salt, sum: sum}, nil
}

// decodeB64 reads standard base64, padded or not.
func decodeB64(s string) ([]byte, error) {
	return base64.RawStdEncoding.DecodeString(strings.TrimRight(s, "="))
}

// personDecl is one person as the station file writes it.
type personDecl struct {
	Name       string   `yaml:"name"`
	Badge      string   `yaml:"badge"`
	May        []string `yaml:"may"`
	Passphrase string   `yaml:"passphrase"`
	Key        string   `yaml:"key"`
}

// Bounds on a person's entry.
const (
	MaxPersonName = 80 // the longest name, in characters
	MaxBadge      = 64 // the longest badge id, in characters
)

// people checks the station file's people: list and returns it (nil for none).
// Names and badges are unique (no badge is another person's name either, so an
// id names one person); every right is known; a passphrase is a hash, never
// plaintext; a key path is resolved relative to the station file.
func people(doc *files.Doc, name string, decls []personDecl, errs *files.List) []Person {
	if len(decls) == 0 {
		return nil
	}
	bad := func(path, format string, args ...any) { *errs = append(*errs, doc.Errorf(path, format, args...)) }
	out := make([]Person, 0, len(decls))
	names, badges := map[string]string{}, map[string]string{} // → where
	for i, d := range decls {
		base := fmt.Sprintf("$.people[%d]", i)
		line, col := doc.StartPos(base)
		p := Person{Name: strings.TrimSpace(d.Name), Badge: strings.TrimSpace(d.Badge), Passphrase: d.Passphrase, Key: d.Key,
			Where: fmt.Sprintf("%s:%d:%d", doc.Name, line, col)}
		switch {
		case p.Name == "":
			bad(base+".name", "missing required key \"name\" (the person's name as certificates print it)")
		case utf8.RuneCountInString(p.Name) > MaxPersonName || strings.IndexFunc(p.Name, unicode.IsControl) >= 0:
			bad(base+".name", "expected a name of at most %d characters without control characters", MaxPersonName)
		case names[p.Name] != "":
			bad(base+".name", "%q is listed already, at %s: list each person once", p.Name, names[p.Name])
		default:
			names[p.Name] = p.Where
		}
		if doc.Has(base + ".badge") {
			switch {
			case p.Badge == "":
				bad(base+".badge", "expected a badge id (what the badge scanner types), or no badge key")
			case utf8.RuneCountInString(p.Badge) > MaxBadge || strings.IndexFunc(p.Badge, unicode.IsControl) >= 0:
				bad(base+".badge", "expected a badge id of at most %d characters without control characters", MaxBadge)
			case badges[p.Badge] != "":
				bad(base+".badge", "badge %q is %s's already: every badge names one person", p.Badge, badges[p.Badge])
			default:
				badges[p.Badge] = p.Name
			}
		}
		if !doc.Has(base + ".may") {
			bad(base, "missing required key \"may\" (the person's rights: %s)", strings.Join(rights, ", "))
		} else if len(d.May) == 0 {
			bad(base+".may", "expected at least one right (%s)", strings.Join(rights, ", "))
		}
		for j, r := range d.May {
			path := fmt.Sprintf("%s.may[%d]", base, j)
			switch {
			case !slices.Contains(rights, r):
				bad(path, "unknown right %q (expected %s)", r, strings.Join(rights, " or "))
			case slices.Contains(p.May, r):
				bad(path, "right %q is listed twice", r)
			default:
				p.May = append(p.May, r)
			}
		}
		if doc.Has(base + ".passphrase") {
			if _, err := parsePassphraseHash(d.Passphrase); err != nil {
				if !strings.HasPrefix(d.Passphrase, passphraseScheme+"$") {
					bad(base+".passphrase", "a passphrase is kept only as a hash, never as plaintext: make one with `trimline keys passphrase` (it reads the passphrase on stdin) and put what it prints here")
				} else {
					bad(base+".passphrase", "%v: make one with `trimline keys passphrase`", err)
				}
			}
		}
		if doc.Has(base + ".key") {
			switch k := strings.TrimSpace(d.Key); {
			case k == "":
				bad(base+".key", "expected the path of the person's Ed25519 public key file, or no key key")
			case filepath.IsAbs(k):
				p.Key = k
			default:
				p.Key = filepath.Join(filepath.Dir(name), k)
			}
		}
		out = append(out, p)
	}
	for i, p := range out {
		if w, ok := names[p.Badge]; ok && p.Badge != "" && p.Badge != p.Name {
			bad(fmt.Sprintf("$.people[%d].badge", i), "badge %q is the name of the person at %s: a badge may not be someone's name", p.Badge, w)
		}
	}
	return out
}
