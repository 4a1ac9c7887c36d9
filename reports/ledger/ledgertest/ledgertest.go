// Package ledgertest changes a ledger file behind the ledger's back, as a person
// with write access to the file could, so that tests outside the ledger package
// (the command's among them) can show what the audit finds.
package ledgertest

import (
	"database/sql"
	"fmt"

	_ "modernc.org/sqlite" // the "sqlite" driver
)

// EditRow changes one row of table in the ledger file at path the way the
// append-only trigger is got round: drop table's update trigger
// (TABLE_no_update), run "UPDATE table SET set WHERE where", and create the
// trigger again from its own SQL. It fails unless exactly one row changed. The
// ledger must not be open for writing meanwhile.
func EditRow(path, table, set, where string) error {
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=busy_timeout(5000)")
	if err != nil {
		return err
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	trigger := table + "_no_update"
	var create string
	if err := db.QueryRow(`SELECT sql FROM sqlite_schema WHERE type = 'trigger' AND name = ?`, trigger).Scan(&create); err != nil {
		return fmt.Errorf("trigger %s: %w", trigger, err)
	}
	if _, err := db.Exec(`DROP TRIGGER ` + trigger); err != nil {
		return err
	}
	res, uerr := db.Exec(`UPDATE ` + table + ` SET ` + set + ` WHERE ` + where)
	if _, err := db.Exec(create); err != nil {
		return fmt.Errorf("put %s back: %w", trigger, err)
	}
	if uerr != nil {
		return uerr
	}
	if n, _ := res.RowsAffected(); n != 1 {
		return fmt.Errorf("UPDATE %s SET %s WHERE %s changed %d rows, want 1", table, set, where, n)
	}
	return nil
}

// DropTrigger drops the trigger name from the ledger file at path.
func DropTrigger(path, name string) error {
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=busy_timeout(5000)")
	if err != nil {
		return err
	}
	defer db.Close()
	_, err = db.Exec(`DROP TRIGGER ` + name)
	return err
}
