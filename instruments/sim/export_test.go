package sim

// MatchTemplate compiles text as a template (value: "{code}", "{value}" or "" for
// none; channel: whether {channel} is allowed) and matches line against it, for the
// fuzz test of the template parser.
func MatchTemplate(text, value string, channel bool, line string) (compiled bool, v, ch string, ok bool) {
	t, err := compileTemplate("cmd", text, value, channel)
	if err != nil {
		return false, "", "", false
	}
	v, ch, ok = t.match(normLine(line))
	return true, v, ch, ok
}
