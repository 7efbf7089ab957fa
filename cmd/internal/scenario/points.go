package scenario

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"strconv"
	"strings"
	"unicode/utf8"
)

// maxFileBytes bounds the size of a scenario or points file that is read:
// real ones are kilobytes, and the bound keeps a wrong path (a device, a
// huge log) from filling memory.
const maxFileBytes = 16 << 20

var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

// readFile reads at most maxFileBytes from the named file. When regular is
// true, anything but a regular file (a directory, a device, a pipe) is
// refused before it is opened, so that reading cannot block.
func readFile(name string, regular bool) ([]byte, error) {
	if regular {
		fi, err := os.Stat(name)
		if err != nil {
			return nil, err
		}
		if !fi.Mode().IsRegular() {
			return nil, errors.New("not a regular file")
		}
	}
	f, err := os.Open(name)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, maxFileBytes+1))
	if err != nil {
		return nil, err
	}
	if len(data) > maxFileBytes {
		return nil, fmt.Errorf("larger than %d MiB", maxFileBytes>>20)
	}
	return data, nil
}

// causeText returns the message of err without the operation and path that
// an *fs.PathError adds, since the caller names the file itself.
func causeText(err error) string {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}

// parsePoints reads polygon points from CSV text: one "x,y" row per point,
// blank lines and '#' comments (to the end of the line) ignored, and an
// optional header, which is a first row none of whose fields is a number.
// A UTF-8 BOM and CRLF line ends are accepted. Numbers must be finite.
//
// A bad row is reported as an *Error with File set to file, Line and Col at
// the offending field, and Key set to key (the scenario key that names the
// file, such as "obstacle[0].points_file").
func parsePoints(file, key string, data []byte) ([][2]float64, error) {
	data = bytes.TrimPrefix(data, utf8BOM)
	var pts [][2]float64
	first := true
	for lineNo := 1; len(data) > 0; lineNo++ {
		var line []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			line, data = data[:i], data[i+1:]
		} else {
			line, data = data, nil
		}
		if i := bytes.IndexByte(line, '#'); i >= 0 {
			line = line[:i]
		}
		line = bytes.TrimSuffix(line, []byte{'\r'})
		if len(bytes.TrimSpace(line)) == 0 {
			continue
		}
		if !utf8.Valid(line) {
			return nil, &Error{File: file, Line: lineNo, Key: key, Msg: "row is not valid UTF-8 text"}
		}
		fields := strings.Split(string(line), ",")
		cols := make([]int, len(fields)) // 1-based character column of each field
		col := 1
		for i, f := range fields {
			lead := len(f) - len(strings.TrimLeft(f, " \t"))
			cols[i] = col + utf8.RuneCountInString(f[:lead])
			col += utf8.RuneCountInString(f) + 1
			fields[i] = strings.TrimSpace(f)
		}
		isHeader := first
		for _, f := range fields {
			if _, err := strconv.ParseFloat(f, 64); err == nil {
				isHeader = false
			}
		}
		first = false
		if isHeader {
			continue
		}
		if len(fields) != 2 {
			return nil, &Error{File: file, Line: lineNo, Col: 1, Key: key,
				Msg: fmt.Sprintf("row must be x,y (2 numbers), got %d %s", len(fields), plural(len(fields), "field", "fields"))}
		}
		var p [2]float64
		for i, f := range fields {
			v, err := strconv.ParseFloat(f, 64)
			switch {
			case err != nil && errors.Is(err, strconv.ErrRange):
				return nil, &Error{File: file, Line: lineNo, Col: cols[i], Key: key,
					Msg: fmt.Sprintf("%s must be a finite number, got %s (out of range)", "xy"[i:i+1], quoteShort(f))}
			case err != nil:
				return nil, &Error{File: file, Line: lineNo, Col: cols[i], Key: key,
					Msg: fmt.Sprintf("%s must be a number, got %s", "xy"[i:i+1], quoteShort(f))}
			case math.IsNaN(v) || math.IsInf(v, 0):
				return nil, &Error{File: file, Line: lineNo, Col: cols[i], Key: key,
					Msg: fmt.Sprintf("%s must be a finite number, got %s", "xy"[i:i+1], quoteShort(f))}
			}
			p[i] = v
		}
		pts = append(pts, p)
	}
	return pts, nil
}
