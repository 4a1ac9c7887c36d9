package ledger

import (
	"context"
	"fmt"
)

// RunSigner is who signed a run, as RunSigners lists it.
type RunSigner struct {
	Station, RunID, Serial string
	Seq                    int64  // its chain_seq: its position on the station's chain
	Certificate            string // "" for a run without one
	KeyID                  string // "" for an unsigned run
}

// RunSigners lists the ledger's own runs of station (every station when station
// is ""), station by station in chain order, with the key that signed each: what
// an auditor needs to hold every run of a station to the station's trusted key.
// It reads the runs table; VerifyChain checks that the key ids there are the
// chain's and that the signatures verify. It returns an empty slice when there
// are no runs.
func (l *Ledger) RunSigners(ctx context.Context, station string) ([]RunSigner, error) {
	q := `SELECT station, run_id, serial, coalesce(chain_seq, 0), coalesce(certificate, ''), key_id FROM runs`
	var args []any
	if station != "" {
		q += ` WHERE station = ?`
		args = append(args, station)
	}
	q += ` ORDER BY station, chain_seq`
	rows, err := l.db.QueryContext(ctx, q, args...)
	out, err := collect(rows, err, func(r scanner) (RunSigner, error) {
		var s RunSigner
		err := r.Scan(&s.Station, &s.RunID, &s.Serial, &s.Seq, &s.Certificate, &s.KeyID)
		return s, err
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: run signers: %w", err)
	}
	return out, nil
}
