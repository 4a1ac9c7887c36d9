package sequencer

import (
	"context"
	"testing"
	"time"
	"trimline/instruments"

	"github.com/rs/zerolog"
)

// hangSource blocks every call until its context ends (a USB source that stopped
// answering); okSource records whether its output was switched off with a live
// context.
type hangSource struct{}

func (hangSource) Close() error { return nil }
func (hangSource) SetLevel(ctx context.Context, v float64) error {
	<-ctx.Done()
	return ctx.Err()
}
func (hangSource) SetOutput(ctx context.Context, on bool) error {
	<-ctx.Done()
	return ctx.Err()
}
func (hangSource) SetCompliance(ctx context.Context, a float64) error { return nil }

type okSource struct{ offOK bool }

func (*okSource) Close() error                                  { return nil }
func (*okSource) SetLevel(ctx context.Context, v float64) error { return ctx.Err() }
func (s *okSource) SetOutput(ctx context.Context, on bool) error {
	if err := ctx.Err(); err != nil {
		return err // a real driver refuses to write on an expired context
	}
	if !on {
		s.offOK = true
	}
	return nil
}
func (*okSource) SetCompliance(ctx context.Context, a float64) error { return nil }

// Every source's output is switched off on the way out even when another source
// hangs: each gets its own time, and they are switched in parallel. Before, one
// 2 s context served them all in turn, and a hung first source left the second on.
func TestSafeOffEverySourceDespiteAHungOne(t *testing.T) {
	good := &okSource{}
	e := &Engine{roles: []string{"bias", "source"}, sources: map[string]instruments.Source{}}
	e.sources["bias"] = hangSource{}
	e.sources["source"] = good
	start := time.Now()
	err := e.safeOff(zerolog.Nop())
	t.Logf("safeOff took %v, err %v", time.Since(start), err)
	if !good.offOK {
		t.Fatal("the second source's output was never switched off: the hung first source used up safeOff's whole 2 s context")
	}
}
