package report

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"
)

// WriteConsole writes the human-readable report of a run: what was solved, the key numbers per
// body, wall and probe, the warnings and the caution.
func WriteConsole(w io.Writer, s *Summary, outDir string) error {
	var b strings.Builder
	title := s.Title
	if title == "" {
		title = s.Name
	}
	fmt.Fprintf(&b, "%s  [%s]\n", title, s.Name)
	fmt.Fprintf(&b, "  grid    %d × %d nodes, spacing %s m, %d unknowns\n", s.Grid.NX, s.Grid.NY, short(s.Grid.Spacing), s.Grid.Unknowns)
	fmt.Fprintf(&b, "  solve   %s: %d solve(s), %d iterations in all, worst residual %.2g, %.2f s (+ %.2f s set-up)\n",
		s.Solve.Method, s.Solve.Solves, s.Solve.Iterations, s.Solve.Residual, s.Solve.Seconds, s.Solve.SetupSeconds)
	fmt.Fprintf(&b, "  flow    Q = %s m²/s, inlet %s m/s, outlet %s m/s, ½ρU² = %s Pa, peak %s m/s (Mach %.3f)\n",
		short(s.Flow.Rate), short(s.Flow.InletSpeed), short(s.Flow.OutletSpeed), short(s.Flow.DynamicPressure),
		short(s.Flow.MaxSpeed), s.Flow.MaxMach)
	if s.Flow.PhiPsiMismatch != nil {
		fmt.Fprintf(&b, "  check   |V(φ) − V(ψ)|/U ≤ %.2g away from walls\n", *s.Flow.PhiPsiMismatch)
	}
	b.WriteString("\n")
	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	if len(s.Obstacles) > 0 {
		fmt.Fprintln(tw, "  body\tψ m²/s\tΓ m²/s\tV_max/U\tat x, y m\tCp_min\tFx N/m\tFy N/m\t−ρUΓ N/m\tblockage\tε classical\tcells across\t")
		for _, o := range s.Obstacles {
			eps := "–"
			if o.Blockage.ClassicalIncrement != nil {
				eps = fmt.Sprintf("%.4f", *o.Blockage.ClassicalIncrement)
			}
			name := o.Name
			if o.Kutta {
				name += " (Kutta)"
			}
			eb := s.ErrorBands
			fmt.Fprintf(tw, "  %s\t%.5g\t%.4g%s\t%.4f%s\t%s\t%.4f%s\t%.3g\t%.4g%s\t%.4g\t%.1f %%\t%s\t%.0f\t\n", name, o.Psi,
				clean(o.Circulation), BandText(eb, o.Name+".circulation", 1),
				o.MaxSpeed/s.Flow.InletSpeed, BandText(eb, o.Name+".max_speed", 1/s.Flow.InletSpeed), pair(o.MaxSpeedAt),
				o.MinCp, BandText(eb, o.Name+".min_cp", 1), clean(o.Force[0]), clean(o.Force[1]), BandText(eb, o.Name+".lift", 1),
				clean(o.LiftKuttaJoukowski), 100*o.Blockage.Ratio, eps, o.CellsAcross)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		b.WriteString("  (Fy is integrated from the surface pressure; in a channel it differs from −ρUΓ because the walls' images change the lift.)\n")
		if bl := s.Blockage; bl != nil {
			fmt.Fprintf(&b, "  all bodies block %.1f %% of the section at x = %.4g m; wall speed there %+.2f %% over the empty channel\n",
				100*bl.Ratio, bl.X, 100*bl.WallIncrement)
		}
		b.WriteString("\n")
	}
	fmt.Fprintln(tw, "  wall\tCp_min\tat x, y m\tCp_max\tat x, y m\tmax dCp/dx 1/m\tat x m\t")
	for _, wl := range s.Walls {
		fmt.Fprintf(tw, "  %s\t%.4f%s\t%s\t%.4f\t%s\t%.3g\t%.4g\t\n", wl.Name, clean(wl.MinCp), BandText(s.ErrorBands, wl.Name+".min_cp", 1),
			pair(wl.MinCpAt), clean(wl.MaxCp), pair(wl.MaxCpAt),
			wl.MaxAdverseGradient, wl.MaxAdverseGradientAt[0])
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, wl := range s.Walls {
		for _, st := range wl.AdverseStretches {
			fmt.Fprintf(&b, "  %s wall: pressure rises from x = %.4g to %.4g m (Cp up by %.3f, steepest %.3g per m)\n", wl.Name, st.X0, st.X1, st.CpRise, st.MaxGradient)
		}
	}
	if len(s.Probes) > 0 {
		b.WriteString("\n")
		fmt.Fprintln(tw, "  probe\tat x, y m\tu m/s\tv m/s\tspeed m/s\tCp\tp Pa\tp_in − p Pa\tk = Δp/(½ρV²)\t")
		for _, p := range s.Probes {
			k := "–"
			if p.K != nil {
				k = fmt.Sprintf("%.4f", *p.K)
			}
			fmt.Fprintf(tw, "  %s\t%s\t%.4g\t%.4g\t%.4g%s\t%.4f%s\t%.6g\t%.4g\t%s\t\n", p.Name, pair(p.At), p.U, clean(p.V),
				p.Speed, BandText(s.ErrorBands, "probe."+p.Name+".speed", 1), clean(p.Cp), BandText(s.ErrorBands, "probe."+p.Name+".cp", 1),
				p.Pressure, clean(p.DeltaP), k)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
	}
	if c := s.Cavitation; c != nil {
		fmt.Fprintf(&b, "\ncavitation  σ = %.4g, lowest Cp %.4f on %s at %s, margin σ + Cp_min = %.4g\n", c.Sigma, c.MinCp, c.MinCpOn, pair(c.MinCpAt), c.Margin)
	}
	writeBandNotes(&b, s.ErrorBands)
	if len(s.Warnings) > 0 {
		b.WriteString("\nwarnings\n")
		for _, m := range s.Warnings {
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

// clean rounds values that are zero to round-off, and those that would print as −0.0000, to
// zero.
func clean(v float64) float64 {
	if math.Abs(v) < 5e-5 {
		return 0
	}
	return v
}

func short(v float64) string { return fmt.Sprintf("%.4g", v) }

func pair(p Point) string { return fmt.Sprintf("%.4g, %.4g", p[0], p[1]) }
