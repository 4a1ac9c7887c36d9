package main

import (
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/reports/whatif"
	"trimline/sequencer"
)

// actionRelease is the audit-trail action that releases a file by its hash.
const actionRelease = "release"

// release is the detail of a release entry: a 21 CFR 11.50 manifestation (printed
// name, date and time, meaning) signed with the releasing key.
type release struct {
	File      string    `json:"file"`
	Kind      string    `json:"kind"`
	SHA256    string    `json:"sha256"`
	By        string    `json:"by"`
	Meaning   string    `json:"meaning"`
	At        time.Time `json:"at"`
	KeyID     string    `json:"key_id,omitempty"`
	Signature string    `json:"signature,omitempty"` // base64 Ed25519 over releaseMessage
}

func releaseMessage(r release) []byte {
	return []byte("trimline-release-v1\n" + r.SHA256 + "\n" + r.By + "\n" + r.Meaning + "\n" + r.At.UTC().Format(time.RFC3339Nano))
}

func init() { limitsSubs["release"] = limitsRelease }

func limitsRelease(ctx context.Context, args []string) error {
	fs := newFlags("limits release")
	by := fs.String("by", "", "printed `name` of the person releasing")
	meaning := fs.String("meaning", "", "`meaning` of the signature, e.g. approved, released, reviewed")
	ledgerPath := fs.String("ledger", "", "ledger `file` (default: the station's output folder's ledger.db)")
	stationPath := fs.String("station", "", "station `file`: its ledger and signing key are used")
	keyPath := fs.String("key", "", "the approver's private key `file` that signs the release (its .pub must be in the station's release_keys)")
	pos, err := parseInterleaved(fs, args)
	if err != nil {
		return usageErr("%v", err)
	}
	if len(pos) != 1 || *by == "" || *meaning == "" {
		return usageErr("usage: trimline limits release FILE --by NAME --meaning MEANING [--station FILE | --ledger DB] [--key FILE]")
	}
	data, err := os.ReadFile(pos[0])
	if err != nil {
		return badInput(err)
	}
	kind := detectKind(data)
	switch kind {
	case "limits":
		if _, err := loadLimitSet(pos[0]); err != nil {
			return err
		}
	case "sequence":
		if _, err := sequencer.LoadSequence(pos[0]); err != nil {
			return badInput(err)
		}
	default:
		return badInput(fmt.Errorf("%s: only limit and sequence files are released", pos[0]))
	}
	lp, kp := *ledgerPath, *keyPath
	if *stationPath != "" {
		st, err := sequencer.LoadStation(*stationPath)
		if err != nil {
			return badInput(err)
		}
		if lp == "" && st.OutputFolder != "" {
			lp = filepath.Join(st.OutputFolder, "ledger.db")
		}
	}
	if lp == "" {
		return usageErr("give --ledger or --station")
	}
	r, err := recordRelease(ctx, lp, kp, pos[0], kind, data, *by, *meaning)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdoutW, "%s (%s file, SHA-256 %s)\n%s — %s — %s\n", pos[0], kind, r.SHA256, r.By, r.Meaning, r.At.Format("2006-01-02 15:04:05 UTC"))
	if r.KeyID != "" {
		fmt.Fprintf(stdoutW, "signed with %s\n", r.KeyID)
	} else {
		fmt.Fprintln(stdoutW, "unsigned: stations that require releases will not accept it (give --key)")
	}
	return nil
}

// recordRelease writes a signed release entry for data into the ledger at lp.
func recordRelease(ctx context.Context, lp, keyPath, path, kind string, data []byte, by, meaning string) (release, error) {
	if err := os.MkdirAll(filepath.Dir(lp), 0o755); err != nil {
		return release{}, stationErr(err)
	}
	led, err := ledger.Open(ctx, lp)
	if err != nil {
		return release{}, stationErr(err)
	}
	defer led.Close()
	sum := sha256.Sum256(data)
	r := release{File: filepath.Base(path), Kind: kind, SHA256: hex.EncodeToString(sum[:]), By: by, Meaning: meaning, At: time.Now().UTC()}
	if keyPath != "" {
		k, err := signing.Load(keyPath)
		if err != nil {
			return release{}, badInput(err)
		}
		r.KeyID, r.Signature = k.ID(), base64.StdEncoding.EncodeToString(k.Sign(releaseMessage(r)))
	}
	detail, _ := json.Marshal(r)
	if err := led.Audit(ctx, r.By, actionRelease, r.SHA256, string(detail)); err != nil {
		return release{}, stationErr(err)
	}
	return r, nil
}

// released returns the hashes released in the ledger's audit trail.
func released(ctx context.Context, led *ledger.Ledger) (map[string]release, error) {
	trail, err := led.AuditTrail(ctx)
	if err != nil {
		return nil, err
	}
	out := map[string]release{}
	for _, e := range trail {
		if e.Action != actionRelease {
			continue
		}
		var r release
		if json.Unmarshal([]byte(e.Detail), &r) == nil && r.SHA256 == e.Subject {
			out[r.SHA256] = r
		}
	}
	return out, nil
}

// checkReleased refuses a production run on a sequence or limit file that no
// trusted approver released: a release counts only when its signature verifies
// with one of the public keys in the station's release_keys folder.
func checkReleased(ctx context.Context, led *ledger.Ledger, st *sequencer.Station, seq *sequencer.Sequence) error {
	trusted, err := signing.LoadPublicDir(st.ReleaseKeys)
	if err != nil {
		return badInput(fmt.Errorf("%s release_keys: %w", st.File.Name, err))
	}
	rel, err := releasedBy(ctx, led, trusted)
	if err != nil {
		return stationErr(err)
	}
	var missing []string
	for _, f := range []sequencer.FileRef{seq.File, seq.LimitsFile} {
		if _, ok := rel[f.SHA256]; !ok {
			missing = append(missing, fmt.Sprintf("%s file %s (SHA-256 %s…)", f.Kind, f.Name, f.SHA256[:12]))
		}
	}
	if len(missing) > 0 {
		return badInput(fmt.Errorf("production runs need released files; not released by a trusted approver (%s): %s. An approver releases them with "+
			"'trimline limits release FILE --by NAME --meaning approved --key THEIR.key', or run with --engineering (certificates then say ENGINEERING RUN — NOT FOR SHIPMENT)",
			st.ReleaseKeys, strings.Join(missing, "; ")))
	}
	return nil
}

// releasedBy returns the releases whose signature verifies with a trusted key.
func releasedBy(ctx context.Context, led *ledger.Ledger, trusted map[string]ed25519.PublicKey) (map[string]release, error) {
	all, err := released(ctx, led)
	if err != nil {
		return nil, err
	}
	out := map[string]release{}
	for sha, r := range all {
		pub, ok := trusted[r.KeyID]
		sig, err := base64.StdEncoding.DecodeString(r.Signature)
		if ok && err == nil && signing.Verify(pub, releaseMessage(r), sig) {
			out[sha] = r
		}
	}
	return out, nil
}

func init() { limitsSubs["whatif"] = limitsWhatIf }

// limitsWhatIf re-judges every stored result in a ledger against a new limit file.
func limitsWhatIf(ctx context.Context, args []string) error {
	fs := newFlags("limits whatif")
	ledgerPath := fs.String("ledger", "", "ledger `file` to re-judge")
	product := fs.String("product", "", "only units of this `product` (default: the new file's)")
	since := fs.String("since", "", "only runs finished on or after this `date` (YYYY-MM-DD)")
	until := fs.String("until", "", "only runs finished before the end of this `date` (YYYY-MM-DD)")
	oldPath := fs.String("old", "", "the old limit `file` to compare with (default: the one in force on the newest run)")
	pdfPath := fs.String("pdf", "", "also write the report with histograms to this PDF `file`")
	pos, err := parseInterleaved(fs, args)
	if err != nil {
		return usageErr("%v", err)
	}
	if len(pos) != 1 || *ledgerPath == "" {
		return usageErr("usage: trimline limits whatif NEW --ledger DB [--product P] [--since DATE] [--until DATE] [--old FILE] [--pdf FILE]")
	}
	nw, err := loadLimitSet(pos[0])
	if err != nil {
		return err
	}
	var from, to time.Time
	for _, d := range []struct {
		s   string
		t   *time.Time
		add int
	}{{*since, &from, 0}, {*until, &to, 1}} {
		if d.s == "" {
			continue
		}
		v, err := time.Parse("2006-01-02", d.s)
		if err != nil {
			return usageErr("expected a date as YYYY-MM-DD, found %q", d.s)
		}
		*d.t = v.AddDate(0, 0, d.add)
	}
	req := whatif.Request{Ledger: *ledgerPath, New: nw, Product: *product, Since: from, Until: to,
		PDF: *pdfPath, Generated: time.Now()}
	if *oldPath != "" {
		if req.Old, err = loadLimitSet(*oldPath); err != nil {
			return err
		}
	}
	if _, err := whatif.Run(ctx, req, stdoutW); errors.Is(err, whatif.ErrNoRuns) {
		return badInput(err)
	} else if err != nil {
		return stationErr(err)
	}
	if *pdfPath != "" {
		fmt.Fprintf(stdoutW, "\nreport with plots: %s\n", *pdfPath)
	}
	return nil
}
