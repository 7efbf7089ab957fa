package scenario

import (
	"strings"
	"testing"
)

const buildBase = `name = "b"
[fluid]
density = 1000
[inflow]
speed = 1
[channel]
length = 4
%CHANNEL%
[grid]
spacing = 0.02
%REST%
`

func scenarioText(channel, rest string) string {
	if channel == "" {
		channel = "height = 1"
	}
	return strings.NewReplacer("%CHANNEL%", channel, "%REST%", rest).Replace(buildBase)
}

// TestPlanGeometryErrors: geometric mistakes are refused with the key they belong to.
func TestPlanGeometryErrors(t *testing.T) {
	circle := func(name, center, radius string) string {
		return "[[obstacle]]\nname = \"" + name + "\"\nshape = \"circle\"\ncenter = " + center + "\nradius = " + radius + "\n"
	}
	cases := []struct {
		name, channel, rest, want string
	}{
		{"outside", "", circle("c", "[2, 1.5]", "0.2"), "obstacle[0]: \"c\" touches or crosses the upper wall"},
		{"touching wall", "", circle("c", "[2, 0.2]", "0.2"), "obstacle[0]: \"c\" touches or crosses the lower wall"},
		{"beyond outlet", "", circle("c", "[3.9, 0.5]", "0.2"), "obstacle[0]: \"c\" reaches x ="},
		{"overlapping", "", circle("a", "[2, 0.5]", "0.2") + circle("b", "[2.3, 0.5]", "0.2"), "obstacle[1]: \"b\" overlaps \"a\""},
		{"self-intersecting", "", "[[obstacle]]\nname = \"p\"\nshape = \"polygon\"\npoints = [[1, 0.2], [2, 0.8], [2, 0.2], [1, 0.8]]\n", "obstacle[0]: polygon edges"},
		{"walls cross", "lower = [[0, 0], [2, 0.6], [4, 0]]\nupper = [[0, 1], [2, 0.5], [4, 1]]", "", "channel.upper: the walls touch or cross"},
		{"probe in body", "", circle("c", "[2, 0.5]", "0.2") + "[[probe]]\nname = \"p\"\nat = [2, 0.5]\n", "probe[0].at: (2, 0.5) is not in the fluid"},
		{"probe outside", "", "[[probe]]\nname = \"p\"\nat = [5, 0.5]\n", "probe[0].at: (5, 0.5) is not in the fluid"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s, err := Parse("b.toml", []byte(scenarioText(tc.channel, tc.rest)))
			if err != nil {
				t.Fatalf("parse: %v", err)
			}
			_, err = s.Plan(0)
			if err == nil {
				t.Fatalf("Plan accepted the scenario, want an error containing %q", tc.want)
			}
			if _, ok := err.(*Error); !ok || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %q (%T), want an *Error containing %q", err, err, tc.want)
			}
		})
	}
}

// TestPlanGrid: cells_across sets the spacing from the inlet height, the memory estimate is
// positive, and the bundled-style scenario plans without error.
func TestPlanGridFromCells(t *testing.T) {
	s, err := Parse("b.toml", []byte(strings.Replace(scenarioText("", ""), "spacing = 0.02", "cells_across = 50", 1)))
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.Plan(0)
	if err != nil {
		t.Fatal(err)
	}
	if p.Grid.H != 0.02 || p.Grid.NX != 201 || p.Grid.NY != 51 || p.Memory <= 0 {
		t.Errorf("grid %+v, memory %d; want spacing 0.02, 201 × 51 nodes", p.Grid, p.Memory)
	}
}
