package scenario

import (
	"strconv"
	"strings"
)

// Error is an invalid-scenario error with a position. Its Error method formats
// it as
//
//	FILE:LINE:COL: key.path: message
//
// leaving out LINE:COL when the position is not known (COL alone when only the
// line is known) and the key path when the error belongs to no key.
type Error struct {
	File string // the scenario file, or the points file for a bad row in one
	Line int    // 1-based line, 0 when unknown
	Col  int    // 1-based column counted in characters, 0 when unknown
	Key  string // key path such as "obstacle[1].radius", "" when none
	Msg  string // what is wrong and what is allowed
	Err  error  // the underlying cause, if any (for errors.Is and errors.As)
}

// Error formats the error as FILE:LINE:COL: key.path: message.
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(e.Line))
		if e.Col > 0 {
			b.WriteByte(':')
			b.WriteString(strconv.Itoa(e.Col))
		}
	}
	if e.Key != "" {
		if b.Len() > 0 {
			b.WriteString(": ")
		}
		b.WriteString(e.Key)
	}
	if b.Len() > 0 {
		b.WriteString(": ")
	}
	b.WriteString(e.Msg)
	return b.String()
}

// Unwrap returns the underlying cause of the error, or nil.
func (e *Error) Unwrap() error { return e.Err }
