package report

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"

	"phipsi/solver"
)

// GCIMethod names the estimate behind every band phipsi reports.
const GCIMethod = "Grid Convergence Index (Roache 1994; Celik et al., J. Fluids Eng. 130, 078001, 2008): " +
	"observed order p from the three finest grids, Richardson extrapolation with p, band = Fs·|f1 − f2|/(r21^q − 1) " +
	"with q the smaller of p and the schemes' formal order 2 and Fs = 1.25 (3 with two grids); " +
	"no band for oscillating or diverging values or an observed order outside [0.5, 4]"

// Convergence is the content of convergence.json. Its keys are a contract: add, never rename.
type Convergence struct {
	Name    string `json:"name"`
	Title   string `json:"title"`
	Version string `json:"version"`
	// Ratio is the refinement ratio asked for; the grids' own spacings give the actual ones.
	Ratio float64 `json:"ratio"`
	// Spacings are the grid spacings, finest first, m.
	Spacings   []float64         `json:"spacings"`
	Grids      []ConvergenceGrid `json:"grids"`
	Method     string            `json:"method"`
	Quantities []QuantityStudy   `json:"quantities"`
	Warnings   []string          `json:"warnings"`
	Caution    string            `json:"caution"`
	// Studies are the solver's estimates behind Quantities, one each, for the chart.
	Studies []solver.GCIResult `json:"-"`
}

// ConvergenceGrid describes one grid of a study.
type ConvergenceGrid struct {
	Spacing    float64 `json:"spacing"`
	NX         int     `json:"nx"`
	NY         int     `json:"ny"`
	Unknowns   int     `json:"unknowns"`
	Iterations int     `json:"iterations"`
	Seconds    float64 `json:"seconds"`
}

// QuantityStudy is the grid-convergence study of one key number. The estimate's numbers are
// null where the study has no honest band (see Status and Note).
type QuantityStudy struct {
	Name string `json:"name"`
	Unit string `json:"unit"`
	// Values are the quantity on each grid, finest first.
	Values Numbers `json:"values"`
	// ObservedOrder is p (negative when the values diverge; null when oscillating or
	// undefined; the assumed order with two grids).
	ObservedOrder *float64 `json:"observed_order"`
	Extrapolated  *float64 `json:"extrapolated"`
	// GCIFine is the band relative to the finest value (0.01 = 1 %), Band the same in the
	// quantity's units: the grid-independent value lies in values[0] ± band.
	GCIFine *float64 `json:"gci_fine"`
	Band    *float64 `json:"band"`
	// BandOrder is the order the band was computed with: the observed one, or the scheme's
	// formal order when the observed one is larger.
	BandOrder         *float64 `json:"band_order"`
	ApproxError       *float64 `json:"approx_error"`
	ExtrapolatedError *float64 `json:"extrapolated_error"`
	SafetyFactor      float64  `json:"safety_factor"`
	// HalfRange is half the spread of the values over all grids, in the quantity's units.
	HalfRange float64 `json:"half_range"`
	// Status is one of monotone, assumed-order, unchanged (trusted) or oscillatory, diverging,
	// order-out-of-range, not-finite (no band).
	Status string `json:"status"`
	Note   string `json:"note,omitempty"`
}

// Numbers is a list of numbers whose non-finite entries are written to JSON as null (and read
// back as NaN), so that NaN never appears in an output.
type Numbers []float64

// MarshalJSON writes the numbers in shortest round-trip form, null for NaN or ±Inf.
func (ns Numbers) MarshalJSON() ([]byte, error) {
	if ns == nil {
		return []byte("null"), nil
	}
	b := []byte{'['}
	for i, v := range ns {
		if i > 0 {
			b = append(b, ',')
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			b = append(b, "null"...)
			continue
		}
		b = strconv.AppendFloat(b, v, 'g', -1, 64)
	}
	return append(b, ']'), nil
}

// UnmarshalJSON reads numbers written by MarshalJSON.
func (ns *Numbers) UnmarshalJSON(data []byte) error {
	var ps []*float64
	if err := json.Unmarshal(data, &ps); err != nil {
		return err
	}
	if ps == nil {
		*ns = nil
		return nil
	}
	out := make(Numbers, len(ps))
	for i, p := range ps {
		out[i] = math.NaN()
		if p != nil {
			out[i] = *p
		}
	}
	*ns = out
	return nil
}

// Trusted reports whether the study carries a band.
func (q *QuantityStudy) Trusted() bool { return q.Band != nil }

// NewQuantityStudy turns a solver.GCIResult into the reported study of the quantity name with
// the given values (finest first).
func NewQuantityStudy(name, unit string, values []float64, g solver.GCIResult) QuantityStudy {
	q := QuantityStudy{Name: name, Unit: unit, Values: append(Numbers(nil), values...),
		SafetyFactor: g.SafetyFactor, HalfRange: finiteOr0(g.HalfRange), Status: string(g.Status)}
	if g.Status != solver.GCIOscillatory {
		q.ObservedOrder = finite(g.Order)
	}
	if g.Status.Trusted() {
		q.Extrapolated = finite(g.Extrapolated)
		q.GCIFine = finite(g.GCIFine)
		q.Band = finite(g.Band)
		q.BandOrder = finite(g.BandOrder)
		q.ApproxError = finite(g.ApproxError)
		q.ExtrapolatedError = finite(g.ExtrapolatedError)
	}
	switch g.Status {
	case solver.GCIOscillatory:
		q.Note = fmt.Sprintf("the values oscillate from grid to grid (within ± %s): no band", sig2(g.HalfRange))
	case solver.GCIDiverging:
		q.Note = "the differences between grids grow as the grid is refined: no band; refine further"
	case solver.GCIOrderOutOfRange:
		if math.IsInf(g.Order, 1) {
			q.Note = "the two finest grids agree but the coarsest does not: no order fits, no band"
		} else {
			q.Note = fmt.Sprintf("observed order %.2f lies outside [%g, %g]: the grids are not in the asymptotic range, no band",
				g.Order, solver.DefaultMinOrder, solver.DefaultMaxOrder)
		}
	case solver.GCINotFinite:
		q.Note = "a value is not finite: no band"
	case solver.GCIUnchanged:
		q.Note = "the same on every grid to within round-off"
	case solver.GCIAssumedOrder:
		q.Note = fmt.Sprintf("two grids: order assumed %g, safety factor %g", g.Order, g.SafetyFactor)
	}
	if g.Status.Trusted() && q.GCIFine == nil && q.Band != nil {
		q.Note = "the finest value is zero: the band is absolute only"
	}
	return q
}

func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func finiteOr0(v float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0
	}
	return v
}

// WriteConvergenceJSON writes the study as indented JSON.
func WriteConvergenceJSON(w io.Writer, c *Convergence) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(c)
}

// ConvergenceCSVHeader is the header of convergence.csv: one row per quantity and grid (level
// 1 the finest), the study's numbers repeated on each row of a quantity and empty where the
// study has no band.
const ConvergenceCSVHeader = "quantity,unit,level,spacing,value,observed_order,extrapolated,gci_fine,band,status"

// WriteConvergenceCSV writes convergence.csv (see ConvergenceCSVHeader).
func WriteConvergenceCSV(w io.Writer, c *Convergence) error {
	bw := bufio.NewWriter(w)
	bw.WriteString(ConvergenceCSVHeader + "\n")
	opt := func(v *float64) string {
		if v == nil || math.IsNaN(*v) || math.IsInf(*v, 0) {
			return ""
		}
		return num(*v)
	}
	for _, q := range c.Quantities {
		tail := strings.Join([]string{opt(q.ObservedOrder), opt(q.Extrapolated), opt(q.GCIFine), opt(q.Band), q.Status}, ",")
		for i, v := range q.Values {
			h := math.NaN()
			if i < len(c.Spacings) {
				h = c.Spacings[i]
			}
			fmt.Fprintf(bw, "%s,%s,%d,%s,%s,%s\n", csvField(q.Name), csvField(q.Unit), i+1, opt(&h), opt(&v), tail)
		}
	}
	return bw.Flush()
}

// csvField quotes s when it holds a comma, quote or line break (RFC 4180).
func csvField(s string) string {
	if !strings.ContainsAny(s, ",\"\r\n") {
		return s
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

// WriteConvergenceConsole writes the human-readable table of a study: the grids, each quantity's
// values finest first, order, extrapolated value, band, and why a quantity has none.
func WriteConvergenceConsole(w io.Writer, c *Convergence, outDir string) error {
	var b strings.Builder
	title := c.Title
	if title == "" {
		title = c.Name
	}
	fmt.Fprintf(&b, "%s  [%s]: grid convergence\n", title, c.Name)
	for i, g := range c.Grids {
		fmt.Fprintf(&b, "  grid %d  spacing %s m, %d × %d nodes, %d unknowns, %d iterations, %.2f s\n",
			i+1, short(g.Spacing), g.NX, g.NY, g.Unknowns, g.Iterations, g.Seconds)
	}
	b.WriteString("\n")
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	head := []string{"  quantity", "unit"}
	for i := range c.Spacings {
		head = append(head, fmt.Sprintf("grid %d", i+1))
	}
	head = append(head, "order", "extrapolated", "± band", "GCI_fine", "status")
	fmt.Fprintln(tw, strings.Join(head, "\t")+"\t")
	var notes []string
	for _, q := range c.Quantities {
		row := []string{"  " + q.Name, q.Unit}
		for _, v := range q.Values {
			row = append(row, num6(v))
		}
		row = append(row, optf(q.ObservedOrder, "%.2f"), optNum(q.Extrapolated, num6), optNum(q.Band, sig2), optPct(q.GCIFine), q.Status)
		fmt.Fprintln(tw, strings.Join(row, "\t")+"\t")
		if !q.Trusted() && q.Note != "" {
			notes = append(notes, fmt.Sprintf("  ! %s: %s", q.Name, q.Note))
		}
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	b.WriteString("\n  band: ")
	b.WriteString(GCIMethod)
	b.WriteString("\n")
	for _, n := range notes {
		b.WriteString(n + "\n")
	}
	if len(c.Warnings) > 0 {
		b.WriteString("\nwarnings\n")
		for _, m := range c.Warnings {
			fmt.Fprintf(&b, "  ! %s\n", m)
		}
	}
	if outDir != "" {
		fmt.Fprintf(&b, "\noutputs in %s\n", outDir)
	}
	b.WriteString("\ncaution: ")
	b.WriteString(Caution)
	b.WriteString("\n")
	_, err := io.WriteString(w, b.String())
	return err
}

func num6(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }

func sig2(v float64) string { return strconv.FormatFloat(v, 'g', 2, 64) }

func optf(v *float64, format string) string {
	if v == nil {
		return "–"
	}
	return fmt.Sprintf(format, *v)
}

func optNum(v *float64, f func(float64) string) string {
	if v == nil {
		return "–"
	}
	return f(*v)
}

func optPct(v *float64) string {
	if v == nil {
		return "–"
	}
	return fmt.Sprintf("%.2g %%", 100**v)
}

// BandText returns " ± band" for the quantity name of e, scaled by scale (for numbers printed
// in units of the reference speed, say), with the band to two significant digits; " ± ?" when
// the study has no honest band; "" when e is nil or has no such quantity.
func BandText(e *ErrorBands, name string, scale float64) string {
	if e == nil {
		return ""
	}
	q := e.Find(name)
	if q == nil {
		return ""
	}
	if q.Band == nil {
		return " ± ?"
	}
	return " ± " + sig2(*q.Band*scale)
}

// writeBandNotes writes the footnote of a console report with error bands: how they were found
// and which key numbers have none, and why.
func writeBandNotes(b *strings.Builder, e *ErrorBands) {
	if e == nil {
		return
	}
	hs := make([]string, len(e.Spacings))
	for i, h := range e.Spacings {
		hs[i] = short(h)
	}
	fmt.Fprintf(b, "\ngrid error  ± is the band of each number from grids of spacing %s m (ratio %g): %s\n",
		strings.Join(hs, ", "), e.Ratio, GCIMethod)
	for _, q := range e.Quantities {
		if !q.Trusted() {
			fmt.Fprintf(b, "  ? %s: %s\n", q.Name, q.Note)
		}
	}
}
