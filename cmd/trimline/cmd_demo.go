package main

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
	"trimline/sequences"
)

func newDemoCmd() *command {
	c := &command{
		UsageLine: "trimline demo [--list] [--product NAME] [--out DIR] [--units N] [--seed S] [--transport sim|tcp|serial] [--lot ID] [--retest]",
		Short:     "write a demo product's files and trim N simulated units end to end",
		Long: `Writes the station, sequence and limit files of a demo product (all invented) into
DIR, then runs N simulated units through the whole job on the simulated bench. The
default product is the BRX-200 bridge amplifier card: pre-trim sweep, fit, trim,
read-back, store, verification sweep, limits, ledger and one PDF certificate per
unit. About 2 % of simulated units carry a real defect (a stuck trim-DAC bit, excess
noise, an open output); the default seed's first 25 BRX-200 units include two, so
the demo shows how failures look.

--list prints the demo products' names, one per line, and nothing else; --product
NAME runs that one (its files, its station, its keys). Every product is files only:
see the sequences folder.

Afterwards DIR holds the three files, certificates/*.pdf, ledger.db (SQLite) and
trimline.log (JSON lines). Rerun with the same --seed for the same units. The units
are numbered from 1 after the product's serial pattern (BRX-00001 onwards); into a
folder whose ledger has them already, run again with --retest (each retest
supersedes the unit's earlier certificate) or use a new --out.

With --transport tcp or serial the same units run through the real SCPI and
trim-port drivers against the simulator served on loopback TCP ports or
pseudo-terminals (see trimline bench). The served bench runs on real time, so each
unit takes a few seconds, as it would on a real bench.`,
	}
	list := c.Flag.Bool("list", false, "print the demo products' names, one per line, and stop")
	productName := c.Flag.String("product", sequences.Default, "the demo product to run (see --list)")
	out := c.Flag.String("out", "trimline-demo", "output `folder`")
	n := c.Flag.Int("units", 25, "number of simulated `units`")
	seed := c.Flag.Uint64("seed", 8, "`seed` of the simulated unit population")
	transport := c.Flag.String("transport", "sim", "`how` to reach the simulated bench: sim (in process), tcp or serial")
	operator := c.Flag.String("operator", defaultOperator(), "operator `name` printed on certificates")
	lot := c.Flag.String("lot", "", "production `lot` id to record on every run")
	ambient := c.Flag.String("ambient", "", "ambient `temperature` to record on every run, e.g. \"23.1 °C\" or 23.1degC")
	retest := c.Flag.Bool("retest", false, "run units the folder's ledger has already tested again, as retests")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) > 0 {
			return usagef("unexpected argument %q", args[0])
		}
		if *list {
			ps, err := sequences.Products()
			if err != nil {
				return err
			}
			for _, p := range ps {
				fmt.Fprintln(e.stdout, p.Name)
			}
			return nil
		}
		if *n < 1 {
			return usagef("--units must be at least 1")
		}
		prod, err := sequences.Find(*productName)
		if err != nil {
			return usagef("--product: %v", err)
		}
		station, sequence, err := writeProductFiles(*out, prod, *seed, time.Now())
		if err != nil {
			return err
		}
		// The demo plays its own quality engineer: it releases the demo sequence and
		// limit files in its ledger, as production requires.
		if err := releaseProduct(ctx, e, *out, prod); err != nil {
			return err
		}
		stationID, err := stationIDOf(station)
		if err != nil {
			return err
		}
		switch *transport {
		case "sim":
		case "tcp", "serial":
			st, err := sequencer.LoadStation(station)
			if err != nil {
				return badInput(err)
			}
			srv, err := serveStation(ctx, st, *transport, nil)
			if err != nil {
				return err
			}
			defer srv.Close()
			station = filepath.Join(*out, strings.TrimSuffix(prod.Station, ".yaml")+"-"+*transport+".yaml")
			data, err := st.Rewired(srv.Addresses(), served(srv))
			if err != nil {
				return err
			}
			if err := os.WriteFile(station, data, 0o644); err != nil {
				return err
			}
			fmt.Fprintf(e.stdout, "serving the simulated bench over %s; station file %s\n", *transport, station)
		default:
			return usagef("--transport must be sim, tcp or serial")
		}
		fmt.Fprintf(e.stdout, "trimline demo: %d simulated %s units, seed %d, files in %s\n\n", *n, prod.Name, *seed, *out)
		serials := make([]string, *n)
		for i := range serials {
			serials[i] = prod.Serial(i + 1)
		}
		if err := sequencer.CheckLot(*lot); err != nil {
			return usagef("--lot: %v", err)
		}
		t, err := runBatch(ctx, e, batch{stationPath: station, sequencePath: sequence, serials: serials, out: *out,
			operator: *operator, ambient: *ambient, retest: *retest, lot: *lot})
		if errors.Is(err, issuing.ErrAttemptsUsed) {
			return fmt.Errorf("%w\nThe demo folder %s has run these units as often as the sequence allows (retest.max_attempts): --out a new folder", err, *out)
		}
		if errors.Is(err, issuing.ErrTestedBefore) {
			return fmt.Errorf("%w\nThe demo folder %s already holds these units: give --retest to run them again, or --out a new folder", err, *out)
		}
		if err != nil {
			return err
		}
		printSummary(e.stdout, t.Summary())
		fmt.Fprintf(e.stdout, "\ncertificates: %s\nledger:       %s\nlog:          %s\n",
			filepath.Join(*out, "certificates"), filepath.Join(*out, "ledger.db"), filepath.Join(*out, "trimline.log"))
		// No key is trusted by default: an auditor names the station's public key.
		keys := filepath.Join(*out, "keys")
		cert := filepath.Join(*out, "certificates", "CERTIFICATE.pdf")
		if pdfs, _ := filepath.Glob(filepath.Join(*out, "certificates", "*.pdf")); len(pdfs) > 0 {
			cert = pdfs[0]
		}
		fmt.Fprintf(e.stdout, "\nan auditor checks them with the station's public key (%s), kept apart from the station:\n"+
			"  trimline audit verify %s --keys %s\n  trimline audit ledger --ledger %s --keys %s\n",
			filepath.Join(keys, stationID+".pub"), cert, keys, filepath.Join(*out, "ledger.db"), keys)
		// The demo succeeds when it ran; failed units are part of the show.
		if err := t.Err(); !errors.Is(err, sequencer.ErrUnitsFailed) {
			return report(err)
		}
		return nil
	}
	return c
}

var (
	calDueLine = regexp.MustCompile(`(?m)^(\s*cal_due:\s*)\d{4}-\d{2}-\d{2}`)
	// calDateLine is a calibration: block's date (the only date: key of the
	// demo station files).
	calDateLine = regexp.MustCompile(`(?m)^(\s*date:\s*)\d{4}-\d{2}-\d{2}`)
	seedLine    = regexp.MustCompile(`(?m)^(\s*seed:\s*)"\d+"`)
)

// writeDemoFiles writes the default product's files into dir; see writeProductFiles.
func writeDemoFiles(dir string, seed uint64, now time.Time) (station, sequence string, err error) {
	p, err := sequences.Find(sequences.Default)
	if err != nil {
		return "", "", err
	}
	return writeProductFiles(dir, p, seed, now)
}

// writeProductFiles copies a demo product's embedded files into dir. The simulated
// instruments' calibration due dates are set a year after now so the demo never
// trips the expired-calibration check (and their calibration dates two months
// before now, within their 2-year specs), and the seed is written into the station
// file, where the simulated bench reads it. The station gets a signing key named
// after its id, and the demo's quality engineer a release key; keys/trust.yaml
// trusts both.
func writeProductFiles(dir string, p sequences.Product, seed uint64, now time.Time) (station, sequence string, err error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", "", err
	}
	for _, name := range []string{p.Station, p.Sequence, p.Limits} {
		data, err := fs.ReadFile(sequences.Demo, name)
		if err != nil {
			return "", "", err
		}
		if name == p.Station {
			data = calDueLine.ReplaceAll(data, []byte("${1}"+now.AddDate(1, 0, 0).Format("2006-01-02")))
			data = calDateLine.ReplaceAll(data, []byte("${1}"+now.AddDate(0, -2, 0).Format("2006-01-02")))
			data = seedLine.ReplaceAll(data, []byte(`${1}"`+strconv.FormatUint(seed, 10)+`"`))
		}
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			return "", "", err
		}
	}
	station = filepath.Join(dir, p.Station)
	id, err := stationIDOf(station)
	if err != nil {
		return "", "", err
	}
	for _, k := range []struct{ dir, name string }{{filepath.Join(dir, "keys"), id}, {filepath.Join(dir, "keys", "approvers"), "demo-qe"}} {
		if _, err := os.Stat(filepath.Join(k.dir, k.name+".key")); os.IsNotExist(err) {
			if _, _, err := signing.Init(k.dir, k.name); err != nil {
				return "", "", err
			}
		}
	}
	if err := os.WriteFile(filepath.Join(dir, "keys", "trust.yaml"), []byte(demoTrust(dir)), 0o600); err != nil {
		return "", "", err
	}
	if err := demoPeopleKeys(station); err != nil {
		return "", "", err
	}
	return station, filepath.Join(dir, p.Sequence), nil
}

// demoPeopleKeys makes a key pair for every person of the station file whose
// public key (people: key:, NAME.pub) is not there yet, NAME.key beside it: the
// demo's reviewer signs review decisions with it.
func demoPeopleKeys(station string) error {
	st, err := sequencer.LoadStation(station)
	if err != nil {
		return badInput(err)
	}
	for _, p := range st.People {
		name, ok := strings.CutSuffix(filepath.Base(p.Key), ".pub")
		if p.Key == "" || !ok {
			continue
		}
		if _, err := os.Stat(p.Key); os.IsNotExist(err) {
			if _, _, err := signing.Init(filepath.Dir(p.Key), name); err != nil {
				return err
			}
		}
	}
	return nil
}

// stationIDOf reads the id of the station file at path.
func stationIDOf(path string) (string, error) {
	st, err := sequencer.LoadStation(path)
	if err != nil {
		return "", badInput(err)
	}
	return st.ID, nil
}

// demoTrust is the demo folder's trust file: the key of every station that has
// one in dir/keys, bound to its id, and its quality engineer, named as the trust
// names them, who may release and void.
func demoTrust(dir string) string {
	var b strings.Builder
	b.WriteString(`# Whose keys the demo trusts: its stations', and its quality engineer's,
# who may release files and void certificates. The demo station files'
# release_keys names this file; an auditor passes their own copy with --trust.
trust:
  stations:
`)
	pubs, _ := filepath.Glob(filepath.Join(dir, "keys", "*.pub"))
	sort.Strings(pubs)
	for _, p := range pubs {
		id := strings.TrimSuffix(filepath.Base(p), ".pub")
		fmt.Fprintf(&b, "    - {id: %s, public_key: %s.pub}\n", id, id)
	}
	b.WriteString(`  approvers:
    - {name: Demo Quality Engineer, public_key: approvers/demo-qe.pub, may: [release, void]}
`)
	return b.String()
}

// releaseDemo releases the default product's files; see releaseProduct.
func releaseDemo(ctx context.Context, e *env, dir string) error {
	p, err := sequences.Find(sequences.Default)
	if err != nil {
		return err
	}
	return releaseProduct(ctx, e, dir, p)
}

// releaseProduct approves a demo product's sequence and limit files in DIR's
// ledger unless they are in force already.
func releaseProduct(ctx context.Context, e *env, dir string, p sequences.Product) error {
	trust, err := release.Approvers(filepath.Join(dir, "keys", "trust.yaml"))
	if err != nil {
		return err
	}
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		return err
	}
	rel, err := release.By(ctx, led, trust)
	led.Close()
	if err != nil {
		return err
	}
	seq, err := sequencer.LoadSequence(filepath.Join(dir, p.Sequence))
	if err != nil {
		return badInput(err)
	}
	key, err := signing.Load(filepath.Join(dir, "keys", "approvers", "demo-qe.key"))
	if err != nil {
		return err
	}
	for _, f := range []string{p.Sequence, p.Limits} {
		data, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil {
			return err
		}
		sum := sha256.Sum256(data)
		if _, ok := rel[hex.EncodeToString(sum[:])]; ok {
			continue
		}
		req := release.Request{Key: key, Trust: trust, Decision: release.Approve, Ranges: sequencer.PhysicalRanges(seq), Catalog: seq.Catalog()}
		r, err := recordRelease(ctx, filepath.Join(dir, "ledger.db"), f, sequencer.FileKind(data), data, req)
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "released %s for production: %s — %s, signed %s\n", f, r.By, r.Meaning, r.KeyID)
	}
	return nil
}
