package main

import (
	"flag"
	"fmt"
	"sort"
	"strings"
	"time"
)

// periodFlags checks the inputs every command over a stored period shares
// (replay, fatigue): no positional argument, every required flag given, and
// --from before --to as RFC 3339 times. It returns the period and the
// problems found, each worded for the user.
func periodFlags(fs *flag.FlagSet, required map[string]string, fromText, toText string) (from, to time.Time, problems []string) {
	if fs.NArg() > 0 {
		problems = append(problems, fmt.Sprintf("unexpected argument %q (all inputs are flags)", fs.Arg(0)))
	}
	var missing []string
	for name, v := range required {
		if v == "" {
			missing = append(missing, name)
		}
	}
	sort.Strings(missing)
	if len(missing) > 0 {
		problems = append(problems, "missing "+strings.Join(missing, ", "))
	}
	from, err := parseReplayTime("--from", fromText)
	if err != nil {
		problems = append(problems, err.Error())
	}
	to, err = parseReplayTime("--to", toText)
	if err != nil {
		problems = append(problems, err.Error())
	}
	if !from.IsZero() && !to.IsZero() && !to.After(from) {
		problems = append(problems, fmt.Sprintf("--to %s is not after --from %s; the period is [from, to)", toText, fromText))
	}
	return from, to, problems
}
