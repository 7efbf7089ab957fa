package scenario

import (
	"errors"
	"fmt"
	"sort"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/pelletier/go-toml/v2/unstable"
)

// Limits of the position walk. The scenario schema nests at most three levels
// below a key (channel.lower[i][j]); deeper values and longer dotted keys are
// errors of their own and need no positions. The limits keep the cost of a
// hostile document (thousands of nested brackets or key parts) linear.
const (
	maxValueDepth = 8  // nested arrays and inline tables below a key
	maxKeyParts   = 16 // parts of a dotted key or table header
)

// positions maps key paths to byte offsets in the scenario source. Each path
// may have the offset of its key (the key itself, or the '[' of a table
// header) and the offset of its value.
type positions struct {
	src   []byte
	lines []int          // byte offset of the start of each line
	key   map[string]int // path -> offset of the key
	val   map[string]int // path -> offset of the value
	at    map[int]string // offset of a key or value -> path, for go-toml's errors
}

// newPositions walks the TOML syntax tree of src and records where every key
// path and value starts. It stops at the first syntax error, keeping what it
// found before it.
func newPositions(src []byte) *positions {
	p := &positions{
		src:   src,
		lines: []int{0},
		key:   make(map[string]int),
		val:   make(map[string]int),
		at:    make(map[int]string),
	}
	for i, c := range src {
		if c == '\n' {
			p.lines = append(p.lines, i+1)
		}
	}

	var parser unstable.Parser
	parser.Reset(src)
	counts := make(map[string]int) // array-of-tables path -> elements so far
	prefix, skip := "", false
	for parser.NextExpression() {
		e := parser.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			prefix, skip = p.header(e, counts)
		case unstable.KeyValue:
			if !skip {
				p.keyValue(prefix, e, counts, 0)
			}
		}
	}
	return p
}

// header records a [table] or [[array.of.tables]] header and returns the
// path that the following keys belong to; skip is true when the header is too
// long to be worth following.
func (p *positions) header(e *unstable.Node, counts map[string]int) (prefix string, skip bool) {
	var parts []*unstable.Node
	n := 0
	it := e.Key()
	for it.Next() {
		if n++; n <= maxKeyParts {
			parts = append(parts, it.Node())
		}
	}
	if len(parts) == 0 {
		return "", true
	}
	start := int(parts[0].Raw.Offset)
	for start > 0 && (p.src[start-1] == '[' || p.src[start-1] == ' ' || p.src[start-1] == '\t') {
		start--
	}
	path := ""
	for i, part := range parts {
		path = joinKey(path, string(part.Data))
		last := i == n-1
		switch {
		case last && e.Kind == unstable.ArrayTable:
			k := counts[path]
			counts[path] = k + 1
			p.record(path, start, start)
			path = indexKey(path, k)
		case counts[path] > 0 && !last:
			// [a.b] after [[a]] is a table in the last element of a.
			// ([a] after [[a]] is an error that go-toml reports at a.)
			path = indexKey(path, counts[path]-1)
		}
		if last {
			p.record(path, start, start)
			if _, ok := p.at[int(part.Raw.Offset)]; !ok {
				p.at[int(part.Raw.Offset)] = path // go-toml points at the key
			}
		} else {
			p.record(path, int(part.Raw.Offset), -1)
		}
	}
	// A header longer than maxKeyParts names no table of the schema: keys
	// below it are not followed.
	return path, n > maxKeyParts
}

// keyValue records a key = value pair below prefix.
func (p *positions) keyValue(prefix string, kv *unstable.Node, counts map[string]int, depth int) {
	path := prefix
	var last *unstable.Node
	parts := 0
	it := kv.Key()
	for it.Next() {
		n := it.Node()
		if parts++; parts > maxKeyParts {
			return
		}
		path = joinKey(path, string(n.Data))
		if counts[path] > 0 {
			// A dotted key through an array of tables is a TOML error
			// that go-toml reports; index it as a header would, so that
			// the path still names the last element.
			path = indexKey(path, counts[path]-1)
		}
		p.record(path, int(n.Raw.Offset), -1)
		last = n
	}
	if last == nil {
		return
	}
	// The value starts after the last key part, blanks, '=' and blanks.
	off := int(last.Raw.Offset + last.Raw.Length)
	off = skipBlanks(p.src, off)
	if off < len(p.src) && p.src[off] == '=' {
		off = skipBlanks(p.src, off+1)
	}
	p.value(path, kv.Value(), off, counts, depth)
}

// value records the value node v at path, starting at offset off (or, when
// off < 0, where the node itself says it starts).
func (p *positions) value(path string, v *unstable.Node, off int, counts map[string]int, depth int) {
	if off < 0 {
		off = p.nodeStart(v)
	}
	if off >= 0 {
		p.record(path, -1, off)
	}
	if depth >= maxValueDepth {
		return
	}
	switch v.Kind {
	case unstable.Array:
		// The first element starts at the first value after the '['; the
		// others say where they start (see nodeStart).
		first := -1
		if off >= 0 {
			first = p.skipToValue(off + 1)
		}
		i := 0
		it := v.Children()
		for it.Next() {
			c := it.Node()
			if c.Kind == unstable.Comment {
				continue
			}
			elem := indexKey(path, i)
			childOff := -1
			if i == 0 {
				childOff = first
			}
			i++
			p.value(elem, c, childOff, counts, depth+1)
			if o, ok := p.val[elem]; ok {
				p.record(elem, o, -1)
			}
		}
	case unstable.InlineTable:
		it := v.Children()
		for it.Next() {
			if c := it.Node(); c.Kind == unstable.KeyValue {
				p.keyValue(path, c, counts, depth+1)
			}
		}
	}
}

// nodeStart returns the offset where value node n starts, or -1 when it is
// not known (an empty array that is an element of another array).
func (p *positions) nodeStart(n *unstable.Node) int {
	if n.Kind != unstable.Array {
		return int(n.Raw.Offset)
	}
	first := n.Child()
	for first != nil && first.Kind == unstable.Comment {
		first = first.Next()
	}
	if first == nil {
		return -1
	}
	off := p.nodeStart(first)
	if off < 0 {
		return -1
	}
	// Step back over blanks and newlines to the opening bracket.
	for i := off - 1; i >= 0; i-- {
		switch p.src[i] {
		case ' ', '\t', '\r', '\n':
			continue
		case '[':
			return i
		}
		break
	}
	return off
}

// record sets the key and value offsets of path, keeping the first ones seen
// (a later repetition is a TOML error that go-toml reports). A negative offset
// is not recorded.
func (p *positions) record(path string, key, val int) {
	if key >= 0 {
		if _, ok := p.key[path]; !ok {
			p.key[path] = key
		}
		if _, ok := p.at[key]; !ok {
			p.at[key] = path
		}
	}
	if val >= 0 {
		if _, ok := p.val[path]; !ok {
			p.val[path] = val
		}
		if _, ok := p.at[val]; !ok {
			p.at[val] = path
		}
	}
}

// find returns the offset of path's value (or of its key when atKey), trying
// the other one when the first is not known, and then the enclosing paths.
func (p *positions) find(path string, atKey bool) (int, bool) {
	if p == nil {
		return 0, false
	}
	for {
		first, second := p.val, p.key
		if atKey {
			first, second = p.key, p.val
		}
		if off, ok := first[path]; ok {
			return off, true
		}
		if off, ok := second[path]; ok {
			return off, true
		}
		if path == "" {
			return 0, false
		}
		path = parentKey(path)
	}
}

// lineCol converts a byte offset to a 1-based line and a 1-based column
// counted in characters (UTF-8 sequences), as editors count them.
func (p *positions) lineCol(off int) (line, col int) {
	off = min(max(off, 0), len(p.src))
	i := sort.Search(len(p.lines), func(i int) bool { return p.lines[i] > off }) - 1
	return i + 1, utf8.RuneCount(p.src[p.lines[i]:off]) + 1
}

// offsetOf converts a 1-based line and a 1-based byte column (as go-toml
// reports them) to a byte offset, or -1 when they are out of range.
func (p *positions) offsetOf(line, byteCol int) int {
	if line < 1 || line > len(p.lines) || byteCol < 1 {
		return -1
	}
	off := p.lines[line-1] + byteCol - 1
	if off > len(p.src) {
		return -1
	}
	return off
}

// skipToValue returns the offset of the first byte at or after off that is
// not a blank, a line end or part of a comment.
func (p *positions) skipToValue(off int) int {
	for off < len(p.src) {
		switch p.src[off] {
		case ' ', '\t', '\r', '\n':
			off++
		case '#':
			for off < len(p.src) && p.src[off] != '\n' {
				off++
			}
		default:
			return off
		}
	}
	return off
}

func skipBlanks(b []byte, i int) int {
	for i < len(b) && (b[i] == ' ' || b[i] == '\t') {
		i++
	}
	return i
}

// joinKey appends key part k to path, quoting k when it is not a bare TOML
// key.
func joinKey(path, k string) string {
	if !isBareKey(k) {
		k = strconv.Quote(k)
	}
	if path == "" {
		return k
	}
	return path + "." + k
}

// indexKey appends the 0-based index i to path.
func indexKey(path string, i int) string {
	return path + "[" + strconv.Itoa(i) + "]"
}

func isBareKey(k string) bool {
	if k == "" {
		return false
	}
	for i := 0; i < len(k); i++ {
		c := k[i]
		if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' || c == '_') {
			return false
		}
	}
	return true
}

// parentKey returns the path that encloses path: "obstacle[1]" for
// "obstacle[1].radius", "channel.lower" for "channel.lower[3]", "" for "name".
// Quoted parts may contain '.' and '[' and are skipped over.
func parentKey(path string) string {
	cut := 0
	inQuote := false
	for i := 0; i < len(path); i++ {
		c := path[i]
		switch {
		case inQuote && c == '\\':
			i++
		case c == '"':
			inQuote = !inQuote
		case !inQuote && (c == '.' || c == '['):
			cut = i
		}
	}
	return path[:cut]
}

// errorAt builds an *Error for key, positioned at its value (or at the key
// itself when atKey), falling back to the nearest enclosing key with a known
// position.
func (s *Scenario) errorAt(key string, atKey bool, msg string, cause error) *Error {
	e := &Error{File: s.Path, Key: key, Msg: msg, Err: cause}
	if off, ok := s.pos.find(key, atKey); ok {
		e.Line, e.Col = s.pos.lineCol(off)
	}
	return e
}

// Errorf builds an *Error positioned at the value of the given key path (such
// as "obstacle[1].radius", "channel.upper[2]" or "probe[0].at"), falling back
// to the nearest enclosing key with a known position, and to no position at
// all. The message is formatted as by fmt.Errorf; an error wrapped with %w is
// kept as the Err of the result.
func (s *Scenario) Errorf(key string, format string, args ...any) *Error {
	err := fmt.Errorf(format, args...)
	return s.errorAt(key, false, err.Error(), errors.Unwrap(err))
}

// keyLess orders keys by where they appear in the source, keys without a
// position last, ties by name.
func (s *Scenario) keyLess(a, b string) bool {
	oa, okA := s.pos.key[a]
	ob, okB := s.pos.key[b]
	switch {
	case okA && okB && oa != ob:
		return oa < ob
	case okA != okB:
		return okA
	}
	return strings.Compare(a, b) < 0
}
