package sequencer

import (
	"errors"

	"trimline/sequencer/units"
)

func errorsAs(err error, target any) bool { return errors.As(err, target) }

func formatSI(v float64, unit string) string { return units.Format(v, unit, 4) }
