package sequencer

// The DUT port steps: identify (the unit reports the scanned serial; its firmware
// is recorded) and command (text commands and queries with reply checks).

import (
	"context"
	"fmt"
	"regexp"
	"strings"

	"trimline/instruments"
)

func init() {
	RegisterStep(StepKind{Name: "identify", About: "checks that the unit reports the scanned serial number and records its firmware",
		New: func() Step { return new(identifyStep) }})
	RegisterStep(StepKind{Name: "command", About: "sends text commands and queries to a DUT port and checks the replies",
		New: func() Step { return new(commandStep) }})
}

// identifyStep is identify as the file writes it.
type identifyStep struct {
	Port          string `yaml:"port"`
	SerialQuery   string `yaml:"serial_query"`
	FirmwareQuery string `yaml:"firmware_query"`
}

func (s *identifyStep) Check(c *Checker) {
	s.Port = orDefault(s.Port, RoleDUT)
	c.Use(s.Port, DUTPort)
	if s.SerialQuery == "" && s.FirmwareQuery == "" {
		c.Errorf("", "expected serial_query, firmware_query or both")
	}
}

func (s *identifyStep) Run(ctx context.Context, u *Unit) error {
	if !u.Live() {
		return nil
	}
	port, err := u.Port(s.Port)
	if err != nil {
		return err
	}
	rec, seq := u.Rec, u.seq
	return u.Do(ctx, func(ctx context.Context) error {
		if q := s.SerialQuery; q != "" {
			got, err := port.Query(ctx, q)
			if err != nil {
				return u.e.blame(s.Port, err.Error(), fmt.Errorf("%s: read serial number: %w", s.Port, err))
			}
			if strings.TrimSpace(got) != rec.Serial {
				return u.e.blame(s.Port, fmt.Sprintf("the unit in it reports serial %q", strings.TrimSpace(got)),
					u.Fault("the unit in the fixture reports serial %q but %q was scanned: wrong unit in the fixture", strings.TrimSpace(got), rec.Serial))
			}
		}
		if q := s.FirmwareQuery; q != "" {
			fw, err := port.Query(ctx, q)
			if err != nil {
				return u.e.blame(s.Port, err.Error(), fmt.Errorf("%s: read firmware id: %w", s.Port, err))
			}
			for i := range rec.Instruments {
				if rec.Instruments[i].Role == s.Port {
					rec.Instruments[i].Identity = instruments.Identity{Maker: orZero(seq.Maker), Model: orZero(seq.Product), Serial: rec.Serial, Firmware: strings.TrimSpace(fw)}
				}
			}
		}
		return nil
	})
}

// commandStep is command as the file writes it.
type commandStep struct {
	Port       string         `yaml:"port"`
	Send       []*commandLine `yaml:"send"`
	OnMismatch string         `yaml:"on_mismatch"`
}

// commandLine is one line a command step sends: a command (acknowledged by the
// port) or a query whose reply is checked.
type commandLine struct {
	Command string `yaml:"command"`
	Query   string `yaml:"query"`
	Expect  string `yaml:"expect"`
	Match   string `yaml:"match"`
	re      *regexp.Regexp
}

func (s *commandStep) Check(c *Checker) {
	s.Port = orDefault(s.Port, RoleDUT)
	c.Use(s.Port, DUTPort)
	switch s.OnMismatch {
	case "":
		s.OnMismatch = "fail"
	case "fail", "fault":
	default:
		c.Errorf("on_mismatch", "expected fail (the unit answered wrongly) or fault (the station cannot go on), found %q", s.OnMismatch)
	}
	if len(s.Send) == 0 {
		c.Errorf("", "missing required key \"send\": the lines to send, each {command: TEXT} or {query: TEXT, expect: REPLY} or {query: TEXT, match: REGEXP}")
	}
	for i, l := range s.Send {
		key := fmt.Sprintf("send[%d]", i)
		switch {
		case l == nil:
			c.Errorf(key, "expected {command: TEXT} or {query: TEXT, expect: REPLY}")
		case (l.Command == "") == (l.Query == ""):
			c.Errorf(key, "expected exactly one of command or query")
		case l.Command != "" && (l.Expect != "" || l.Match != ""):
			c.Errorf(key, "a command is acknowledged by the port; to check a reply, send a query")
		case l.Expect != "" && l.Match != "":
			c.Errorf(key, "expected either expect (the exact reply) or match (a regular expression), not both")
		case l.Match != "":
			re, err := regexp.Compile(l.Match)
			if err != nil {
				c.Errorf(key+".match", "not a regular expression: %v", err)
			}
			l.re = re
		}
	}
}

// text is the line with {serial} replaced by the unit's serial and {channel} by
// the running step's channel.
func (l *commandLine) text(u *Unit, s string) string {
	return u.Fill(strings.ReplaceAll(s, "{serial}", u.Serial))
}

func (s *commandStep) Run(ctx context.Context, u *Unit) error {
	if u.Replaying() {
		// A reply is a fact of the run: the stored record holds a mismatch as the
		// reason it gave, and the run ended there.
		prefix := fmt.Sprintf("step %q: ", u.step.Name)
		for _, r := range u.stored.Reasons {
			if strings.HasPrefix(r, prefix) {
				s.mismatch(u, r)
				return nil
			}
		}
		return nil
	}
	if !u.Live() {
		return nil
	}
	port, err := u.Port(s.Port)
	if err != nil {
		return err
	}
	for _, l := range s.Send {
		var mismatch string
		err := u.Do(ctx, func(ctx context.Context) error {
			if l.Command != "" {
				line := l.text(u, l.Command)
				if err := port.Command(ctx, line); err != nil {
					return u.e.blame(s.Port, err.Error(), fmt.Errorf("%s: %q: %w", s.Port, line, err))
				}
				return nil
			}
			line := l.text(u, l.Query)
			got, err := port.Query(ctx, line)
			if err != nil {
				return u.e.blame(s.Port, err.Error(), fmt.Errorf("%s: %q: %w", s.Port, line, err))
			}
			got = strings.TrimSpace(got)
			switch {
			case l.Expect != "" && got != l.text(u, l.Expect):
				mismatch = fmt.Sprintf("step %q: %s answered %q to %q, expected %q", u.step.Name, s.Port, got, line, l.text(u, l.Expect))
			case l.re != nil && !l.re.MatchString(got):
				mismatch = fmt.Sprintf("step %q: %s answered %q to %q, expected a reply matching %s", u.step.Name, s.Port, got, line, l.Match)
			}
			return nil
		})
		if err != nil {
			return err
		}
		if mismatch != "" {
			if s.OnMismatch == "fault" {
				return u.Fault("%s", mismatch)
			}
			s.mismatch(u, mismatch)
			return nil
		}
	}
	return nil
}

// mismatch fails the unit with reason and ends its run.
func (s *commandStep) mismatch(u *Unit, reason string) {
	u.Fail(reason)
	u.End(fmt.Sprintf("not measured: step %q failed", u.step.Name))
}
