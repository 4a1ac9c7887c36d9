// Package sim is a simulated bench that behaves like hardware: a DC voltage source,
// a 6½-digit voltmeter and a fixture holding the demo product, the BRX-200 bridge
// (load-cell) amplifier card. It registers the address scheme "sim".
//
// All names here (the maker "Trimline Sim", the VS-100M source, the DV-65 meter, the
// BRX-200 card) are invented; no value is taken from a real datasheet.
//
// Package sim/serve puts a bench on a real wire (loopback TCP, pseudo-terminals) for
// the serial, tcp and usbtmc drivers.
//
// # Addresses and wiring
//
// sim://source, sim://meter and sim://dut name the three models. Opened together
// (instruments.OpenAll, Driver.OpenGroup or NewBench) they form one Bench: the source
// drives the DUT input and the meter reads the DUT output. Opened alone with
// Driver.Open an instrument is unwired: the meter reads 0 V (plus its own errors and
// noise) and the DUT input is 0 V.
//
// # Time
//
// A bench runs on simulated time by default: Bench.Clock (also returned by every
// instrument's Clock method) starts at the start setting, or at time.Now() truncated
// to the millisecond, and Sleep advances it at once. Each meter reading advances it by
// the aperture, NPLC / line frequency (1 PLC = 20 ms at 50 Hz), and every command
// advances it by the instrument's latency setting (default 0) before it acts. With
// time: real the clock is instruments.RealClock and those advances really wait.
//
// # Source
//
// When on, the source's actual output is level·(1 + g) + o. g and o are drawn once
// per bench from the seed, uniformly inside ±60 % of the stated spec
// (spec_ppm_reading of reading, spec_ppm_range of range) unless gain_error / offset
// set them. Each meter reading adds white noise (noise, V rms) to the DUT input. Off,
// the fixture relay shorts the DUT input to 0 V. A change of the DUT input (level
// change while on, switching on or off) is a step the DUT settles after.
//
// The source has an output watchdog (Source.ArmWatchdog): once armed with a time, it
// must be armed again within that time on the bench clock, or the source switches
// its output off and programs 0 V by itself, at the instant the time ran out (the
// DUT input steps then). Like the DUT's settling it is worked out on the bench
// clock whenever the bench is next read or driven, so it behaves the same on
// simulated and on real time. Reset disarms it.
//
// # Meter
//
// A reading samples the DUT output at the instant the reading starts (its Time), then
// the clock advances by the aperture. reading = y·(1 + g) + o + n, quantised to the
// resolution (range·1e-7 by default: 1 µV on the 10 V range). g and o (o in ppm of the
// present range) are drawn like the source's; n is white noise of rms noise/√NPLC.
// |reading| > 1.2·range gives FlagOverload with ±9.9e37; force_flag flags every
// reading. Ranges are 0.1, 1, 10, 100 and 1000 V; 0 = auto = 10 V.
//
// # DUT analog model
//
// The engine's trim arithmetic assumes exactly this topology. For DUT input x (V):
//
//	core(x) = G·(x + vin_os + step(x))        G = ClosedLoopGain(A, 1/200)·(1 + ge)
//	step(x) = s if x > crossover_at, else 0   (input-pair hand-over, s = ±crossover_step)
//	y0 = Vmid + core(x) + vout_os             Vmid = 2.5 V
//	y1 = Vmid + (1 + gtrim)·(y0 − Vmid)       gtrim = (Dg(cg) − 2048)·gain_lsb
//	y2 = y1 + (Do(co) − 2048)·offset_lsb      (offset_trim: after, the default)
//	y  = rail(y2 + noise)                     the meter sees y, ≈ noise alone if open
//
// With offset_trim: before, the offset DAC adds (Do(co) − 2048)·offset_lsb to the
// input of the gain stage instead (inside core, next to vin_os), so one code moves the
// output by offset_lsb·G·(1 + gtrim); offset_lsb is then input-referred and defaults
// to 12.2 µV/200 = 61 nV, the same nominal output step.
//
// A is the amplifier's open-loop gain (1e7 = 140 dB): G = A/(1 + A·β), β = 1/Gnom, so
// the gain error due to A is ≈ −Gnom/A (−20 ppm at Gnom = 200). ge (σ 0.4 %) is the
// per-unit gain error. The total output-referred offset Gnom·vin_os + vout_os has
// σ 3 mV, 30 % of its variance input-referred and 70 % output-referred.
//
// D(c) is the analog value in LSB of a 12-bit R-2R trim DAC for register code c:
// Σ bit_i·(2^i + e_i) with e_i ~ N(0, dnl) per unit (dnl = 0.05 LSB); mid-scale 2048
// is no correction. A stuck bit is forced in the analog path only; the register reads
// back what was written. Nominal LSBs: 12.2 µV at the output per offset code, 10 ppm
// per gain code.
//
// rail() is the identity inside 0.2..4.8 V and a tanh knee of width 0.2 V beyond, so
// the output never leaves 0..5 V and inside 0.5..4.5 V the compression is exactly 0.
//
// Settling: after each step of the DUT input at time t0 the linear output (before
// rail) approaches its new value as exp(−(t − t0)/τ) on the bench clock. Trim writes
// take effect at once. Noise is white, noise V rms per meter reading (not reduced by
// NPLC).
//
// Units are derived by Params(serial, seed, settings): FNV-1a 64 of the serial and
// the seed key a math/rand/v2 PCG, so the same serial and seed give the same unit.
// About defect_rate (2 %) of the units carry one defect: a stuck high trim-DAC bit
// (bit 8..11 of the offset or gain DAC, stuck at 0 or 1), excess noise (×40) or an
// open output (the meter sees ≈ 0 V + noise whatever the input).
//
// # Trim port protocol
//
// One line per command, terminated by "\n" (a trailing "\r\n" and surrounding spaces
// are ignored; tokens are separated by spaces and are case-sensitive). Every command
// gets one reply line:
//
//	SN?              → the unit's serial number
//	FW?              → the firmware id, "BRX200-FW 2.3.1"
//	TRIM OFS <code>  → OK; code is decimal 0..4095, else "ERR code out of range"
//	TRIM GAIN <code> → OK; likewise
//	TRIM OFS?        → the offset register as decimal
//	TRIM GAIN?       → the gain register as decimal
//	NV STORE         → OK; stores both registers in the unit's non-volatile memory
//	LID?             → CLOSED or OPEN: the fixture's lid (interlock) input
//	anything else    → ERR unknown command "<line>"
//
// LID? belongs to the fixture, so it answers with or without a unit; the lid starts
// as the lid setting says (closed by default) and DUT.SetLid moves it. With no unit
// in the fixture every other command answers "ERR no unit in fixture".
// LoadUnit(serial) places a unit; its registers start from the codes it last stored
// on this bench (the bench remembers them per serial for its lifetime), mid-scale
// 2048 for a fresh unit. DUT.Command returns nil on OK and a *ReplyError on ERR;
// DUT.Query returns the reply, or a *ReplyError on ERR.
//
// # Settings
//
// Values are written with units where dimensional and parsed by units.ParseAs. A
// ratio may be written "20 ppm", "0.4 %" or as a plain fraction, except spec_ppm_*,
// where a plain number is in ppm. Bench-wide keys may appear in any spec of a group;
// different values are a *instruments.SettingError, as is an unknown key or bad
// value.
//
//	bench-wide   seed (unsigned integer, 1), time (simulated|real, simulated),
//	             start (RFC 3339, time.Now() at open)
//	every model  latency (time per command, at most 10 s; 0 s)
//	source       spec_ppm_reading (20), spec_ppm_range (5), range (100 mV),
//	             noise (50 nV rms), gain_error (drawn), offset (drawn)
//	meter        spec_ppm_reading (30), spec_ppm_range (4), range (power-on range, 0 = auto = 10 V),
//	             nplc (power-on, 1), line_frequency (50 Hz),
//	             resolution (on the 10 V range, scales with range; 1 µV; 0 = none),
//	             noise (at 1 PLC, 1.5 µV rms), gain_error (drawn), offset (drawn),
//	             force_flag (none|overload|nan, none)
//	dut          offset (drawn; total output-referred offset at zero input, all of it
//	             output-referred; dnl's mid-scale DAC error comes on top),
//	             gain_error (drawn), offset_sigma (3 mV),
//	             gain_sigma (0.4 %), noise (20 µV rms), tau (1 ms),
//	             crossover_step (1.5 µV; 0 V disables), crossover_at (3 mV),
//	             dnl (0.05 LSB; 0 disables), open_loop_gain (1e7; 0 = ideal),
//	             offset_lsb (12.2 µV; 61 nV with offset_trim: before),
//	             gain_lsb (10 ppm), offset_trim (after|before, after),
//	             defect (none|stuck_bit|noisy|open, drawn), defect_rate (2 %),
//	             lid (closed|open: the fixture lid at open, closed)
//
// # Concurrency
//
// A bench and its instruments may be used from one goroutine at a time. Every call
// holds the bench mutex, so concurrent calls are safe but serialised; with time: real
// a meter read holds it for the whole aperture.
package sim
