// Package sim is a simulated bench that behaves like hardware: a DC voltage (or
// current) source,
// a 6½-digit multimeter (DC voltage and current), a fixture holding an amplifier
// card with trim DACs, and a relay multiplexer. The card is configurable (gain,
// output at zero, rails, a voltage, 4–20 mA current or digitised output, one to 16
// channels, which trim DACs it has, their widths and codings, firmware correction
// coefficients, how the port writes codes, the port's commands and lock);
// every setting defaults to the demo product, the BRX-200 bridge (load-cell)
// amplifier card. It registers the address scheme "sim".
//
// All names here (the maker "Trimline Sim", the VS-100M source, the DV-65 meter, the
// RM-16 multiplexer, the BRX-200 card) are invented; no value is taken from a real
// datasheet. The maker is instruments.SimulatedMaker: every simulated
// instrument's *IDN? reply starts with it, served or not, which is how a record
// tells the simulator reached over a real transport from a real instrument
// (instruments.Simulated) and never claims traceability through it.
//
// Package sim/serve puts a bench on a real wire (loopback TCP, pseudo-terminals) for
// the serial, tcp and usbtmc drivers.
//
// # Addresses and wiring
//
// sim://source, sim://meter, sim://dut, sim://switch and sim://chamber name the five
// models (the chamber is described under Temperature). Opened
// together (instruments.OpenAll, Driver.OpenGroup or NewBench) they form one Bench:
// the source drives the DUT input and the meter reads the DUT output. Opened alone
// with Driver.Open an instrument is unwired: the meter reads 0 (plus its own errors
// and noise) and the DUT input is 0 V. A bench holds at most one source, one DUT and
// one switch but any number of meters (each spec with a role of its own), all on the
// same wiring: one may read the output and another, with probe: supply, the unit's
// supply current. The first meter draws its errors as a lone meter does; meter n
// draws its own from a stream of its own.
//
// A card has channels: N (1 by default) channels, each its own analog chain. On a
// bench without a switch the source and meter are wired to channel 1 (the others'
// inputs are shorted to 0 V). With sim://switch on the bench (a relay multiplexer,
// instruments.Switch) Route("k") connects the source to channel k's input and
// channel k's output to the meter and shorts every other input to 0 V; Release
// opens every path: every input is shorted and the meter reads ≈ 0 (its own offset
// and noise). The switch powers up released. Channels are named "1".."N"; another
// name is an error (1..16 without a DUT on the bench). A routing change is a step
// of the inputs it moves, which the channels settle after as after a source step.
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
// set them. The wiring to the DUT adds its thermal EMF e in series while the
// output is on: the DUT input is level·(1 + g) + o + e, e drawn once per bench
// inside ±60 % of 500 nV unless thermal_emf sets it (what a zero check measures as
// o + e). Each meter reading adds white noise (noise, V rms) to the DUT input. Off,
// the fixture relay shorts the DUT input to a true 0 V (no o, no e). A change of the DUT input (level
// change while on, switching on or off) is a step the DUT settles after.
//
// The source has an output watchdog (Source.ArmWatchdog): once armed with a time, it
// must be armed again within that time on the bench clock, or the source switches
// its output off and programs 0 V by itself, at the instant the time ran out (the
// DUT input steps then). Like the DUT's settling it is worked out on the bench
// clock whenever the bench is next read or driven, so it behaves the same on
// simulated and on real time. Reset disarms it.
//
// Current mode (instruments.CurrentSource): SetCurrent(amps) puts the source in
// current mode (|amps| ≤ current_range, 25 mA) and SetVoltageLimit(volts) sets
// its compliance voltage (0 < volts ≤ 30 V; 10 V after reset); SetLevel returns it
// to voltage mode, as Reset does (0 V, 0 A). When on in current mode it drives
// i = amps·(1 + g) + o_i, g the same gain error as in voltage mode and o_i drawn
// with the same draw as o, inside ±60 % of spec_ppm_range of current_range
// (current_offset sets it), plus white noise current_noise (A rms) per reading.
// Into a current-input card (input: current, below) the DUT amplifier's input is
// i·input_resistance held within ±the compliance voltage; into a voltage-input
// card (high impedance) it runs to the compliance voltage, of i's sign. A voltage
// source into a current-input card is held to compliance·input_resistance. The
// watchdog, when it runs out, programs 0 A as well as 0 V.
//
// # Meter
//
// The meter measures DC voltage (FuncVoltage, the power-on function) or DC current
// (FuncCurrent, readings in A; instruments.FunctionSetter). A reading samples its
// input at the instant the reading starts (its Time), then the clock advances by the
// aperture. reading = y·(1 + g) + o + n, quantised to the resolution. In FuncVoltage
// the resolution is range·1e-7 by default (1 µV on the 10 V range), g and o (o in ppm
// of the present range) are drawn like the source's, n is white noise of rms
// noise/√NPLC, and the ranges are 0.1, 1, 10, 100 and 1000 V; 0 = auto = 10 V. In
// FuncCurrent the current_* settings play those parts: resolution 10 nA on the
// 100 mA range (scaling with range), spec 200 ppm of reading + 20 ppm of range,
// noise 5 nA rms at 1 PLC, ranges 1 mA, 10 mA, 100 mA and 1 A; 0 = auto = 100 mA.
// The current errors are drawn after the voltage ones, which stay as they were. Each
// function keeps its own range; Configure sets the present function's. Reset
// returns to FuncVoltage and the power-on ranges. |reading| > 1.2·range gives
// FlagOverload with ±9.9e37; force_flag flags every reading.
//
// What y is depends on the probe setting. With probe: output (the default) y is the
// output of the wired channel when the card's output is of the function's kind: a
// voltage card's output in FuncVoltage, a current card's loop current in
// FuncCurrent; otherwise (a voltage card in FuncCurrent, a current card in
// FuncVoltage, a reported card in either) y = 0, so the meter reads ≈ 0 plus its own
// offset and noise. With probe: supply the meter sits in the unit's supply line: y is
// the unit's supply current in FuncCurrent and 0 V in FuncVoltage (the voltage input
// is not connected). With the fixture empty y = 0.
//
// # DUT analog model
//
// The DUT settings describe the card; every default is the demo card, the BRX-200
// (gain 200, 2.5 V at zero input, rails 0..5 V, two 12-bit binary-offset trim DACs,
// one channel, a voltage output, no coefficients, the protocol below). Another card is the same topology with other settings (see
// Settings: dut, card and dut, port): an inverting or other gain, other rails, an
// offset or a gain DAC alone, wider or narrower DACs, two's-complement coding, hex
// codes, other commands, a locked port; the sequence file's dacs: section tells the
// engine that card's codes.
// For DUT input x (V), with Gnom = gain, Vz = output_at_zero, Vp = gain_pivot:
//
//	core(x) = G·(x + vin_os + step(x))        G = ±ClosedLoopGain(A, 1/|Gnom|)·(1 + ge)
//	step(x) = s if x > crossover_at, else 0   (input-pair hand-over, s = ±crossover_step)
//	y0 = Vz + core(x) + vout_os               Vz = 2.5 V
//	y1 = Vp + (1 + gtrim)·(y0 − Vp)           gtrim = Cg(cg)·gain_lsb, Vp = Vz
//	y2 = y1 + Co(co)·offset_lsb               (offset_trim: after, the default)
//	y  = rail(y2 + noise)                     the meter sees y, ≈ noise alone if open
//
// With offset_trim: before, the offset DAC adds Co(co)·offset_lsb to the input of the
// gain stage instead (inside core, next to vin_os), so one code moves the output by
// offset_lsb·G·(1 + gtrim); offset_lsb is then input-referred and defaults to
// 12.2 µV/|Gnom| (61 nV on the demo card), the same nominal output step. A card with
// trim: offset has no y1 step (y1 = y0); one with trim: gain has no y2 step.
//
// A is the amplifier's open-loop gain (1e7 = 140 dB): |G| = A/(1 + A·β), β = 1/|Gnom|,
// so the gain error due to A is ≈ −|Gnom|/A (−20 ppm at Gnom = 200), for an inverting
// card (negative gain) too. ge (σ 0.4 %) is the per-unit gain error. The total
// output-referred offset |Gnom|·vin_os + vout_os has σ 3 mV, 30 % of its variance
// input-referred and 70 % output-referred.
//
// With budget: FILE (an error budget file, see package budget; a relative path is
// resolved against the station file's folder) the units' spread is the budget's
// instead: ge, vin_os, vout_os and s are a budget.Unit drawn from the unit's own
// random stream after every other draw (so the DACs, defects, supply and drift are
// those of the same unit without the budget), A is ideal (the budget's open-loop
// gain is in its ge) and crossover_at is the budget's crossover level. The budget
// must describe the card: its gain, output at zero input and output unit are the
// card's, its input-referred values in V; it may have one crossover level and no
// rail compression source (the rails are the card's), and offset_sigma,
// gain_sigma, open_loop_gain and crossover_* may not be given beside it.
//
// D(c) is the analog value in LSB of an n-bit R-2R trim DAC (offset_bits, gain_bits;
// 12) for the code c at its input: Σ bit_i·(2^i + e_i) with e_i ~ N(0, dnl) per unit
// (dnl = 0.05 LSB). C(r) = D(c) − 2^(n−1) is the correction for register r: with
// binary_offset coding (the default) c = r, registers 0..2^n−1 and mid-scale
// 2^(n−1) (2048) is no correction; with twos_complement coding the register holds the
// n-bit pattern of a signed value −2^(n−1)..2^(n−1)−1, the card inverts its top bit
// (c = r XOR 2^(n−1)) and 0 is no correction. A stuck bit is forced in the analog
// path only; the register reads back what was written. Nominal LSBs: 12.2 µV at the
// output per offset code, 10 ppm per gain code.
//
// rail() is the identity inside rail_low + rail_knee .. rail_high − rail_knee and a
// tanh knee of width rail_knee beyond, so the output never leaves rail_low..rail_high
// (0.2..4.8 V and 0..5 V on the demo card; inside 0.5..4.5 V the compression is
// exactly 0).
//
// Settling: after each step of the DUT input at time t0 the linear output (before
// rail) approaches its new value as exp(−(t − t0)/τ) on the bench clock. Trim and
// coefficient writes take effect at once. Noise is white, noise V (A on a current
// card) rms per reading, meter or cmd_read (not reduced by NPLC).
//
// Units are derived by Params(serial, seed, settings): FNV-1a 64 of the serial and
// the seed key a math/rand/v2 PCG, so the same serial and seed give the same unit.
// The draws come in a fixed order whatever the settings; the bit errors of DAC bits
// beyond the twelfth are drawn after all others, so a wider DAC leaves the rest of a
// unit as the 12-bit card has it, and the supply current (supply_current, 1.2 mA,
// times 1 + supply_current_sigma·z, σ 3 %) is drawn after those, so it changes no
// older draw. About defect_rate (2 %) of the units carry one
// defect: a stuck high trim-DAC bit (one of the top four bits, 8..11 of a 12-bit DAC,
// of the offset or gain DAC the card has, stuck at 0 or 1), excess noise (×40) or an
// open output (the meter sees ≈ 0 V + noise whatever the input).
//
// # Output kinds
//
// output: voltage (the default) is the model above. output: current is the same
// chain with a loop current for y (a 4–20 mA transmitter): gain is in A/V,
// output_at_zero, gain_pivot, the rails, rail_knee, offset, offset_sigma, noise and
// offset_lsb (after) are currents, and their defaults are gain 0.8 A/V, 4 mA at zero
// input, rails 3.8..21 mA with a 0.1 mA knee, offset_sigma 12 µA, noise 80 nA and
// offset_lsb 48.8 nA (the voltage card's values scaled by 4 mA/V); input-referred
// settings (crossover_*, offset_lsb before, default 48.8 nA/|gain|) stay in V. The
// meter reads it in FuncCurrent.
//
// output: reported is a voltage card whose output the card digitises and answers on
// its port: cmd_read (MEAS?) answers the count
//
//	count = clamp(round(y'/adc_lsb), −2^(adc_bits−1), 2^(adc_bits−1) − 1)
//
// as a decimal integer, where y' is y (sampled with its noise when the command
// arrives) after the firmware correction below; adc_lsb is V per count at the
// converter (312.5 µV) and adc_bits its signed width (16). Example: y = 2.5031 V is
// round(8009.92) = 8010 counts. The meter reads ≈ 0 on a reported card's output.
//
// # Input kinds
//
// input: voltage (the default) is a high-impedance input: the amplifier's input x
// is the source's voltage. input: current is a current-loop receiver: the loop
// current flows through a shunt of input_resistance (250 Ω) and x = I·R, the
// rest of the card as above (gain per volt of x, input-referred settings in V of
// x). Example: a 4–20 mA receiver reporting 1–5 V is input: current, gain: 1,
// output_at_zero: 0 V; its ideal transfer is 250 V/A. With output: reported and
// adc_lsb: 156.25 µV it reports 1600 count/mA.
//
// # Channels
//
// Channel 1 of any card is exactly the one-channel unit: its parameters are
// Params(serial, seed, settings), so every population and golden result stays as it
// was. Channel k > 1 is Params(serial+"/"+k, seed, settings) (ChannelParams), an
// independent chain with its own offset, gain error, DAC errors and defect draw. Each
// channel has its own trim registers and coefficient registers; the supply current
// belongs to the unit (channel 1's draw). NV STORE stores every channel's registers
// and coefficients.
//
// # Firmware coefficients
//
// With coef: gain, offset or both (none by default) the card's firmware corrects
// each channel's output: y' = gain·raw + offset, where raw is the output the chain
// above produces. For voltage and current outputs the correction acts before the
// rails (y = rail(gain·(linear + settling) + offset + noise)), for a reported card
// before digitisation (count = round((gain·y + offset)/adc_lsb)). The registers of a
// fresh unit hold gain 1 and offset 0 (no correction); a card without the gain
// (offset) coefficient has gain 1 (offset 0).
//
// The gain is a plain factor in coef_gain_format (Q2.14 by default; float32,
// Q<m>.<n> with m integer bits including the sign, or int<bits>, a signed integer
// times coef_gain_scale, 1e-4 by default), which must hold 1. The offset is a number
// in coef_offset_unit (the output's SI unit by default: V, A, or count for a
// reported card; e.g. mV, uA, count) in coef_offset_format (float32 by default);
// for int<bits> one count is coef_offset_scale, a plain number in the offset unit or
// a voltage or current ("0.1 uA"). coef_text (decimal|hex) spells both as package
// numfmt does: decimal — the float32's shortest text or the integer word; hex — the
// word's bit pattern, upper case, ceil(bits/4) digits, written with or without 0x.
// So on Q2.14 hex "4000" is 1.0 and "4800" is 1.125. A write that is malformed or
// outside the format answers "ERR value out of range" and leaves the register;
// reads answer the register in the same format and text.
//
// # Temperature
//
// sim://chamber (model TC-150) is an instruments.Thermal and StableReporter that
// holds the fixture. It powers up resting at ambient (25 °C) with that set point.
// After SetTemperature its temperature follows a damped second-order response on the
// bench clock (a one-hour soak takes no wall time on simulated time): with the
// deviation e = T − set point,
//
//	e'' + 2ζωn·e' + ωn²·e = 0    ζ = −ln mp/√(π² + ln² mp), ζ·ωn = 1/tau
//
// mp the overshoot setting (0.08: a 60 °C step peaks 4.8 °C beyond the set point)
// and tau (90 s) the time constant of the decaying envelope, so a 60 °C step is
// within 0.5 °C after 6·tau. A new set point takes over from the temperature and
// rate the chamber has at that instant. Temperature reads it with white noise
// (noise, 0.05 °C rms per read); Stable answers true once the envelope of the
// remaining response, |e| ≤ e^{−t/tau}·|A|, is inside band (0.3 °C): it will not
// leave the band again. A set point outside min..max (−40 °C … 150 °C) is refused
// and the set point stays. SetTemperature works after Close, so the engine can
// always return the chamber to a safe temperature.
//
// The unit in the fixture has a temperature of its own, which follows the chamber's
// through a first-order lag (the DUT's dut_tau, 60 s): T' = (T_chamber − T)/dut_tau,
// worked out in closed form. On a bench without a chamber it sits at the DUT's
// ambient setting (25 °C).
//
// The unit drifts with its temperature T: with ΔT = T − 25 °C (TCRef) the analog
// model's core becomes
//
//	core(x) = G·(1 + tcg·ΔT)·(x + vin_os + tco·ΔT + step(x))
//
// tco (V/°C, input-referred, σ tc_offset_sigma 2 µV/°C) and tcg (per °C, σ
// tc_gain_sigma 25 ppm/°C) drawn per channel; tc_offset and tc_gain set them. At
// 25 °C the model is exactly the one above. The unit's own temperature sensor
// answers cmd_temp (TEMP?) with T plus a sensor offset (σ temp_sensor_sigma 0.3 °C,
// temp_sensor_offset sets it; the unit's, channel 1's draw) to 0.01 °C, e.g. "85.12".
// The three are drawn after the supply current, so no older draw changes.
//
// # Firmware temperature coefficients
//
// With coef_tc: offset, gain or both (none by default) the firmware also corrects
// each channel for temperature with T, its own sensor's reading (as TEMP? answers
// it), and the reference coef_tc_ref (25 °C):
//
//	y' = Vz + (y_corr − Vz − tco·(T − Tref))/(1 + tcg·(T − Tref))    Vz = output_at_zero
//
// y_corr the output after the gain and offset coefficients (the output itself on a
// card without them), before the rails or the converter as those are. tco is in
// coef_tc_offset_unit per °C (the output's SI unit by default; e.g. uV, or count on
// a reported card) in coef_tc_offset_format (float32); tcg is in coef_tc_gain_unit
// per °C (ppm by default; % or 1) in coef_tc_gain_format (float32). Both start at 0,
// are written and read like the coefficients (CAL TCO {value}, CAL TCO?, CAL TCG
// {value}, CAL TCG?; {channel} allowed) and NV STORE stores them. It is the
// inverse of the drift model: with a = the gain the trims and coefficients apply
// after the core (1 + gtrim, times the gain coefficient) and A = a·G the unit's
// slope at Tref, the output is y = K + (1 + tcg·ΔT)·(y_Tref − K + A·tco_in·ΔT),
// K the output at x = −vin_os. For a trimmed unit (K = Vz − A·vin_os) and
// tco = the offset drift at x = 0 per °C, A·((1 + tcg·ΔT)·tco_in + tcg·vin_os),
// and tcg = the relative change of the unit's own slope, the correction gives
// back y_Tref exactly at the temperature tco was measured at; elsewhere the
// remainder is A·tcg·tco_in·ΔT·(ΔT_meas − ΔT)/(1 + tcg·ΔT), of the second order.
// An untrimmed unit keeps −tcg·ΔT·(K − Vz)/(1 + tcg·ΔT), its output offset's drift.
// A gain trim after the drift was measured scales A, so tco must be referred to
// the trimmed slope (tempco does: drift·G/slope_ref).
//
// # Trim port protocol
//
// One line per command, terminated by "\n" (a trailing "\r\n" and surrounding spaces
// are ignored; tokens are separated by spaces, runs of spaces count as one, and are
// case-sensitive). Every command gets one reply line. The commands are templates
// from the settings (cmd_*); the demo card's are:
//
//	SN?              → the unit's serial number                      (cmd_serial)
//	FW?              → the firmware id, "BRX200-FW 2.3.1"            (cmd_firmware, firmware)
//	TRIM OFS <code>  → OK; "ERR code out of range" if the code is     (cmd_offset_write)
//	                   malformed or outside the register
//	TRIM GAIN <code> → OK; likewise                                  (cmd_gain_write)
//	TRIM OFS?        → the offset register                           (cmd_offset_read)
//	TRIM GAIN?       → the gain register                             (cmd_gain_read)
//	NV STORE         → OK; stores both registers (and the           (cmd_store)
//	                   coefficients) of every channel in the unit's
//	                   non-volatile memory
//	MEAS?            → a reported card's output in counts            (cmd_read)
//	CAL GAIN <value> → OK; "ERR value out of range" if malformed     (cmd_coef_gain_write)
//	                   or outside the format
//	CAL GAIN?        → the gain coefficient                          (cmd_coef_gain_read)
//	CAL OFS <value>  → OK; likewise                                  (cmd_coef_offset_write)
//	CAL OFS?         → the offset coefficient                        (cmd_coef_offset_read)
//	TEMP?            → the unit's own temperature sensor in °C,       (cmd_temp)
//	                   0.01 °C resolution
//	CAL TCO <value>  → OK; the offset temperature coefficient         (cmd_tc_offset_write)
//	CAL TCO?         → it                                             (cmd_tc_offset_read)
//	CAL TCG <value>  → OK; the gain temperature coefficient           (cmd_tc_gain_write)
//	CAL TCG?         → it                                             (cmd_tc_gain_read)
//	LID?             → CLOSED or OPEN: the fixture's lid (interlock) input
//	anything else    → ERR unknown command "<line>"
//
// A write template holds the placeholder {code} once, anywhere ("CAL:OFFS={code}"
// works); it matches one token. Codes are decimal with code_format: decimal (the
// default): 0..2^n−1 for binary_offset, the signed value −2^(n−1)..2^(n−1)−1 for
// twos_complement. With code_format: hex the port writes the register pattern in
// hex with or without 0x ("TRIM OFS 0x7FF" or "TRIM OFS 7ff") and answers in upper
// case without 0x, padded to ceil(n/4) digits ("7FF"; "0000" for 0 on a 16-bit DAC).
// The commands of a DAC the card does not have (trim: offset or gain), of a
// coefficient it does not have and MEAS? on a card that reports nothing answer ERR
// unknown command. Coefficient write templates hold {value} once, like {code}.
//
// The per-channel commands (trim and coefficient writes and reads, cmd_read) may
// hold {channel} once ("TRIM OFS {channel} {code}", "CAL:GAIN {channel},{value}",
// "MEAS? {channel}"); it matches a decimal channel number, and a channel the card
// does not have answers "ERR channel out of range". A per-channel command without
// {channel} acts on the channel the switch routes (channel 1 when none is, or without
// a switch).
//
// With cmd_unlock set (say "UNLOCK 5A17"; empty by default: no lock) the card is
// locked whenever a unit is loaded: trim writes and the store command answer
// "ERR locked" until the unlock command (answered OK) has been received; reads work
// locked.
//
// LID? belongs to the fixture, so it answers with or without a unit, whatever the
// templates; the lid starts as the lid setting says (closed by default) and
// DUT.SetLid moves it. With no unit in the fixture every other command answers
// "ERR no unit in fixture". LoadUnit(serial) places a unit; its registers start from
// the codes and coefficients it last stored on this bench (the bench remembers them
// per serial for its lifetime), the no-correction codes (2048 on the demo card),
// gain 1 and offset 0 for a fresh unit.
// DUT.Command returns nil on OK and a *ReplyError on ERR; DUT.Query returns the
// reply, or a *ReplyError on ERR. DUT.Identify asks the serial and firmware
// commands.
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
//	             noise (50 nV rms), gain_error (drawn), offset (drawn),
//	             thermal_emf (drawn, wiring to the DUT input),
//	             current_range (25 mA), current_noise (2 nA rms),
//	             current_offset (drawn)
//	meter        spec_ppm_reading (30), spec_ppm_range (4), range (power-on range, 0 = auto = 10 V),
//	             nplc (power-on, 1), line_frequency (50 Hz),
//	             resolution (on the 10 V range, scales with range; 1 µV; 0 = none),
//	             noise (at 1 PLC, 1.5 µV rms), gain_error (drawn), offset (drawn),
//	             force_flag (none|overload|nan, none), probe (output|supply, output),
//	             current_spec_ppm_reading (200), current_spec_ppm_range (20),
//	             current_range (power-on, 0 = auto = 100 mA), current_resolution
//	             (on the 100 mA range, scales with range; 10 nA), current_noise (at
//	             1 PLC, 5 nA rms), current_gain_error (drawn), current_offset (drawn)
//	switch       none of its own
//	chamber      ambient (°C at power-on; 25 °C), tau (envelope time constant; 90 s),
//	             overshoot (peak overshoot of a step, a fraction 0 < mp < 1 or with %;
//	             0.08), noise (0.05 °C rms per read), min (−40 °C), max (150 °C),
//	             band (what Stable judges; 0.3 °C)
//	dut          offset (drawn; total output-referred offset at zero input, all of it
//	             output-referred; dnl's mid-scale DAC error comes on top),
//	             gain_error (drawn), offset_sigma (3 mV),
//	             gain_sigma (0.4 %), noise (20 µV rms), tau (1 ms),
//	             crossover_step (1.5 µV; 0 V disables), crossover_at (3 mV),
//	             dnl (0.05 LSB; 0 disables), open_loop_gain (1e7; 0 = ideal),
//	             budget (none; a budget file the spread is drawn from instead),
//	             offset_lsb (12.2 µV; 61 nV with offset_trim: before),
//	             gain_lsb (10 ppm), offset_trim (after|before, after),
//	             defect (none|stuck_bit|noisy|open, drawn), defect_rate (2 %),
//	             lid (closed|open: the fixture lid at open, closed),
//	             supply_current (1.2 mA), supply_current_sigma (3 %),
//	             ambient (the unit's temperature without a chamber; 25 °C),
//	             dut_tau (the unit's lag behind the chamber; 60 s),
//	             tc_offset_sigma (input-referred, per °C; 2 µV), tc_gain_sigma (per °C;
//	             25 ppm), temp_sensor_sigma (0.3 °C), tc_offset, tc_gain,
//	             temp_sensor_offset (drawn)
//	dut, card    gain (nominal closed-loop gain in V/V, finite and non-zero,
//	             negative for an inverting card; 200),
//	             output_at_zero (output at zero input with no correction; 2.5 V),
//	             gain_pivot (output the gain trim scales about; output_at_zero),
//	             rail_low (0 V), rail_high (5 V): the output stays inside them,
//	             rail_knee (width of the soft compression at each rail; 0.2 V;
//	             rail_high − rail_low must exceed two knees),
//	             trim (both|offset|gain: the trim DACs the card has, both),
//	             offset_bits, gain_bits (width of each DAC, 1..24 bits; 12),
//	             offset_coding, gain_coding (binary_offset|twos_complement,
//	             binary_offset), code_format (decimal|hex, decimal),
//	             output (voltage|current|reported, voltage; current makes the
//	             output-referred settings currents, see Output kinds),
//	             input (voltage|current, voltage; see Input kinds),
//	             input_resistance (the shunt of a current input; 250 Ω),
//	             adc_lsb (312.5 µV), adc_bits (2..32; 16), channels (1..16; 1),
//	             coef (none|gain|offset|both, none), coef_gain_format (Q2.14),
//	             coef_gain_scale (int<bits>: 1e-4), coef_offset_format (float32),
//	             coef_offset_scale (int<bits>: 1), coef_offset_unit (the output's SI
//	             unit), coef_text (decimal|hex, decimal), coef_tc
//	             (none|offset|gain|both, none), coef_tc_offset_format (float32),
//	             coef_tc_offset_unit (the output's SI unit), coef_tc_gain_format
//	             (float32), coef_tc_gain_unit (ppm|%|1, ppm), coef_tc_ref (25 °C)
//	dut, port    cmd_serial (SN?), cmd_firmware (FW?), cmd_offset_write
//	             (TRIM OFS {code}), cmd_offset_read (TRIM OFS?), cmd_gain_write
//	             (TRIM GAIN {code}), cmd_gain_read (TRIM GAIN?), cmd_store (NV STORE),
//	             cmd_unlock (empty: no lock), firmware (the firmware reply;
//	             BRX200-FW 2.3.1), cmd_read (MEAS?), cmd_coef_gain_write
//	             (CAL GAIN {value}), cmd_coef_gain_read (CAL GAIN?),
//	             cmd_coef_offset_write (CAL OFS {value}), cmd_coef_offset_read
//	             (CAL OFS?), cmd_temp (TEMP?), cmd_tc_offset_write (CAL TCO
//	             {value}), cmd_tc_offset_read (CAL TCO?), cmd_tc_gain_write (CAL TCG
//	             {value}), cmd_tc_gain_read (CAL TCG?). Trim write templates need {code} once, coefficient
//	             writes {value} once; per-channel commands may hold {channel}; no
//	             two commands of the card may be the same, nor LID?
//
// # Concurrency
//
// A bench and its instruments may be used from one goroutine at a time. Every call
// holds the bench mutex, so concurrent calls are safe but serialised; with time: real
// a meter read holds it for the whole aperture.
package sim
