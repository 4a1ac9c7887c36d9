package sequencer

import "trimline/instruments"

// WrapSources replaces every opened voltage source of e by wrap's result, for
// tests that watch what the engine writes to it (the benchmarks time the first
// write). A wrapper keeps only the methods of instruments.Source: the engine
// finds no optional capability (output watchdog, reset) on it.
func WrapSources(e *Engine, wrap func(role string, s instruments.Source) instruments.Source) {
	for r, s := range e.sources {
		if _, current := e.currents[r]; current {
			continue
		}
		e.sources[r] = wrap(r, s)
	}
}
