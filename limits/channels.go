package limits

// Units with several channels: results measured once per channel, and limits
// that judge each channel (or one of them).

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
)

// ChannelKey is the key of result name on channel ch, as a Catalog lists a
// per-channel result and as Judge finds its value: "name@ch". For ch "" (a result
// of the whole unit) it is name itself. No result name contains "@", so the keys
// of a per-channel result never meet another result's.
func ChannelKey(name, ch string) string {
	if ch == "" {
		return name
	}
	return name + "@" + ch
}

// SplitChannelKey splits a key made by ChannelKey into the result name and the
// channel ("" for a key of the whole unit).
func SplitChannelKey(key string) (name, ch string) {
	name, ch, _ = strings.Cut(key, "@")
	return name, ch
}

// Channels returns the unit's channel names the catalog lists (the channels of
// its per-channel results), in channel order: names compared as numbers when
// both are all digits, else as text. Nil for a one-channel product.
//
// A catalog says a result is per-channel by listing, beside its plain name, a key
// ChannelKey(name, ch) for every channel, each with the result's dimension.
func (c Catalog) Channels() []string {
	seen := map[string]bool{}
	var out []string
	for k := range c {
		if _, ch := SplitChannelKey(k); ch != "" && !seen[ch] {
			seen[ch] = true
			out = append(out, ch)
		}
	}
	slices.SortFunc(out, CompareChannels)
	return out
}

// PerChannel reports whether the catalog lists result name once per channel.
func (c Catalog) PerChannel(name string) bool { return len(c.ChannelsOf(name)) > 0 }

// ChannelsOf returns the channels the catalog lists result name on, in channel
// order; nil for a result of the whole unit. A step may run on some channels
// only, so a result may have fewer channels than the unit.
func (c Catalog) ChannelsOf(name string) []string {
	var out []string
	for k := range c {
		if n, ch := SplitChannelKey(k); ch != "" && n == name {
			out = append(out, ch)
		}
	}
	slices.SortFunc(out, CompareChannels)
	return out
}

// CompareChannels orders channel names: as numbers when both are all digits
// ("2" before "10"), else as text.
func CompareChannels(a, b string) int {
	x, errA := strconv.ParseUint(a, 10, 64)
	y, errB := strconv.ParseUint(b, 10, 64)
	if errA == nil && errB == nil && x != y {
		if x < y {
			return -1
		}
		return 1
	}
	return strings.Compare(a, b)
}

// names are the catalog's result names without the per-channel keys, for messages.
func (c Catalog) names() []string {
	out := make([]string, 0, len(c))
	for n := range c {
		if !strings.Contains(n, "@") {
			out = append(out, n)
		}
	}
	slices.Sort(out)
	return out
}

// channelsOf are the channels limit l judges: the one its channel key names, or
// every channel on which each per-channel result it uses is measured; nil for a
// limit of the whole unit.
func (s *Set) channelsOf(l *Limit) []string {
	if l.Channel != "" {
		return []string{l.Channel}
	}
	var out []string
	per := false
	for _, n := range l.Uses {
		chans, ok := s.perChannel[n]
		if !ok {
			continue
		}
		if !per {
			per, out = true, chans
			continue
		}
		out = slices.DeleteFunc(slices.Clone(out), func(ch string) bool { return !slices.Contains(chans, ch) })
	}
	if per && out == nil {
		out = []string{} // per-channel results with no channel in common: nothing to judge
	}
	return out
}

// view is results as limit l sees them on channel ch: each per-channel result it
// uses under its plain name, the value of that channel.
func (s *Set) view(l *Limit, results map[string]Value, ch string) map[string]Value {
	v := make(map[string]Value, len(l.Uses))
	for _, n := range l.Uses {
		key := n
		if _, per := s.perChannel[n]; per {
			key = ChannelKey(n, ch)
		}
		if r, ok := results[key]; ok {
			v[n] = r
		}
	}
	return v
}

// checkChannel checks a limit's channel key against the catalog's channels.
func (l *loader) checkChannel(s *entrySrc, lim *Limit, f *limitForm) {
	if f.Channel == nil {
		return
	}
	path := s.path("channel")
	lim.Channel = strings.TrimSpace(*f.Channel)
	chans := l.cat.Channels()
	switch {
	case lim.Channel == "":
		l.errs = append(l.errs, l.doc.Errorf(path, "\"channel\" is empty: expected one of the unit's channels, or no channel key for every channel"))
	case len(chans) == 0:
		l.errs = append(l.errs, l.doc.Errorf(path, "channel %q: the product's sequence declares no channels, so its results are of the whole unit: remove the channel key", lim.Channel))
	case !slices.Contains(chans, lim.Channel):
		l.errs = append(l.errs, l.doc.Errorf(path, "no channel %q: the sequence's channels are %s", lim.Channel, quoteAll(chans)))
	case f.Uses != nil:
		per := false
		for _, n := range *f.Uses {
			chans := l.cat.ChannelsOf(n)
			if len(chans) > 0 && !slices.Contains(chans, lim.Channel) {
				l.errs = append(l.errs, l.doc.Errorf(path, "channel %q: result %q is measured on channels %s only", lim.Channel, n, quoteAll(chans)))
				return
			}
			per = per || len(chans) > 0
		}
		if !per {
			l.errs = append(l.errs, l.doc.Errorf(path, "channel %q: the limit uses no per-channel result (%s are of the whole unit): remove the channel key",
				lim.Channel, strings.Join(*f.Uses, ", ")))
		}
	}
}

func quoteAll(ss []string) string {
	q := make([]string, len(ss))
	for i, s := range ss {
		q[i] = fmt.Sprintf("%q", s)
	}
	return strings.Join(q, ", ")
}
