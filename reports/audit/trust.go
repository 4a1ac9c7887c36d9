package audit

import (
	"context"
	"fmt"
	"sort"
	"strings"

	"trimline/reports/ledger"
	"trimline/reports/signing"
)

// Unsigned is a run the trust rule refuses: a run of a station with a trusted
// key that is not signed by one of that station's keys, or (RunID "") a station
// none of whose keys is trusted, so that none of its runs can be told from a
// forgery.
type Unsigned struct {
	Station, RunID, Serial, Certificate string
	KeyID                               string // the key that signed the run; "" when unsigned
	Runs                                int    // for a station without a trusted key: its runs
}

func (u Unsigned) String() string {
	if u.RunID == "" {
		return fmt.Sprintf("station %s: no trusted key is bound to it, so none of its %d run(s) can be told from a forgery (give its key as %s.pub in --keys, or bind it in --trust)",
			u.Station, u.Runs, u.Station)
	}
	what := "unsigned"
	if u.KeyID != "" {
		what = "signed by " + u.KeyID + ", which is not a trusted key of station " + u.Station
	}
	cert := u.Certificate
	if cert == "" {
		cert = "no certificate"
	}
	return fmt.Sprintf("run %s (%s, serial %s) of station %s: %s", u.RunID, cert, u.Serial, u.Station, what)
}

// CheckSigners holds the runs of station (every station when station is "") to
// the trust rule: every run of a station must be signed by a key bound to that
// station in t, whatever the ledger or a station file says. It returns every run
// that is not, in chain order, and once each station with no bound key. That the
// signatures verify is VerifyChain's part (with Verifier(t.Keys())).
func CheckSigners(ctx context.Context, led *ledger.Ledger, t *signing.Trust, station string) ([]Unsigned, error) {
	return CheckSignersSince(ctx, led, t, station, nil)
}

// CheckSignersSince is CheckSigners for the runs after the saved heads since
// (ledger.ChainOptions.Since): a run of a station with a saved head, up to that
// head, is trusted through it and not held to the rule again. A station with no
// trusted key is listed with its runs after its head, if it has any.
func CheckSignersSince(ctx context.Context, led *ledger.Ledger, t *signing.Trust, station string, since []ledger.Head) ([]Unsigned, error) {
	runs, err := led.RunSigners(ctx, station)
	if err != nil {
		return nil, err
	}
	upTo := map[string]int64{}
	for _, h := range since {
		if h.Station != "" {
			upTo[h.Station] = h.Seq
		}
	}
	var out []Unsigned
	unbound := map[string]int{}
	var order []string
	for _, r := range runs {
		if r.Seq > 0 && r.Seq <= upTo[r.Station] {
			continue
		}
		if !t.Bound(r.Station) {
			if unbound[r.Station] == 0 {
				order = append(order, r.Station)
			}
			unbound[r.Station]++
			continue
		}
		if r.KeyID == "" || !t.SignedByStation(r.Station, r.KeyID) {
			out = append(out, Unsigned{Station: r.Station, RunID: r.RunID, Serial: r.Serial, Certificate: r.Certificate, KeyID: r.KeyID})
		}
	}
	sort.Strings(order)
	for _, s := range order {
		out = append(out, Unsigned{Station: s, Runs: unbound[s]})
	}
	return out, nil
}

// SignedRun is the trust rule for one run of station, signed by keyID with sig
// over signing.RecordMessage(number, runID, recordSHA): "" when keyID is bound to
// station and the signature verifies with it, else why not, in words.
func SignedRun(t *signing.Trust, station, number, runID, recordSHA, keyID string, sig []byte) string {
	switch {
	case !t.Bound(station):
		return fmt.Sprintf("station %s has no trusted key (%s): a record of it cannot be told from a forgery", station, t.Source)
	case keyID == "":
		return fmt.Sprintf("unsigned, but station %s has a trusted key (%s): every run of it must be signed by that key", station, t.Source)
	case !t.SignedByStation(station, keyID):
		return fmt.Sprintf("signed by %s, which is not a trusted key of station %s (%s)", keyID, station, t.Source)
	}
	pub, _ := t.Key(keyID)
	if !signing.Verify(pub, signing.RecordMessage(number, runID, recordSHA), sig) {
		return fmt.Sprintf("the record signature of %s does not verify", keyID)
	}
	return ""
}

// stationOf returns the station keyID is bound to in t, "" for none.
func stationOf(t *signing.Trust, keyID string) string {
	for _, s := range t.Stations() {
		if t.SignedByStation(s, keyID) {
			return s
		}
	}
	return ""
}

// listUnsigned is problems in one line each, for a verdict's reasons.
func listUnsigned(problems []Unsigned) string {
	lines := make([]string, len(problems))
	for i, p := range problems {
		lines[i] = p.String()
	}
	return strings.Join(lines, "; ")
}
