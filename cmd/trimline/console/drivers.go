package console

// The console opens the station's instruments itself, and with Bench "tcp" it
// rewires them to tcp:// addresses, so it needs the drivers of those schemes
// registered whoever links it (the trimline command does the same in main.go).
import (
	_ "trimline/instruments/generic" // SCPI and trim-port drivers, schemes serial:// tcp:// usbtmc://
	_ "trimline/instruments/sim"     // the simulated bench, scheme sim://
)
