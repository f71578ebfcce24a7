package yamlfile

import (
	"fmt"
	"sort"
	"strings"
)

// Error is one problem found in a YAML file (a structure file or a sensor
// map): where it is (file, line, field) and what is wrong with what to do
// about it.
type Error struct {
	// File is the path or name the file was read from.
	File string
	// Line is the 1-based source line, 0 when unknown.
	Line int
	// Field is the path of the offending field, for example
	// "members[B3].section" or "channels[B2_a].gauge_factor".
	Field string
	// Msg says what is wrong and, where it helps, what to do.
	Msg string
	// Err is the underlying cause (for example a units error), if any.
	Err error
}

// Error formats the problem as "file:line: field: msg".
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	b.WriteString(": ")
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// Unwrap returns the underlying cause.
func (e *Error) Unwrap() error { return e.Err }

// ErrorList is every problem found in one file. It is the error of a
// rejected structure file or sensor map.
type ErrorList []*Error

// maxListed bounds how many problems ErrorList.Error spells out.
const maxListed = 50

// Error lists the problems one per line (at most 50, then a count).
func (l ErrorList) Error() string {
	if len(l) == 0 {
		return "no errors"
	}
	var b strings.Builder
	for i, e := range l {
		if i == maxListed {
			fmt.Fprintf(&b, "\n... and %d more problems", len(l)-maxListed)
			break
		}
		if i > 0 {
			b.WriteByte('\n')
		}
		b.WriteString(e.Error())
	}
	return b.String()
}

// Unwrap returns the individual problems, so errors.Is and errors.As see
// their causes.
func (l ErrorList) Unwrap() []error {
	out := make([]error, len(l))
	for i, e := range l {
		out[i] = e
	}
	return out
}

// Sort orders the problems by line (stable, so problems on one line keep
// the order they were found in).
func (l ErrorList) Sort() {
	sort.SliceStable(l, func(i, j int) bool { return l[i].Line < l[j].Line })
}
