package report

import (
	"bufio"
	"encoding/json"
	"io"
	"strconv"

	"phipsi/solver/flow"
)

// num formats v in shortest round-trip form.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// WriteJSON writes the summary as indented JSON.
func WriteJSON(w io.Writer, s *Summary) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(s)
}

// WriteSurfaceCSV writes one wall or body distribution: s,x,y,speed,cp,pressure, one row per
// sample (walls in x order, bodies counter-clockwise from the most upstream point).
func WriteSurfaceCSV(w io.Writer, s *flow.Surface) error {
	bw := bufio.NewWriter(w)
	bw.WriteString("s,x,y,speed,cp,pressure\n")
	for _, p := range s.Points {
		for i, v := range [...]float64{p.S, p.P.X, p.P.Y, p.Speed, p.Cp, p.Pressure} {
			if i > 0 {
				bw.WriteByte(',')
			}
			bw.WriteString(num(v))
		}
		bw.WriteByte('\n')
	}
	return bw.Flush()
}

// WriteFieldCSV writes x,y,psi,phi,u,v,speed,cp,pressure for every fluid node in row-major order.
// phi is left empty when it was not computed (nil).
func WriteFieldCSV(w io.Writer, r *flow.Result, phi []float64) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	bw.WriteString("x,y,psi,phi,u,v,speed,cp,pressure\n")
	f := r.Field
	g := f.Grid
	psi := r.Sol.Psi
	buf := make([]byte, 0, 256)
	for k, ok := range f.Valid {
		if !ok {
			continue
		}
		buf = buf[:0]
		i, j := k%g.NX, k/g.NX
		buf = strconv.AppendFloat(buf, g.X(i), 'g', -1, 64)
		buf = append(buf, ',')
		buf = strconv.AppendFloat(buf, g.Y(j), 'g', -1, 64)
		buf = append(buf, ',')
		buf = strconv.AppendFloat(buf, psi[k], 'g', -1, 64)
		buf = append(buf, ',')
		if phi != nil {
			buf = strconv.AppendFloat(buf, phi[k], 'g', -1, 64)
		}
		for _, v := range [...]float64{f.U[k], f.V[k], f.Speed[k], f.Cp[k], f.Pressure[k]} {
			buf = append(buf, ',')
			buf = strconv.AppendFloat(buf, v, 'g', -1, 64)
		}
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
	}
	return bw.Flush()
}
