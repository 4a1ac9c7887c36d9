package certificate

import (
	"slices"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// A unit of several channels has its sweeps, fits, trim codes, coefficients,
// results and limit outcomes per channel (their Channel field; "" is the whole
// unit, or a unit of one channel). The certificate keeps a one-channel record's
// layout as it was and, where channels are named, says which channel each
// table row, band or plot is of.

// chanWord names a channel as the certificate prints it: "channel 2".
func chanWord(ch string) string { return "channel " + ch }

// outcomeChannel is the channel of the results a limit outcome judged, "" for
// the whole unit.
func outcomeChannel(o limits.Outcome) string { return o.Channel }

// channels lists the channels the record names, in the order they first
// appear (results, then sweeps, fits, trims, coefficients, re-trims), "" first
// when the record has results of the whole unit as well. It is empty for a
// record with no channel named.
func (d *doc) channels() []string {
	var out []string
	named := false
	add := func(ch string) {
		named = named || ch != ""
		if !slices.Contains(out, ch) {
			out = append(out, ch)
		}
	}
	r := d.rec
	for _, x := range r.Results {
		add(x.Channel)
	}
	for _, o := range r.Outcomes {
		add(outcomeChannel(o))
	}
	for _, x := range r.Sweeps {
		add(x.Channel)
	}
	for _, x := range r.Fits {
		add(x.Channel)
	}
	for _, x := range r.Trims {
		add(x.Channel)
	}
	for _, x := range r.Coefficients {
		add(x.Channel)
	}
	for _, x := range r.Retrims {
		add(x.Channel)
	}
	if !named {
		return nil
	}
	// The whole unit's results come first.
	if i := slices.Index(out, ""); i > 0 {
		out = append([]string{""}, slices.Delete(out, i, i+1)...)
	}
	return out
}

// chanIndex is the place of ch in the record's channels, for sorting.
func chanIndex(chans []string, ch string) int {
	if i := slices.Index(chans, ch); i >= 0 {
		return i
	}
	return len(chans)
}

// resultIn returns the record's result of that name on channel ch; when the
// record has none there, the first of that name on any channel (a limit
// outcome made before outcomes named their channel judges by name alone).
func (d *doc) resultIn(name, ch string) (sequencer.Result, bool) {
	for _, r := range d.rec.Results {
		if r.Name == name && r.Channel == ch {
			return r, true
		}
	}
	return d.result(name)
}

// channelBands labels the rows of a per-channel table: a band "Channel 2"
// before each run of rows of one channel ("Whole unit" for ""), none when no
// row names a channel. It is fed each row's channel in order.
type channelBands struct {
	bands []pdfdoc.Band
	last  *string
	named bool
}

// row notes that row at (its index) is of channel ch.
func (b *channelBands) row(at int, ch string) {
	b.named = b.named || ch != ""
	if b.last != nil && *b.last == ch {
		return
	}
	b.last = &ch
	title := "Whole unit"
	if ch != "" {
		title = "Channel " + ch
	}
	b.bands = append(b.bands, pdfdoc.Band{At: at, Title: title})
}

// get is the bands, nil when no row named a channel.
func (b *channelBands) get() []pdfdoc.Band {
	if !b.named {
		return nil
	}
	return b.bands
}

// byChannel returns xs ordered by the record's channels, each channel's in
// record order; xs as it is when no channel is named.
func byChannel[T any](d *doc, xs []T, ch func(T) string) []T {
	chans := d.channels()
	if chans == nil {
		return xs
	}
	out := slices.Clone(xs)
	slices.SortStableFunc(out, func(a, b T) int { return chanIndex(chans, ch(a)) - chanIndex(chans, ch(b)) })
	return out
}
