// The test DEVELOPERS.md shows for its example step kind.

package sequencer_test

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"trimline/sequencer"
)

// A port_reading step after store reads the gain register back, and a limit
// judges it against the code the trim wrote: live on the simulated bench, on
// paper at Open (the TUR prediction) and again in a replay of the record.
func TestPortReadingKind(t *testing.T) {
	seqText := demoFile(t, "brx200-sequence.yaml") + `
  - kind: port_reading
    name: gain register
    query: "TRIM GAIN?"
    unit: code
    result: gain_register
`
	limitText := demoFile(t, "brx200-limits.yaml") + `
  - name: gain register holds the code
    description: The stored gain register is the code the trim wrote.
    unit: code
    uses: [gain_register, gain_code]
    expr: gain_register == gain_code
`
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(seqText),
		demoReader(t, map[string]string{"brx200-limits.yaml": limitText}))
	if err != nil {
		t.Fatal(err)
	}
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "BRX-00001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if got, code := resultOf(t, rec, "gain_register").Value, resultOf(t, rec, "gain_code").Value; got != code {
		t.Errorf("gain_register = %g, gain_code = %g", got, code)
	}
	again, err := sequencer.Replay(cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, again); len(d) > 0 {
		t.Errorf("replay differs: %s", strings.Join(d, "; "))
	}

	// A mistake in the step is reported at its key, with the file's line.
	bad := strings.Replace(seqText, "unit: code", "unit: A", 1)
	_, err = sequencer.ParseSequence("brx200-sequence.yaml", []byte(bad), demoReader(t, nil))
	at := fmt.Sprintf(":%d:11: expected V or code, found \"A\"", lineOf(t, bad, "unit: A"))
	if err == nil || !strings.Contains(err.Error(), at) {
		t.Errorf("want the unit refused at its key, got %v", err)
	}
}
