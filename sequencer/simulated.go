package sequencer

import "trimline/instruments"

// simulation is what a record says of simulation when its instruments are refs:
// nil when none is simulated (instruments.Simulated, by address or by the
// identity it gave), else the mark and the simulated roles. benchClock says
// that the run's times come from the simulated bench's clock.
func simulation(refs []InstrumentRef, benchClock bool) *Simulation {
	var roles []string
	for _, r := range refs {
		if instruments.Simulated(r.Address, r.Identity) {
			roles = append(roles, r.Role)
		}
	}
	if len(roles) == 0 {
		return nil
	}
	return &Simulation{Mark: SimulatedMark, Roles: roles, BenchClock: benchClock}
}

// SimulationOf is what rec says of simulation: its Simulated, or for a record
// made before records said so, the same judgement made from the instruments it
// lists (their addresses and the identities they gave). Such a record's times
// are the bench's own clock when an instrument was at a sim:// address: the
// engine has always taken its clock from the simulated bench.
func SimulationOf(rec *Record) *Simulation {
	if rec == nil {
		return nil
	}
	if rec.Simulated != nil {
		return rec.Simulated
	}
	bench := false
	for _, r := range rec.Instruments {
		bench = bench || instruments.Simulated(r.Address, instruments.Identity{})
	}
	return simulation(rec.Instruments, bench)
}
