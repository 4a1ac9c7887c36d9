package sim

import (
	"context"
	"net/url"

	"trimline/instruments"
)

// Maker is the invented maker every simulated instrument reports in its
// identity: instruments.SimulatedMaker, by which a record tells a simulated
// instrument reached over TCP or a serial line from a real one.
const Maker = instruments.SimulatedMaker

// Driver is the "sim" scheme driver, registered by this package's init.
type Driver struct{}

var (
	_ instruments.Driver          = Driver{}
	_ instruments.GroupDriver     = Driver{}
	_ instruments.SettingsChecker = Driver{}
)

func init() { instruments.Register("sim", Driver{}) }

// Open opens one unwired instrument on a bench of its own: a source alone, a meter
// alone (it reads 0 V plus its own errors and noise) or a DUT fixture alone (its
// input is 0 V).
func (Driver) Open(ctx context.Context, addr *url.URL, spec instruments.Spec) (instruments.Instrument, error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	if _, err := model(addr); err != nil {
		return nil, err
	}
	spec.Address = addr.String()
	b, err := NewBench([]instruments.Spec{spec})
	if err != nil {
		return nil, err
	}
	return b.instrument(spec), nil
}

// OpenGroup opens every spec on one bench, wired together, and returns the
// instruments in the order of specs.
func (Driver) OpenGroup(ctx context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	b, err := NewBench(specs)
	if err != nil {
		return nil, err
	}
	out := make([]instruments.Instrument, len(specs))
	for i := range specs {
		out[i] = b.Instrument(i)
	}
	return out, nil
}

// CheckSettings validates one spec's address and settings without opening
// anything. A bad key or value gives a *instruments.SettingError. Conflicts between
// the bench-wide keys of different specs are found when the group is opened.
func (Driver) CheckSettings(spec instruments.Spec) error {
	m, err := specModel(spec)
	if err != nil {
		return err
	}
	_, err = parseSettings(m, spec.Settings, spec.Dir)
	return err
}
