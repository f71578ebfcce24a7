package loggercsvtest

import "testing"

func TestSameWithin(t *testing.T) {
	const want = "time,B2_a\nunit,/\n1796173200,1.2345678e-05\n"
	cases := []struct {
		name, got string
		line      int
		ok        bool
	}{
		{"identical", want, 0, true},
		{"last digit within 1e-6", "time,B2_a\nunit,/\n1796173200,1.2345679e-05\n", 0, true},
		{"value beyond 1e-6", "time,B2_a\nunit,/\n1796173200,1.2346e-05\n", 3, false},
		{"text cell differs", "time,B2_b\nunit,/\n1796173200,1.2345678e-05\n", 1, false},
		{"missing line", "time,B2_a\nunit,/\n", 4, false}, // lines split on newline: the fourth is the want's empty last one
		{"extra cell", "time,B2_a\nunit,/,/\n1796173200,1.2345678e-05\n", 2, false},
	}
	for _, c := range cases {
		line, ok := SameWithin([]byte(c.got), []byte(want), 1e-6)
		if line != c.line || ok != c.ok {
			t.Errorf("%s: SameWithin = %d, %v; want %d, %v", c.name, line, ok, c.line, c.ok)
		}
	}
}
