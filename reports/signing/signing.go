// Package signing holds the station's Ed25519 key (RFC 8032, crypto/ed25519 from
// the standard library) and the seals it puts on certificates.
//
// A station has one key pair, made once with Init: NAME.key holds the private key
// (a PEM block "TRIMLINE ED25519 PRIVATE KEY" whose 32 bytes are the RFC 8032
// secret key, the seed), readable by its owner only; NAME.pub holds the public key
// as a standard PEM "PUBLIC KEY" block (PKIX SubjectPublicKeyInfo), which may be
// handed to anyone, and which tools such as `openssl pkey -pubin` read too. A key
// is named by its ID, "ed25519:" and the first 16 hex digits of the SHA-256 of the
// 32 public key bytes.
//
// Each issued certificate gets two signatures, kept in a Seal written next to the
// PDF (NAME.pdf.seal, JSON): one over the ledger record (RecordMessage), one over
// the exact PDF bytes (PDFMessage). With the seal, the PDF and the public key
// alone an auditor can tell whether the PDF is the one the station issued
// (Seal.VerifyPDF). The VerificationCode, derived from the record signature, is
// printed on the certificate so that a person can quote it.
//
// This package is also the one owner of every signed message layout: the record
// (RecordMessage), the document (PDFMessage) and a file's release
// (ReleaseMessage). Whatever signs or verifies one of them builds it here.
package signing

import (
	"bytes"
	"crypto/ed25519"
	"crypto/sha256"
	"crypto/x509"
	"encoding/hex"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
)

// PEM block types.
const (
	privateBlock = "TRIMLINE ED25519 PRIVATE KEY"
	publicBlock  = "PUBLIC KEY"
)

// Key is a station's key pair.
type Key struct {
	Private ed25519.PrivateKey
	Public  ed25519.PublicKey
}

// ID is the key's name: "ed25519:" + the first 16 hex digits of SHA-256(public key).
func (k *Key) ID() string { return KeyID(k.Public) }

// KeyID is the ID of a public key: "ed25519:" + the first 16 hex digits of the
// SHA-256 of its 32 bytes.
func KeyID(pub ed25519.PublicKey) string {
	sum := sha256.Sum256(pub)
	return "ed25519:" + hex.EncodeToString(sum[:8])
}

// Sign signs msg with the private key (pure Ed25519, RFC 8032 §5.1.6). It panics
// if k holds no valid private key, as ed25519.Sign does.
func (k *Key) Sign(msg []byte) []byte { return ed25519.Sign(k.Private, msg) }

// Verify reports whether sig is pub's Ed25519 signature of msg. A public key of
// the wrong length gives false (ed25519.Verify would panic).
func Verify(pub ed25519.PublicKey, msg, sig []byte) bool {
	if len(pub) != ed25519.PublicKeySize {
		return false
	}
	return ed25519.Verify(pub, msg, sig)
}

// Init makes a new key pair and writes it to dir as NAME.key (private, mode 0600)
// and NAME.pub (public, mode 0644), creating dir with mode 0700 when it does not
// exist. It never overwrites: when either file exists it fails and leaves both
// alone. name must be a plain file name (no path separator, not starting with '.').
func Init(dir, name string) (privPath, pubPath string, err error) {
	if name == "" || strings.ContainsAny(name, `/\`+"\x00") || strings.HasPrefix(name, ".") {
		return "", "", fmt.Errorf("signing: key name %q is not a plain file name", name)
	}
	if err := os.MkdirAll(dir, 0o700); err != nil {
		return "", "", fmt.Errorf("signing: %w", err)
	}
	privPath = filepath.Join(dir, name+".key")
	pubPath = filepath.Join(dir, name+".pub")
	// Refuse before writing anything when the public half is already there, so
	// that a new private key never sits beside an old public key.
	if _, err := os.Lstat(pubPath); err == nil {
		return "", "", fmt.Errorf("signing: %s already exists; refusing to overwrite a key", pubPath)
	}

	pub, priv, err := ed25519.GenerateKey(nil)
	if err != nil {
		return "", "", fmt.Errorf("signing: generate key: %w", err)
	}
	privPEM := pem.EncodeToMemory(&pem.Block{Type: privateBlock, Bytes: priv.Seed()})
	der, err := x509.MarshalPKIXPublicKey(pub)
	if err != nil {
		return "", "", fmt.Errorf("signing: %w", err)
	}
	pubPEM := pem.EncodeToMemory(&pem.Block{Type: publicBlock, Bytes: der})

	if err := writeExclusive(privPath, privPEM, 0o600); err != nil {
		return "", "", err
	}
	if err := writeExclusive(pubPath, pubPEM, 0o644); err != nil {
		os.Remove(privPath) // made by this call a moment ago
		return "", "", err
	}
	syncDir(dir)
	return privPath, pubPath, nil
}

// writeExclusive creates path (failing when it exists), writes data, sets perm
// and syncs. On error the file is removed.
func writeExclusive(path string, data []byte, perm os.FileMode) (err error) {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, perm)
	if err != nil {
		if errors.Is(err, os.ErrExist) {
			return fmt.Errorf("signing: %s already exists; refusing to overwrite a key", path)
		}
		return fmt.Errorf("signing: %w", err)
	}
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(path)
		}
	}()
	if _, err = f.Write(data); err != nil {
		return fmt.Errorf("signing: write %s: %w", path, err)
	}
	// The umask may have taken bits off perm; set it exactly (never more than
	// asked: the private key was created 0600 and stays 0600).
	if err = f.Chmod(perm); err != nil {
		return fmt.Errorf("signing: %w", err)
	}
	if err = f.Sync(); err != nil {
		return fmt.Errorf("signing: sync %s: %w", path, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("signing: close %s: %w", path, err)
	}
	return nil
}

// syncDir makes renames and creations in dir durable where the platform can.
func syncDir(dir string) {
	if d, err := os.Open(dir); err == nil {
		d.Sync()
		d.Close()
	}
}

// Load reads a private key written by Init. On Unix it refuses a key file that
// group or others may read or write (any of the bits 0077 set), naming the mode
// and the fix, "chmod 600 FILE", and a key whose folder group or others may write
// (ErrUnsafeKeyFolder). The check is skipped on Windows, whose file modes
// do not express who may read a file (ACLs do). It refuses anything but exactly one
// well-formed "TRIMLINE ED25519 PRIVATE KEY" PEM block holding a 32-byte seed (or
// a 64-byte private key whose public half matches its seed).
func Load(privPath string) (*Key, error) {
	f, err := os.Open(privPath)
	if err != nil {
		return nil, fmt.Errorf("signing: %w", err)
	}
	defer f.Close()
	fi, err := f.Stat() // the file opened, not whatever the path names by now
	if err != nil {
		return nil, fmt.Errorf("signing: %w", err)
	}
	if !fi.Mode().IsRegular() {
		return nil, fmt.Errorf("signing: private key %s is not a regular file", privPath)
	}
	if runtime.GOOS != "windows" {
		if perm := fi.Mode().Perm(); perm&0o077 != 0 {
			return nil, fmt.Errorf("signing: private key %s has mode %#o: group or others may read or write it; fix with: chmod 600 %s",
				privPath, perm, privPath)
		}
		// Whoever may write the key's folder may swap the key (and its .pub) for
		// one of their own.
		dir := filepath.Dir(privPath)
		if di, err := os.Stat(dir); err != nil {
			return nil, fmt.Errorf("signing: %w", err)
		} else if perm := di.Mode().Perm(); perm&0o022 != 0 {
			return nil, fmt.Errorf("signing: the folder %s of private key %s has mode %#o: group or others may write it, so anyone could swap the key; fix with: chmod go-w %s: %w",
				dir, privPath, perm, dir, ErrUnsafeKeyFolder)
		}
	}
	data, err := io.ReadAll(io.LimitReader(f, 64<<10))
	if err != nil {
		return nil, fmt.Errorf("signing: read %s: %w", privPath, err)
	}
	raw, err := onePEM(data, privateBlock)
	if err != nil {
		return nil, fmt.Errorf("signing: private key %s: %w", privPath, err)
	}
	var priv ed25519.PrivateKey
	switch len(raw) {
	case ed25519.SeedSize:
		priv = ed25519.NewKeyFromSeed(raw)
	case ed25519.PrivateKeySize:
		priv = ed25519.NewKeyFromSeed(raw[:ed25519.SeedSize])
		if !bytes.Equal(priv, raw) {
			return nil, fmt.Errorf("signing: private key %s: public half does not match the seed", privPath)
		}
	default:
		return nil, fmt.Errorf("signing: private key %s: %d key bytes, want %d", privPath, len(raw), ed25519.SeedSize)
	}
	return &Key{Private: priv, Public: priv.Public().(ed25519.PublicKey)}, nil
}

// onePEM decodes data as exactly one PEM block of type typ, without headers
// (encrypted PEM is not supported), with nothing but white space around it.
func onePEM(data []byte, typ string) ([]byte, error) {
	block, rest := pem.Decode(data)
	if block == nil {
		return nil, errors.New("malformed PEM: no PEM block found")
	}
	if block.Type != typ {
		return nil, fmt.Errorf("malformed PEM: block type %q, want %q", block.Type, typ)
	}
	if len(block.Headers) > 0 {
		return nil, errors.New("malformed PEM: unexpected headers (encrypted keys are not supported)")
	}
	if len(bytes.TrimSpace(rest)) > 0 {
		return nil, errors.New("malformed PEM: data after the PEM block")
	}
	return block.Bytes, nil
}

// LoadPublic reads a public key written by Init (a PEM "PUBLIC KEY" block holding
// a PKIX Ed25519 key).
func LoadPublic(path string) (ed25519.PublicKey, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("signing: %w", err)
	}
	pub, err := parsePublic(data)
	if err != nil {
		return nil, fmt.Errorf("signing: public key %s: %w", path, err)
	}
	return pub, nil
}

func parsePublic(data []byte) (ed25519.PublicKey, error) {
	der, err := onePEM(data, publicBlock)
	if err != nil {
		return nil, err
	}
	k, err := x509.ParsePKIXPublicKey(der)
	if err != nil {
		return nil, fmt.Errorf("malformed public key: %w", err)
	}
	pub, ok := k.(ed25519.PublicKey)
	if !ok {
		return nil, fmt.Errorf("a %T, not an Ed25519 public key", k)
	}
	return pub, nil
}

// LoadPublicDir reads every *.pub file in dir (not its subdirectories) and returns
// the keys by ID. Any file that is not a valid public key is an error, so that a
// trust directory is never used half read. A directory without keys gives an empty
// map. It checks nothing of who may write dir: keys to trust are read with TrustDir
// or LoadTrust, which do.
func LoadPublicDir(dir string) (map[string]ed25519.PublicKey, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("signing: %w", err)
	}
	var names []string
	for _, e := range entries {
		if !e.IsDir() && strings.HasSuffix(e.Name(), ".pub") {
			names = append(names, e.Name())
		}
	}
	sort.Strings(names)
	keys := make(map[string]ed25519.PublicKey, len(names))
	for _, n := range names {
		pub, err := LoadPublic(filepath.Join(dir, n))
		if err != nil {
			return nil, err
		}
		keys[KeyID(pub)] = pub
	}
	return keys, nil
}
