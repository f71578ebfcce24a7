package yamlfile

import (
	"strings"
	"testing"
)

func TestErrorFormat(t *testing.T) {
	tests := []struct {
		e    Error
		want string
	}{
		{Error{File: "a.yaml", Line: 3, Field: "nodes[A].at", Msg: "bad"}, "a.yaml:3: nodes[A].at: bad"},
		{Error{File: "a.yaml", Line: 3, Msg: "YAML syntax: x"}, "a.yaml:3: YAML syntax: x"},
		{Error{File: "a.yaml", Msg: "file is empty"}, "a.yaml: file is empty"},
	}
	for _, tc := range tests {
		if got := tc.e.Error(); got != tc.want {
			t.Errorf("got %q, want %q", got, tc.want)
		}
	}
	var many ErrorList
	for i := 0; i < 60; i++ {
		many = append(many, &Error{File: "f", Line: i + 1, Msg: "m"})
	}
	if s := many.Error(); !strings.HasSuffix(s, "... and 10 more problems") || strings.Count(s, "\n") != 50 {
		t.Errorf("long list not shortened: %q", s[len(s)-40:])
	}
}
