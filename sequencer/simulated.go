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
