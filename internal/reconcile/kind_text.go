package reconcile

import "fmt"

// MarshalText gives the kind's name (Kind.String), so that JSON, CSV and
// the API carry "gauge_fault", "stiffness_change", ... rather than numbers.
func (k Kind) MarshalText() ([]byte, error) {
	if k < GaugeFault || k > GaugeDrift {
		return nil, fmt.Errorf("reconcile: cause kind %d is not a kind of candidate cause", int(k))
	}
	return []byte(k.String()), nil
}

// UnmarshalText reads a kind's name as MarshalText writes it.
func (k *Kind) UnmarshalText(text []byte) error {
	for c := GaugeFault; c <= GaugeDrift; c++ {
		if c.String() == string(text) {
			*k = c
			return nil
		}
	}
	return fmt.Errorf("reconcile: cause kind %q: want one of gauge_fault, stiffness_change, support_settlement, nodal_load, spring_change, channel_bias, gauge_drift", text)
}
