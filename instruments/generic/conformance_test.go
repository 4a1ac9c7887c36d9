package generic_test

import (
	"testing"

	"trimline/instruments"
	"trimline/instruments/conformance"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
)

// TestConformance runs the conformance suite on the generic drivers against the
// served simulator, over loopback TCP and over pseudo-terminal serial ports. Every
// subtest gets a bench of its own; Silence makes that bench's endpoint mute.
func TestConformance(t *testing.T) {
	for _, tr := range []string{"tcp", "serial"} {
		t.Run(tr, func(t *testing.T) {
			var last *serve.Server
			silence := func(role string) func(t *testing.T) {
				return func(t *testing.T) {
					if err := last.SetFault(role, serve.Fault{NoReply: true}); err != nil {
						t.Fatal(err)
					}
				}
			}
			hooks := func(role string) conformance.Hooks {
				return conformance.Hooks{Silence: silence(role), Timeout: testTimeout, Retries: 1, ErrorQueue: true,
					OutOfRange: 1, BadRange: 5000}
			}
			t.Run("source", func(t *testing.T) {
				conformance.Source(t, func(t *testing.T) instruments.Source {
					last = start(t, tr, serve.Options{})
					return open(t, last, "source", nil, nil).(instruments.Source)
				}, hooks("source"))
			})
			t.Run("current source", func(t *testing.T) {
				conformance.CurrentSource(t, func(t *testing.T) instruments.Source {
					last = start(t, tr, serve.Options{})
					return openKind(t, last, "source", instruments.KindCurrentSource).(instruments.Source)
				}, hooks("source"))
			})
			t.Run("meter", func(t *testing.T) {
				conformance.Meter(t, func(t *testing.T) instruments.Meter {
					last = start(t, tr, serve.Options{})
					return open(t, last, "meter", nil, nil).(instruments.Meter)
				}, hooks("meter"))
			})
			t.Run("dut", func(t *testing.T) {
				conformance.TrimPort(t, func(t *testing.T) instruments.TrimPort {
					last = start(t, tr, serve.Options{})
					return open(t, last, "dut", nil, nil).(instruments.TrimPort)
				}, hooks("dut"))
			})
			t.Run("switch", func(t *testing.T) {
				conformance.Switch(t, func(t *testing.T) instruments.Switch {
					last = simtest.ServeSpecs(t, append(simtest.QuietSpecs(), simtest.SwitchSpec()), serve.Options{Transport: tr})
					return open(t, last, "mux", nil, nil).(instruments.Switch)
				}, hooks("mux"))
			})
			t.Run("chamber", func(t *testing.T) {
				h := hooks("chamber")
				h.BadSetPoint = 200 // above the chamber's 150 °C
				conformance.Thermal(t, func(t *testing.T) instruments.Thermal {
					last = simtest.ServeSpecs(t, append(simtest.QuietSpecs(), simtest.ChamberSpec()), serve.Options{Transport: tr})
					return openSpec(t, last, "chamber", instruments.KindThermal, nil,
						map[string]string{"stable": "TEMP:STAB?"}).(instruments.Thermal)
				}, h)
			})
		})
	}
}
