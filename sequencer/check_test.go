package sequencer_test

import (
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// wantErrorAt fails t unless err holds a problem at file:line of needle in text
// whose message contains msg.
func wantErrorAt(t *testing.T, err error, file, text, needle, msg string) {
	t.Helper()
	prefix := fmt.Sprintf("%s:%d:", file, lineOf(t, text, needle))
	for _, e := range files.Errs(err) {
		if strings.HasPrefix(e.Error(), prefix) && strings.Contains(e.Msg, msg) {
			return
		}
	}
	t.Fatalf("want an error at %s… containing %q, got:\n%v", prefix, msg, err)
}

// A station file given where a sequence file belongs (or the other way round) is
// named for what it is, in one error, instead of a list of unknown keys.
func TestSwappedFilesSayWhatTheyAre(t *testing.T) {
	station, sequence := demoFile(t, "brx200-station.yaml"), demoFile(t, "brx200-sequence.yaml")
	_, err := sequencer.ParseStation("brx200-sequence.yaml", []byte(sequence))
	if errs := files.Errs(err); len(errs) != 1 {
		t.Fatalf("want one error, got %v", err)
	}
	wantErrorAt(t, err, "brx200-sequence.yaml", sequence, "sequence:\n", "this is a sequence file (top-level key sequence:), but a station file")
	_, err = sequencer.ParseSequence("brx200-station.yaml", []byte(station), demoReader(t, nil))
	if errs := files.Errs(err); len(errs) != 1 {
		t.Fatalf("want one error, got %v", err)
	}
	wantErrorAt(t, err, "brx200-station.yaml", station, "station:\n", "this is a station file (top-level key station:), but a sequence file")
	lim := demoFile(t, "brx200-limits.yaml")
	_, err = sequencer.ParseStation("brx200-limits.yaml", []byte(lim))
	wantErrorAt(t, err, "brx200-limits.yaml", lim, "limit_set:\n", "this is a limit file")
}

// A sequence refuses a limit file written for another product.
func TestLimitFileForAnotherProduct(t *testing.T) {
	lim := strings.Replace(demoFile(t, "brx200-limits.yaml"), "product: BRX-200", "product: BRX-300", 1)
	seq := demoFile(t, "brx200-sequence.yaml")
	_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(seq), demoReader(t, map[string]string{"brx200-limits.yaml": lim}))
	wantErrorAt(t, err, "brx200-sequence.yaml", seq, "limits: brx200-limits.yaml", `is for product "BRX-300"`)
}

// Station ids and certificate prefixes stand in certificate numbers and file names:
// 1 to 16 characters of A–Z, 0–9 and '-', not first or last.
func TestStationIDsFitCertificateNumbers(t *testing.T) {
	station := demoFile(t, "brx200-station.yaml")
	for _, c := range []struct {
		from, to string
		ok       bool
	}{
		{"  id: TL1 ", "  id: TL 3 ", false}, {"  id: TL1 ", "  id: tl1 ", false}, {"  id: TL1 ", "  id: TL/1 ", false},
		{"  id: TL1 ", "  id: -TL1 ", false}, {"  id: TL1 ", "  id: TL.1 ", false}, {"  id: TL1 ", "  id: LINE7-STATION-0042 ", false},
		{"certificate_prefix: TL1", "certificate_prefix: TL1_A", false}, {"certificate_prefix: TL1", "certificate_prefix: \"TL 1\"", false},
		{"  id: TL1 ", "  id: L7-TRIM-3 ", true}, {"  id: TL1 ", "  id: \"0042\" ", true},
	} {
		mut := strings.Replace(station, c.from, c.to, 1)
		if mut == station {
			t.Fatalf("demo station lacks %q", c.from)
		}
		_, err := sequencer.ParseStation("s.yaml", []byte(mut))
		if c.ok {
			if err != nil {
				t.Errorf("%q refused: %v", c.to, err)
			}
			continue
		}
		wantErrorAt(t, err, "s.yaml", mut, strings.TrimSpace(c.to), "cannot stand in certificate numbers and file names")
	}
}

// A cap above the IEC 61010-1 §6.3.1 hazardous-live d.c. level (60 V, 2nd edition;
// the 3rd edition's 70 V is higher; from memory) needs a fixture interlock.
func TestHazardousCapNeedsAnInterlock(t *testing.T) {
	station := strings.NewReplacer("    voltage: 100 mV", "    voltage: 100 V", "max_source_voltage: 50 mV", "max_source_voltage: 60.001 V").
		Replace(demoFile(t, "brx200-station.yaml"))
	_, err := sequencer.ParseStation("s.yaml", []byte(station))
	wantErrorAt(t, err, "s.yaml", station, "max_source_voltage: 60.001 V", "hazardous-live level of 60 V d.c. (IEC 61010-1 §6.3.1")
	at60 := strings.Replace(station, "60.001 V", "60 V", 1)
	if _, err := sequencer.ParseStation("s.yaml", []byte(at60)); err != nil {
		t.Fatalf("a cap of 60 V is not above the level: %v", err)
	}
	locked := station + "interlock: {role: dut, query: \"LID?\", closed: \"CLOSED\"}\n"
	if _, err := sequencer.ParseStation("s.yaml", []byte(locked)); err != nil {
		t.Fatalf("with an interlock: %v", err)
	}
}

// A sweep outside the source's own rating is refused with the rating named, even
// when the cap would allow it (a station edited in memory; the loader keeps caps
// within the rating).
func TestSweepOutsideTheSourceRating(t *testing.T) {
	st, seq := demoFiles(t, nil)
	st.SourceRating.Volts = 5e-3
	err := sequencer.CheckCaps(st, seq)
	if !errors.Is(err, sequencer.ErrSafety) || !strings.Contains(err.Error(), "outside the source's own rating of ±5 mV") ||
		!strings.Contains(err.Error(), "brx200-sequence.yaml:") {
		t.Fatalf("want a refusal naming the rating and the sweep's file:line:col, got %v", err)
	}
}

// CheckCalibration: an error once cal_due has passed, a warning from 14 days
// before, nothing earlier; positioned at cal_due. The clock is fixed.
func TestCalibrationDueDates(t *testing.T) {
	station := demoFile(t, "brx200-station.yaml")
	st, err := sequencer.ParseStation("s.yaml", []byte(station))
	if err != nil {
		t.Fatal(err)
	}
	due := time.Date(2027, 12, 31, 0, 0, 0, 0, time.UTC) // the demo station's cal_due
	for _, c := range []struct {
		now     time.Time
		n       int
		warning bool
		msg     string
	}{
		{due.AddDate(0, 0, -15).Add(23 * time.Hour), 0, false, ""},
		{due.AddDate(0, 0, -14), 2, true, "runs out in 14 days"},
		{due.AddDate(0, 0, -1).Add(time.Hour), 2, true, "runs out tomorrow"},
		{due.Add(23*time.Hour + 59*time.Minute), 2, true, "runs out today"},
		{due.AddDate(0, 0, 1).Add(time.Second), 2, false, "ran out on 2027-12-31"},
	} {
		got := st.CheckCalibration(c.now)
		if len(got) != c.n {
			t.Errorf("at %s: %d findings, want %d: %v", c.now, len(got), c.n, got)
			continue
		}
		for _, e := range got {
			if e.Warning != c.warning || !strings.Contains(e.Msg, c.msg) || e.Line != lineOf(t, station, "cal_due: 2027-12-31") && e.Line != strings.Count(station[:strings.LastIndex(station, "cal_due: 2027-12-31")], "\n")+1 {
				t.Errorf("at %s: %v (warning %v), want warning %v containing %q at a cal_due line", c.now, e, e.Warning, c.warning, c.msg)
			}
		}
	}
}
