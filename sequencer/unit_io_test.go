package sequencer_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer"
)

// zeroCheck is a kind written as a kind outside the package would be: it programs
// one level on the source, reads the meter and records the output as a result,
// through the Unit alone.
type zeroCheck struct {
	Level   units.Voltage  `yaml:"level"`
	Program *units.Voltage `yaml:"program"` // test: program this instead of the declared level
}

func init() {
	sequencer.RegisterStep(sequencer.StepKind{Name: "zero_check_test", About: "test: one level, one reading set",
		New: func() sequencer.Step { return new(zeroCheck) }})
}

func (z *zeroCheck) Check(c *sequencer.Checker) {
	c.Use(sequencer.RoleSource, sequencer.VoltageSource)
	c.Use(sequencer.RoleMeter, sequencer.VoltMeter)
	c.Declare("", sequencer.ResultDef{Name: "zero_out", Dim: units.Volt, About: "output at the level, V"})
}

func (z *zeroCheck) Stimuli() []sequencer.Stimulus {
	return []sequencer.Stimulus{{Role: sequencer.RoleSource, Level: float64(z.Level), Dim: units.Volt}}
}

func (z *zeroCheck) Run(ctx context.Context, u *sequencer.Unit) error {
	if !u.Live() {
		u.Invalid("zero_out", "measured on the bench only")
		return nil
	}
	return u.Do(ctx, func(ctx context.Context) error {
		level := float64(z.Level)
		if z.Program != nil {
			level = float64(*z.Program)
		}
		if err := u.Level(ctx, sequencer.RoleSource, level); err != nil {
			return err
		}
		if err := u.Output(ctx, sequencer.RoleSource, true); err != nil {
			return err
		}
		rs, err := u.Read(ctx, sequencer.RoleMeter, 4, sequencer.MeterPlan{})
		if err != nil {
			return err
		}
		var sum float64
		for _, r := range rs {
			sum += r.Value
		}
		u.Set("zero_out", sum/float64(len(rs)))
		return u.Output(ctx, sequencer.RoleSource, false)
	})
}

// A kind outside the engine measures through the Unit, and the caps hold for it:
// at load (its Stimuli) and at the write itself.
func TestKindMeasuresThroughTheUnit(t *testing.T) {
	withStep := func(level string) string {
		return strings.Replace(demoFile(t, "brx200-sequence.yaml"), "\n  - kind: clear_trim",
			fmt.Sprintf("\n  - kind: zero_check_test\n    level: %s\n\n  - kind: clear_trim", level), 1)
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(withStep("0 V")), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	st, _ := demoFiles(t, nil)
	onIdealBench(st)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "BRX-00012")
	var got *sequencer.Result
	for i := range rec.Results {
		if rec.Results[i].Name == "zero_out" {
			got = &rec.Results[i]
		}
	}
	// The ideal bench's unit has its drawn offset of a few mV around 2.5 V at 0 V in.
	if got == nil || !got.Valid || got.Value < 2.4 || got.Value > 2.6 {
		t.Fatalf("zero_out = %+v (verdict %s, fault %q)", got, rec.Verdict, rec.Fault)
	}
	// 60 mV is above the demo station's 50 mV cap: refused at load.
	over, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(withStep("60 mV")), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	if err := sequencer.CheckCaps(st, over); !errors.Is(err, sequencer.ErrSafety) || !strings.Contains(err.Error(), "zero_check_test") {
		t.Errorf("CheckCaps = %v, want a safety error naming the step", err)
	}
}

// A kind that programs a level it did not declare is stopped at the write, as a
// safety fault, even when the level is under the cap: the caps were checked at load
// on the declared levels only.
func TestUndeclaredLevelIsRefused(t *testing.T) {
	text := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "\n  - kind: clear_trim",
		"\n  - kind: zero_check_test\n    level: 0 V\n    program: 5 mV\n\n  - kind: clear_trim", 1)
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(text), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	st, _ := demoFiles(t, nil)
	onIdealBench(st)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "BRX-00012")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "a level its Stimuli did not declare") {
		t.Errorf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
}
