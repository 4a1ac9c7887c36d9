package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"trimline/instruments/files"
	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
)

func newLimitsReleaseCmd() *command {
	c := &command{
		UsageLine: "trimline limits release FILE --by NAME --meaning MEANING [--station FILE | --ledger DB] [--key FILE]",
		Short:     "record a limit or sequence file's hash as released for production",
		Long: `Records in the ledger that the person --by released FILE (a limit or sequence
file, by its SHA-256) with the given meaning, at this moment. With --key the release
is signed with the approver's private key; a station that requires releases counts
only releases signed with a key in its release_keys folder.`,
	}
	by := c.Flag.String("by", "", "printed `name` of the person releasing")
	meaning := c.Flag.String("meaning", "", "`meaning` of the signature, e.g. approved, released, reviewed")
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` (default: the station's output folder's ledger.db)")
	stationPath := c.Flag.String("station", "", "station `file`: its ledger and signing key are used")
	keyPath := c.Flag.String("key", "", "the approver's private key `file` that signs the release (its .pub must be in the station's release_keys)")
	c.Run = func(ctx context.Context, e *env, pos []string) error {
		if len(pos) != 1 || *by == "" || *meaning == "" {
			return usagef("usage: %s", c.UsageLine)
		}
		data, err := files.ReadFile(pos[0])
		if err != nil {
			return badInput(err)
		}
		kind := sequencer.FileKind(data)
		switch kind {
		case release.KindLimits:
			if _, err := loadLimitSet(pos[0]); err != nil {
				return err
			}
		case release.KindSequence:
			if _, err := sequencer.LoadSequence(pos[0]); err != nil {
				return badInput(err)
			}
		default:
			return fmt.Errorf("%s: %w", pos[0], release.ErrNotReleasable)
		}
		lp := *ledgerPath
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
			return usagef("give --ledger or --station")
		}
		r, err := recordRelease(ctx, lp, *keyPath, pos[0], kind, data, *by, *meaning)
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "%s (%s file, SHA-256 %s)\n%s — %s — %s\n", pos[0], kind, r.SHA256, r.By, r.Meaning, r.At.Format("2006-01-02 15:04:05 UTC"))
		if r.KeyID != "" {
			fmt.Fprintf(e.stdout, "signed with %s\n", r.KeyID)
		} else {
			fmt.Fprintln(e.stdout, "unsigned: stations that require releases will not accept it (give --key)")
		}
		return nil
	}
	return c
}

// recordRelease opens the ledger at lp (creating its folder) and the key at
// keyPath ("" = unsigned) and records the release of data there.
func recordRelease(ctx context.Context, lp, keyPath, path, kind string, data []byte, by, meaning string) (release.Release, error) {
	if err := os.MkdirAll(filepath.Dir(lp), 0o755); err != nil {
		return release.Release{}, err
	}
	led, err := ledger.Open(ctx, lp)
	if err != nil {
		return release.Release{}, err
	}
	defer led.Close()
	var key *signing.Key
	if keyPath != "" {
		if key, err = signing.Load(keyPath); err != nil {
			return release.Release{}, badInput(err)
		}
	}
	return release.Record(ctx, led, key, path, kind, data, by, meaning)
}
