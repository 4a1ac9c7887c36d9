package ledger

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
)

// WrittenCode is one trim DAC's code of a stored run, as its record's trims
// hold it (sequencer.TrimCode), without the numbers a comparison of codes
// does not need.
type WrittenCode struct {
	Channel   string `json:"channel"` // "" for a one-channel unit
	DAC       string `json:"dac"`
	Code      int    `json:"code"`      // the code written (or that would have been)
	Written   bool   `json:"written"`   // false when the run stopped before writing it
	Saturated bool   `json:"saturated"` // the code asked for was outside the DAC's range
}

// TrimCodes returns the trim codes of every stored run of product (compared
// without regard to case; "" is every product), by run id, each run's codes
// in record order. A run with no trims has none in the map. It reads the
// trims of each record's JSON and nothing else. Errors: ctx's, database
// errors, and ErrCorrupt (wrapped) for trims that do not decode.
func (l *Ledger) TrimCodes(ctx context.Context, product string) (map[string][]WrittenCode, error) {
	tx, err := l.db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return nil, fmt.Errorf("ledger: trim codes: %w", err)
	}
	defer tx.Rollback()
	q, args := `SELECT run_id, json_extract(record_json, '$.trims') FROM runs`, []any{}
	if product != "" {
		q += ` WHERE product = ? COLLATE NOCASE`
		args = append(args, product)
	}
	out := map[string][]WrittenCode{}
	err = eachRow(ctx, tx, q, args, func(rows *sql.Rows) error {
		var id string
		var trims []byte
		if err := rows.Scan(&id, &trims); err != nil {
			return err
		}
		if len(trims) == 0 || string(trims) == "null" || string(trims) == "[]" {
			return nil
		}
		var codes []WrittenCode
		if err := json.Unmarshal(trims, &codes); err != nil {
			return fmt.Errorf("%w: run %s: trims: %v", ErrCorrupt, id, err)
		}
		out[id] = codes
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: trim codes: %w", err)
	}
	return out, nil
}
