package demo

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"regexp"
	"slices"
	"sort"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// docExamples returns the JSON examples of docs/api.md in order, with the
// lines that only mark left-out entries ("...") removed and the trailing
// commas they leave repaired.
func docExamples(t *testing.T) []any {
	t.Helper()
	data, err := os.ReadFile("../../docs/api.md")
	if err != nil {
		t.Fatal(err)
	}
	blocks := regexp.MustCompile("(?s)```json\n(.*?)```").FindAllStringSubmatch(string(data), -1)
	var out []any
	for i, b := range blocks {
		var lines []string
		for _, l := range strings.Split(b[1], "\n") {
			if strings.TrimSpace(l) != "..." {
				lines = append(lines, l)
			}
		}
		text := regexp.MustCompile(`,(\s*[\]}])`).ReplaceAllString(strings.Join(lines, "\n"), "$1")
		var v any
		if err := json.Unmarshal([]byte(text), &v); err != nil {
			t.Fatalf("docs/api.md JSON example %d does not parse: %v\n%s", i+1, err, text)
		}
		out = append(out, v)
	}
	return out
}

// kindOf names a JSON value's kind; null is "null".
func kindOf(v any) string {
	switch v.(type) {
	case nil:
		return "null"
	case bool:
		return "bool"
	case float64:
		return "number"
	case string:
		return "string"
	case []any:
		return "array"
	case map[string]any:
		return "object"
	}
	return fmt.Sprintf("%T", v)
}

// compareShape reports where the documented value doc differs from the
// real value got in structure: the same fields in every object, the same
// kinds (a number may be null on either side, since non-finite numbers are
// written as null), and every documented array element shaped like the
// real element at the same place (or the first, when the real array is
// shorter).
func compareShape(path string, doc, got any) []string {
	dk, gk := kindOf(doc), kindOf(got)
	numOrNull := func(k string) bool { return k == "number" || k == "null" }
	if dk != gk && !(numOrNull(dk) && numOrNull(gk)) {
		return []string{fmt.Sprintf("%s: documented %s, service gives %s", path, dk, gk)}
	}
	var diffs []string
	switch d := doc.(type) {
	case map[string]any:
		g := got.(map[string]any)
		for k := range d {
			if _, ok := g[k]; !ok {
				diffs = append(diffs, fmt.Sprintf("%s.%s: documented, not in the service's answer", path, k))
			}
		}
		for k := range g {
			if _, ok := d[k]; !ok {
				diffs = append(diffs, fmt.Sprintf("%s.%s: in the service's answer, not documented", path, k))
			}
		}
		keys := make([]string, 0, len(d))
		for k := range d {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for _, k := range keys {
			if gv, ok := g[k]; ok {
				diffs = append(diffs, compareShape(path+"."+k, d[k], gv)...)
			}
		}
	case []any:
		g := got.([]any)
		if len(d) > 0 && len(g) == 0 {
			return []string{fmt.Sprintf("%s: documented entries, the service gave none to compare", path)}
		}
		for i, e := range d {
			r := g[0]
			if i < len(g) {
				r = g[i]
			}
			diffs = append(diffs, compareShape(fmt.Sprintf("%s[%d]", path, i), e, r)...)
		}
	}
	return diffs
}

// fieldValues collects the string values of a field name anywhere in v.
func fieldValues(v any, field string, into map[string]bool) {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			if s, ok := e.(string); ok && k == field {
				into[s] = true
			}
			fieldValues(e, field, into)
		}
	case []any:
		for _, e := range x {
			fieldValues(e, field, into)
		}
	}
}

func getJSON(t *testing.T, url string) any {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	if resp.StatusCode != http.StatusOK {
		t.Fatalf("GET %s: %s: %s", url, resp.Status, body)
	}
	var v any
	if err := json.Unmarshal(body, &v); err != nil {
		t.Fatalf("GET %s: %v", url, err)
	}
	return v
}

// TestAPIDocsMatchService reads the JSON examples of docs/api.md and
// compares them with real answers of the running service (the demo with
// its fault on D2, until D2's alarm is raised): the same fields and kinds,
// and the documented rule names, cause kinds, cause units and event kinds
// taken from the service's own vocabulary.
func TestAPIDocsMatchService(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo for about half a minute")
	}
	docs := docExamples(t)
	if len(docs) != 5 {
		t.Fatalf("docs/api.md has %d JSON examples; the test expects 5 (structures, state, series, events, dead letters)", len(docs))
	}

	runCtx, stop := context.WithCancel(context.Background())
	d, err := Start(runCtx, Options{Listen: "127.0.0.1:0", Speed: 20, Fault: "stiffness:D2:1m:0.3", Seed: 7,
		Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		stop()
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- d.Wait(runCtx) }()
	defer func() {
		stop()
		if err := <-done; err != nil {
			t.Errorf("demo shutdown: %v", err)
		}
	}()
	base := d.URL() + "api/structures"
	eventsURL := func() string {
		return fmt.Sprintf("%s/alder-creek/events?from=%s&to=%s", base, d.start.Add(-time.Hour).Format(time.RFC3339), d.Now().Add(time.Hour).Format(time.RFC3339))
	}
	var events any
	deadline := time.Now().Add(90 * time.Second)
	for {
		events = getJSON(t, eventsURL())
		raised := false
		for _, e := range events.(map[string]any)["events"].([]any) {
			ev := e.(map[string]any)
			if ev["rule"] == string(alerts.RuleMemberDiverging) && ev["subject"] == "D2" && ev["kind"] == string(alerts.Raised) && len(ev["causes"].([]any)) > 0 {
				raised = true
			}
		}
		if raised {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("no MemberDiverging event for D2 within 90 s: %v", events)
		}
		time.Sleep(200 * time.Millisecond)
	}
	state := getJSON(t, base+"/alder-creek/state")
	epoch, _ := time.Parse(time.RFC3339Nano, state.(map[string]any)["epoch"].(string))
	series := getJSON(t, fmt.Sprintf("%s/alder-creek/members/D2/series?from=%s&to=%s", base, epoch.Add(-3*time.Second).Format(time.RFC3339), epoch.Add(time.Second).Format(time.RFC3339)))
	// The demo's deliberate bad messages are dead letters by now.
	deadLetters := getJSON(t, d.URL()+"api/dead-letters")
	real := []any{getJSON(t, base), state, series, events, deadLetters}
	// TRUSSMON_API_DUMP=DIR writes the real answers there (0.json ..
	// 4.json), to refresh the examples of docs/api.md.
	if dir := os.Getenv("TRUSSMON_API_DUMP"); dir != "" {
		for i, v := range real {
			b, _ := json.MarshalIndent(v, "", "  ")
			os.WriteFile(fmt.Sprintf("%s/%d.json", dir, i), b, 0o644)
		}
	}
	for i, name := range []string{"structures", "state", "series", "events", "dead letters"} {
		for _, diff := range compareShape(name, docs[i], real[i]) {
			t.Errorf("docs/api.md %s example: %s", name, diff)
		}
	}

	// The documented vocabulary is the service's.
	rules, err := alerts.DefaultRules()
	if err != nil {
		t.Fatal(err)
	}
	ruleNames := map[string]bool{}
	for _, r := range rules {
		ruleNames[string(r.Name)] = true
	}
	causeKinds, causeUnits := map[string]bool{}, map[string]bool{}
	for k := reconcile.GaugeFault; k <= reconcile.ChannelBias; k++ {
		causeKinds[k.String()] = true
		_, u := k.Display()
		causeUnits[u] = true
	}
	docEvents := docs[3].(map[string]any)["events"].([]any)
	for _, e := range docEvents {
		ev := e.(map[string]any)
		if !ruleNames[ev["rule"].(string)] {
			t.Errorf("docs/api.md: event rule %q is not a rule of the service (%v)", ev["rule"], ruleNames)
		}
		if k := ev["kind"].(string); k != string(alerts.Raised) && k != string(alerts.Cleared) {
			t.Errorf("docs/api.md: event kind %q", k)
		}
		for _, c := range ev["causes"].([]any) {
			cs := c.(map[string]any)
			if !causeKinds[cs["kind"].(string)] {
				t.Errorf("docs/api.md: cause kind %q is not one of the service's (%v)", cs["kind"], causeKinds)
			}
			if !causeUnits[cs["unit"].(string)] {
				t.Errorf("docs/api.md: cause unit %q is not one of the service's (%v)", cs["unit"], causeUnits)
			}
		}
	}
	// The subjects the example shows are those the service gives for the
	// same fault: the member (D2, not a gauge channel name) for the event and
	// for its gauge-fault and stiffness causes, "NODE axis" for a nodal load.
	realSubjects := map[string]bool{}
	fieldValues(events, "subject", realSubjects)
	nodeAxis := regexp.MustCompile(`^[A-Za-z0-9_.:-]+ [xyz]$`)
	for _, e := range docEvents {
		ev := e.(map[string]any)
		check := []string{ev["subject"].(string)}
		for _, c := range ev["causes"].([]any) {
			cs := c.(map[string]any)
			if cs["kind"] == "nodal_load" {
				if !nodeAxis.MatchString(cs["subject"].(string)) {
					t.Errorf("docs/api.md: nodal_load subject %q is not NODE axis", cs["subject"])
				}
				continue
			}
			check = append(check, cs["subject"].(string))
		}
		for _, s := range check {
			if !realSubjects[s] {
				t.Errorf("docs/api.md: subject %q does not occur in the service's events for the fault on D2 (%v)", s, slices.Sorted(mapsKeys(realSubjects)))
			}
		}
	}
	// The documentation names no design document that is not in the
	// repository.
	if data, _ := os.ReadFile("../../docs/api.md"); strings.Contains(string(data), "DESIGN.md") {
		if _, err := os.Stat("../../DESIGN.md"); err != nil {
			t.Errorf("docs/api.md refers to DESIGN.md, which is not in the repository")
		}
	}
}

func mapsKeys(m map[string]bool) func(func(string) bool) {
	return func(yield func(string) bool) {
		for k := range m {
			if !yield(k) {
				return
			}
		}
	}
}
