// Package settings builds, from one service configuration, everything that
// decides what the monitor computes and when it alarms: the epoch
// assembler's window and lateness, the handling of missing load channels,
// the global test's size and the alarm rules with their thresholds.
//
// It is the one place where configuration values become alarm thresholds:
// `monitor run`, `monitor demo`, `monitor replay --config` and
// `monitor rules --config` all call FromConfig, so the live service, a
// replay and the Prometheus rules file apply the same limits.
package settings

import (
	"fmt"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/config"
)

// Settings are the computing and alarming settings of one configuration.
type Settings struct {
	// Window and MaxLateness configure the epoch assembler.
	Window, MaxLateness time.Duration
	// EstimateMissingLoads turns a measured load pattern whose channel is
	// missing in an epoch into an unknown to estimate (false: skip the
	// epoch).
	EstimateMissingLoads bool
	// AlphaGlobal is the size of the global chi-square test that the
	// FitRejected rule applies to one epoch (alerts.GlobalTestSize).
	AlphaGlobal float64
	// Rules are the alarm rules with the configuration's limits applied.
	Rules []alerts.Rule
}

// Defaults returns the settings of the default configuration
// (config.Defaults), used where no configuration file is given.
func Defaults() (Settings, error) {
	c := config.Defaults()
	c.File = "(defaults)"
	return FromConfig(&c)
}

// FromConfig returns the settings of a configuration: the epoch fields of
// its epochs section and the alarm rules of alerts.DefaultRules with the
// limits of its alarms section applied:
//
//   - ChannelSilent raises (and clears) at alarms.silent_after;
//   - IngestRejects raises at alarms.reject_rate_per_minute times its
//     counting window in minutes, and clears at the rule's default clearing
//     count or the raise count, whichever is lower (hysteresis kept).
func FromConfig(c *config.Config) (Settings, error) {
	if c == nil {
		return Settings{}, fmt.Errorf("settings: no configuration given")
	}
	rules, err := alerts.DefaultRules()
	if err != nil {
		return Settings{}, err
	}
	for i := range rules {
		switch rules[i].Name {
		case alerts.RuleChannelSilent:
			rules[i].Raise = c.Alarms.SilentAfter.D().Seconds()
			rules[i].Clear = rules[i].Raise
		case alerts.RuleIngestRejects:
			rules[i].Raise = c.Alarms.RejectRatePerMinute * rules[i].Window.Minutes()
			rules[i].Clear = min(rules[i].Clear, rules[i].Raise)
		}
		if err := rules[i].Validate(); err != nil {
			return Settings{}, fmt.Errorf("%s: alarms: %w", c.File, err)
		}
	}
	s := Settings{
		Window:               c.Epochs.Window.D(),
		MaxLateness:          c.Epochs.MaxLateness.D(),
		EstimateMissingLoads: c.Epochs.MissingLoad == "estimate",
		Rules:                rules,
	}
	s.AlphaGlobal = alerts.GlobalTestSize(rules)
	return s, nil
}
