// Package bc describes, as data, what each boundary of a channel imposes on the stream function
// ψ (and, through it, on the velocity potential φ): the inlet's uniform inflow (ψ rising linearly
// across it), the walls' constant ψ (0 on the lower wall, the flow rate Q on the upper), the
// outlet's zero streamwise gradient, and one condition per body that fixes its unknown constant ψ:
// a given circulation (zero by default) or the Kutta condition at a sharp trailing edge.
//
// New validates a set of conditions against a mesh. The package computes nothing else: the
// solver reads a Set to assemble and close its systems.
package bc
