package report

import (
	"bytes"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"phipsi/solver"
)

// study builds the reported study of values on the spacings hs.
func study(name, unit string, hs, vs []float64) QuantityStudy {
	return NewQuantityStudy(name, unit, vs, solver.GCI(hs, vs, &solver.GCISettings{FormalOrder: 2}))
}

var testSpacings = []float64{0.005, 0.01, 0.02}

// testConvergence is a study with one quantity of each kind of outcome.
func testConvergence() *Convergence {
	hs := testSpacings
	c := &Convergence{Name: "pier", Title: "a pier", Version: "test", Ratio: 2, Spacings: hs, Method: GCIMethod,
		Warnings: []string{}, Caution: Caution}
	for i, h := range hs {
		c.Grids = append(c.Grids, ConvergenceGrid{Spacing: h, NX: 100 >> i, NY: 50 >> i, Unknowns: 5000 >> (2 * i), Iterations: 10})
	}
	c.Quantities = []QuantityStudy{
		study("pier.max_speed", "m/s", hs, []float64{1.7 - 30*hs[0]*hs[0], 1.7 - 30*hs[1]*hs[1], 1.7 - 30*hs[2]*hs[2]}),
		study("pier.lift", "N/m", hs, []float64{0.01, -0.02, 0.015}),
		study("lower.min_cp", "", hs, []float64{-0.5, -0.6, -0.65}),
		study("pier.circulation", "m²/s", hs, []float64{0, 0, 0}),
	}
	return c
}

func TestNewQuantityStudy(t *testing.T) {
	c := testConvergence()
	cases := []struct {
		q       QuantityStudy
		status  solver.GCIStatus
		trusted bool
		order   bool // observed_order reported
		note    string
	}{
		{c.Quantities[0], solver.GCIMonotone, true, true, ""},
		{c.Quantities[1], solver.GCIOscillatory, false, false, "oscillate"},
		{c.Quantities[2], solver.GCIDiverging, false, true, "grow"},
		{c.Quantities[3], solver.GCIUnchanged, true, false, "round-off"},
	}
	for _, tc := range cases {
		t.Run(tc.q.Name, func(t *testing.T) {
			q := tc.q
			if q.Status != string(tc.status) || q.Trusted() != tc.trusted {
				t.Errorf("status %q, trusted %v; want %q, %v", q.Status, q.Trusted(), tc.status, tc.trusted)
			}
			for name, v := range map[string]*float64{"extrapolated": q.Extrapolated, "gci_fine": q.GCIFine, "band": q.Band} {
				if (v != nil) != tc.trusted && !(name == "gci_fine" && q.Values[0] == 0) {
					t.Errorf("%s present %v, want %v", name, v != nil, tc.trusted)
				}
			}
			if (q.ObservedOrder != nil) != tc.order {
				t.Errorf("observed order present %v, want %v", q.ObservedOrder != nil, tc.order)
			}
			if !strings.Contains(q.Note, tc.note) {
				t.Errorf("note %q, want it to mention %q", q.Note, tc.note)
			}
		})
	}
	// A diverging study reports its (negative) order: here the differences halve as h halves.
	if p := c.Quantities[2].ObservedOrder; p == nil || math.Abs(*p+1) > 1e-9 {
		t.Errorf("diverging order %v, want −1", p)
	}
}

func TestConvergenceJSON(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteConvergenceJSON(&buf, testConvergence()); err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(buf.Bytes(), []byte("NaN")) || bytes.Contains(buf.Bytes(), []byte("Inf")) {
		t.Fatalf("convergence.json holds a NaN or Inf:\n%s", buf.String())
	}
	var got map[string]any
	if err := json.Unmarshal(buf.Bytes(), &got); err != nil {
		t.Fatal(err)
	}
	// The keys DESIGN.md names for convergence.json.
	for _, k := range []string{"spacings", "quantities"} {
		if _, ok := got[k]; !ok {
			t.Errorf("convergence.json lacks %q", k)
		}
	}
	if hs := got["spacings"].([]any); len(hs) != 3 || hs[0].(float64) != testSpacings[0] {
		t.Errorf("spacings %v, want %v finest first", hs, testSpacings)
	}
	qs := got["quantities"].([]any)
	for _, q := range qs {
		m := q.(map[string]any)
		for _, k := range []string{"name", "values", "observed_order", "extrapolated", "gci_fine"} {
			if _, ok := m[k]; !ok {
				t.Errorf("quantity %v lacks %q", m["name"], k)
			}
		}
	}
	lift := qs[1].(map[string]any)
	if lift["gci_fine"] != nil || lift["band"] != nil || lift["extrapolated"] != nil {
		t.Errorf("oscillating quantity reports a band: %v", lift)
	}
	if speed := qs[0].(map[string]any); speed["gci_fine"] == nil {
		t.Errorf("monotone quantity has no gci_fine: %v", speed)
	}
}

func TestNumbersJSON(t *testing.T) {
	in := Numbers{1.5, math.NaN(), math.Inf(-1), -2e-300}
	raw, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	if string(raw) != "[1.5,null,null,-2e-300]" {
		t.Errorf("JSON %s, want [1.5,null,null,-2e-300]", raw)
	}
	var back Numbers
	if err := json.Unmarshal(raw, &back); err != nil {
		t.Fatal(err)
	}
	if len(back) != 4 || back[0] != 1.5 || !math.IsNaN(back[1]) || !math.IsNaN(back[2]) || back[3] != -2e-300 {
		t.Errorf("read back %v, want [1.5 NaN NaN -2e-300]", back)
	}
	// A study with a value that is not finite writes null there and no band.
	q := study("x", "", testSpacings, []float64{1, math.NaN(), 1.2})
	raw, err = json.Marshal(q)
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(raw, []byte("NaN")) || q.Status != string(solver.GCINotFinite) || q.Trusted() {
		t.Errorf("study of a NaN value: %s", raw)
	}
}

func TestConvergenceCSV(t *testing.T) {
	c := testConvergence()
	c.Quantities[0].Name = `odd,"name"`
	var buf bytes.Buffer
	if err := WriteConvergenceCSV(&buf, c); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(buf.String()), "\n")
	if lines[0] != ConvergenceCSVHeader {
		t.Errorf("header %q, want %q", lines[0], ConvergenceCSVHeader)
	}
	if got, want := len(lines)-1, len(c.Quantities)*len(c.Spacings); got != want {
		t.Errorf("%d rows, want %d (one per quantity and grid)", got, want)
	}
	if !strings.HasPrefix(lines[1], `"odd,""name""",m/s,1,0.005,`) {
		t.Errorf("first row %q: want the name quoted, level 1 and the finest spacing", lines[1])
	}
	// The oscillating lift: order, extrapolation, GCI and band empty.
	if want := "0.01,,,,,oscillatory"; !strings.HasSuffix(lines[4], want) {
		t.Errorf("row %q, want it to end %q", lines[4], want)
	}
}

func TestConvergenceConsole(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteConvergenceConsole(&buf, testConvergence(), "out"); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, want := range []string{"pier.max_speed", "monotone", "! pier.lift: the values oscillate", "! lower.min_cp: the differences",
		"grid 3  spacing 0.02 m", "outputs in out", "screening aid"} {
		if !strings.Contains(out, want) {
			t.Errorf("console table lacks %q:\n%s", want, out)
		}
	}
	// Only studies without a band get a note line.
	if strings.Contains(out, "! pier.max_speed") {
		t.Errorf("a trusted study got a warning line:\n%s", out)
	}
}

func TestBandsInConsoleReport(t *testing.T) {
	c := testConvergence()
	s := &Summary{Name: "pier", Flow: FlowInfo{InletSpeed: 0.5},
		Obstacles:  []ObstacleInfo{{Name: "pier", MaxSpeed: c.Quantities[0].Values[0], MinCp: -3.1, Force: Point{0, 0.01}}},
		Walls:      []WallInfo{{Name: "lower", MinCp: -0.5}, {Name: "upper", MinCp: -0.5}},
		ErrorBands: &ErrorBands{Ratio: 2, Spacings: c.Spacings, Quantities: c.Quantities}}
	var buf bytes.Buffer
	if err := WriteConsole(&buf, s, ""); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	// V_max/U with its band in the same units: band / U.
	band := *c.Quantities[0].Band / 0.5
	if want := " ± " + sig2(band); !strings.Contains(out, want) {
		t.Errorf("report lacks the peak-speed band %q:\n%s", want, out)
	}
	for _, want := range []string{"± ?", "? pier.lift:", "? lower.min_cp:", "grid error"} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q:\n%s", want, out)
		}
	}
	// Without bands the report has no ± at all.
	s.ErrorBands = nil
	buf.Reset()
	if err := WriteConsole(&buf, s, ""); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(buf.String(), "±") {
		t.Errorf("report without error bands shows ±:\n%s", buf.String())
	}
}

func TestBandText(t *testing.T) {
	c := testConvergence()
	e := &ErrorBands{Quantities: c.Quantities}
	cases := []struct {
		e     *ErrorBands
		name  string
		scale float64
		want  string
	}{
		{nil, "pier.max_speed", 1, ""},
		{e, "nothing", 1, ""},
		{e, "pier.lift", 1, " ± ?"},
		{e, "pier.circulation", 1, " ± 0"},
		{e, "pier.max_speed", 2, " ± " + sig2(2**c.Quantities[0].Band)},
	}
	for _, tc := range cases {
		if got := BandText(tc.e, tc.name, tc.scale); got != tc.want {
			t.Errorf("BandText(%s, ×%g) = %q, want %q", tc.name, tc.scale, got, tc.want)
		}
	}
}
