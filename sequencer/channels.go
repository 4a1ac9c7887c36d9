package sequencer

// Units with several channels: the sequence's channels: section, the steps that
// repeat per channel, and the switch that routes the bench to one channel.
//
// A step of a multi-channel unit runs once per channel or once for the whole
// unit. Its kind says which by default (StepKind.PerChannel); the step's own
// channels: key overrides it: all, none, or a list of channel names. At load a
// step that runs per channel is expanded into one StepDecl per channel
// (StepDecl.Channel), all sharing the one checked Step value, so the engine,
// replay and the prediction run the expanded list as they run any other. What a
// per-channel step keeps, sets and reads is keyed by its channel: a fit's sweep:
// is the same channel's sweep, its results are stored as name@channel (Result.Name
// the declared name, Result.Channel the channel).

import (
	"context"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/goccy/go-yaml"
	"github.com/rs/zerolog"

	"trimline/instruments/files"
	"trimline/limits"
)

// MaxChannels is the most channels a unit may have.
const MaxChannels = 16

// maxChannelName is the longest channel name.
const maxChannelName = 8

// channelsDecl is the sequence's channels: section as written.
type channelsDecl struct {
	Names  []string `yaml:"names"`
	Count  *int     `yaml:"count"`
	Switch string   `yaml:"switch"`
}

// channelSel is a step's channels: key: all, none, or a list of channel names.
type channelSel struct {
	word string   // "all" or "none", as written
	list []string // the names, when a list
	bad  bool     // neither a word nor a list of names
}

func (c *channelSel) UnmarshalYAML(b []byte) error {
	var s string
	if yaml.Unmarshal(b, &s) == nil && s != "" {
		c.word = s
		return nil
	}
	var l []string
	if err := yaml.Unmarshal(b, &l); err == nil && l != nil {
		c.list = l
		return nil
	}
	c.bad = true
	return nil
}

// validChannelName reports whether s can name a channel: 1 to 8 letters and digits.
func validChannelName(s string) bool {
	if s == "" || len(s) > maxChannelName {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9') {
			return false
		}
	}
	return true
}

// parseChannels reads the channels: section into s.Channels and s.Switch.
func parseChannels(doc *files.Doc, s *Sequence, c *channelsDecl, errs *files.List) {
	if c == nil {
		if doc.Has("$.channels") {
			*errs = append(*errs, doc.Errorf("$.channels", "expected names: [list of channel names] or count: N, and optionally switch: ROLE"))
		}
		return
	}
	bad := func(path, format string, args ...any) { *errs = append(*errs, doc.Errorf(path, format, args...)) }
	switch {
	case c.Count != nil && c.Names != nil:
		bad("$.channels.count", "give either names or count, not both")
	case c.Count != nil:
		n := *c.Count
		if n < 1 || n > MaxChannels {
			bad("$.channels.count", "expected 1 to %d channels, found %d", MaxChannels, n)
		}
		// Refused or not, the channels stand as written for the other checks,
		// so that one mistake is reported once.
		for i := 1; i <= min(n, 10*MaxChannels); i++ {
			s.Channels = append(s.Channels, strconv.Itoa(i))
		}
	case len(c.Names) == 0:
		bad("$.channels", "missing required key \"names\" (the channel names, e.g. [\"1\", \"2\"]) or \"count\"")
	default:
		if len(c.Names) > MaxChannels {
			bad("$.channels.names", "expected at most %d channels, found %d", MaxChannels, len(c.Names))
		}
		seen := map[string]int{}
		for i, n := range c.Names {
			path := fmt.Sprintf("$.channels.names[%d]", i)
			if !validChannelName(n) {
				bad(path, "channel name %q: expected 1 to %d letters and digits", n, maxChannelName)
			}
			if j, dup := seen[n]; dup {
				bad(path, "channel %q is already named (item %d): every channel needs its own name", n, j+1)
				continue
			}
			seen[n] = i
			s.Channels = append(s.Channels, n)
		}
	}
	if c.Switch != "" {
		if !validRoleName(c.Switch) {
			bad("$.channels.switch", "role %q: expected a name of lowercase letters, digits and _ beginning with a letter, as the station file binds it", c.Switch)
		} else {
			s.Switch = c.Switch
			s.SwitchWhere = whereIn(doc, "$.channels.switch")
		}
	}
}

// stepChannels resolves which channels step d (at path) runs on from its kind and
// its channels: key; nil runs it once for the whole unit.
func stepChannels(doc *files.Doc, s *Sequence, d *StepDecl, path string, sel *channelSel, errs *files.List) []string {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	if sel == nil {
		if k, _ := lookupKind(d.Kind); k.PerChannel {
			return s.Channels
		}
		return nil
	}
	p := path + ".channels"
	if len(s.Channels) == 0 {
		bad(p, "the sequence declares no channels (channels: at the top of the file): remove this key")
		return nil
	}
	switch {
	case sel.bad || sel.list == nil && sel.word != "all" && sel.word != "none":
		bad(p, "expected all, none or a list of channel names (%s)", quoteNames(s.Channels))
		return nil
	case sel.word == "all":
		return s.Channels
	case sel.word == "none":
		return nil
	case len(sel.list) == 0:
		bad(p, "expected at least one channel name (or none: the step runs once for the whole unit)")
		return nil
	}
	var out []string
	for i, n := range sel.list {
		switch {
		case !slices.Contains(s.Channels, n):
			bad(fmt.Sprintf("%s[%d]", p, i), "no channel %q: the sequence's channels are %s", n, quoteNames(s.Channels))
		case slices.Contains(out, n):
			bad(fmt.Sprintf("%s[%d]", p, i), "channel %q is listed twice", n)
		default:
			out = append(out, n)
		}
	}
	// In the sequence's order, whatever the list's.
	slices.SortFunc(out, func(a, b string) int { return slices.Index(s.Channels, a) - slices.Index(s.Channels, b) })
	return out
}

func quoteNames(ss []string) string {
	q := make([]string, len(ss))
	for i, s := range ss {
		q[i] = strconv.Quote(s)
	}
	return strings.Join(q, ", ")
}

// expandChannels replaces every step that runs per channel by one StepDecl per
// channel, in channel order, each with its results marked with the channel.
func expandChannels(s *Sequence) {
	var out []*StepDecl
	for _, d := range s.Steps {
		if d.chans == nil {
			out = append(out, d)
			continue
		}
		for _, ch := range d.chans {
			e := *d
			e.Channel = ch
			e.Results = make([]ResultDef, len(d.Results))
			for i, r := range d.Results {
				r.Channel = ch
				e.Results[i] = r
			}
			out = append(out, &e)
		}
	}
	s.Steps = out
}

// checkSwitch checks that the switch role is not used by a step as another kind.
func checkSwitch(doc *files.Doc, s *Sequence, errs *files.List) {
	if s.Switch == "" {
		return
	}
	for _, d := range s.Steps {
		for _, r := range d.Roles {
			if r.Role == s.Switch {
				*errs = append(*errs, doc.Errorf("$.channels.switch", "role %q routes the channels, but step %q (%s) uses it as a %s: name a role of its own for the switch", s.Switch, d.Name, d.Where, r.Kind))
				return
			}
		}
	}
}

// channelCatalog adds to c the per-channel keys of the sequence's results.
func channelKeys(c limits.Catalog, defs []ResultDef) {
	for _, d := range defs {
		if d.Channel != "" {
			c[limits.ChannelKey(d.Name, d.Channel)] = d.Dim
		}
	}
}

// route routes the switch to ch unless it is so routed already.
func (e *Engine) route(ctx context.Context, ch string) error {
	role := e.cfg.Sequence.Switch
	sw, ok := e.switches[role]
	if !ok || e.routed == ch {
		return nil
	}
	e.routed = "" // unknown until Route answers
	if err := e.step(ctx, func(ctx context.Context) error { return sw.Route(ctx, ch) }); err != nil {
		return e.blame(role, err.Error(), fmt.Errorf("%s: route channel %s: %w", role, ch, err))
	}
	e.routed = ch
	return nil
}

// release opens every path of every switch, each with a context of its own so
// that it works after the run's context was cancelled. The first error is
// returned.
func (e *Engine) release(log zerolog.Logger) error {
	var first error
	for _, r := range e.roles {
		sw, ok := e.switches[r]
		if !ok {
			continue
		}
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		err := sw.Release(ctx)
		cancel()
		if err != nil {
			log.Error().Err(err).Str("role", r).Msg("could not release the switch")
			if first == nil {
				first = fmt.Errorf("%s: release: %w", r, err)
			}
		}
	}
	e.routed = ""
	return first
}

// routed reports whether step d needs the switch routed to its channel: it runs
// per channel and drives a source or reads a meter. A step that only talks to
// the unit's port (a trim, whose commands name the channel) or computes (a fit)
// leaves the switch as it is.
func routed(d *StepDecl) bool {
	if d.Channel == "" {
		return false
	}
	for _, r := range d.Roles {
		if r.Kind == VoltageSource || r.Kind == CurrentSource || r.Kind == VoltMeter {
			return true
		}
	}
	return false
}
