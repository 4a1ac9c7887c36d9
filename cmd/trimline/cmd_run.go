package main

import (
	"context"
	"os"

	"trimline/sequencer"
)

func newRunCmd() *command {
	c := &command{
		UsageLine: "trimline run --station FILE --sequence FILE --serial SN [--serial SN ...] [--retest] [--out DIR] [--operator NAME] [--lot ID] [--json]",
		Short:     "trim and certify units on a station (the production command)",
		Long: `Runs the sequence once per serial number: its steps in the order the sequence
file lists them (sweeps, fits, trim codes written, read back and stored, commands
to the card, as that product needs), then its limits judged. Each run is
recorded in the ledger (DIR/ledger.db); a PASS, FAIL or REVIEW run gets a
certificate number and a PDF in DIR/certificates. With sim:// addresses in the
station file the units run on the simulated bench.

Every serial must match the sequence file's serial_pattern; a serial that already
has a measured run (PASS, FAIL or REVIEW; engineering runs count among engineering
runs only) is refused unless --retest is given. A retest is linked to the earlier
run, and when it is certified the earlier certificate is superseded. Both checks
happen before any instrument is touched.

Exit code: 0 every unit passed, 1 a unit failed or was held for review, 2 bad input
(including files that were never released, a refused serial and a serial tested
before without --retest), 3 station fault or a stopped batch.`,
	}
	station := c.Flag.String("station", "", "station `file` (what is on this bench)")
	sequence := c.Flag.String("sequence", "", "sequence `file` (how the product is trimmed)")
	var serials multiFlag
	c.Flag.Var(&serials, "serial", "serial `number` of a unit to run; repeat for several")
	out := c.Flag.String("out", "", "output `folder` (default: the station file's output.folder)")
	operator := c.Flag.String("operator", defaultOperator(), "operator `name` printed on certificates")
	ambient := c.Flag.String("ambient", "", "ambient `temperature` to record on every run, e.g. \"23.1 °C\" or 23.1degC")
	asJSON := jsonFlag(c, "an object per unit (instead of a live line), then a summary object,")
	retest := c.Flag.Bool("retest", false, "run serials that already have a measured run again; each retest links to the earlier run and supersedes its certificate")
	lot := c.Flag.String("lot", "", "production `lot` id to record on every run (for quality numbers by lot)")
	engineering := c.Flag.Bool("engineering", false, "run files that were never released; certificates are marked ENGINEERING RUN — NOT FOR SHIPMENT and numbered apart")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if *station == "" || *sequence == "" || len(serials) == 0 {
			return usagef("need --station, --sequence and at least one --serial")
		}
		if len(args) > 0 {
			return usagef("unexpected argument %q", args[0])
		}
		if err := sequencer.CheckLot(*lot); err != nil {
			return usagef("--lot: %v", err)
		}
		t, err := runBatch(ctx, e, batch{stationPath: *station, sequencePath: *sequence, serials: serials, out: *out,
			operator: *operator, ambient: *ambient, engineering: *engineering, retest: *retest, json: *asJSON, lot: *lot})
		if err != nil {
			return err
		}
		if *asJSON {
			writeJSON(e.stdout, newSummaryOut(t))
		} else {
			printSummary(e.stdout, t.Summary())
		}
		return report(t.Err())
	}
	return c
}

func defaultOperator() string {
	for _, k := range []string{"TRIMLINE_OPERATOR", "USER", "USERNAME"} {
		if v := os.Getenv(k); v != "" {
			return v
		}
	}
	return "unknown"
}
