package adjust_test

import (
	"fmt"
	"testing"

	"cairn/internal/adjust"
	"cairn/internal/netgen"
)

// BenchmarkSolveNetwork adjusts generated networks of 10k, 100k and 1M
// points (every standard deviation and residual included) and reports the
// phases in seconds per adjustment. Targets and results: docs/performance.md.
func BenchmarkSolveNetwork(b *testing.B) {
	for _, points := range []int{10_000, 100_000, 1_000_000} {
		b.Run(fmt.Sprintf("points=%d", points), func(b *testing.B) {
			g := netgen.Generate(netgen.Options{Points: points, Seed: 1})
			net := adjust.NewNetwork(len(g.Sections))
			for _, s := range g.Sections {
				net.AddSection(adjust.Section{From: s.From, To: s.To, DhM: s.DhM, LengthKm: s.LengthKm})
			}
			for _, i := range g.Held {
				net.AddHeld(adjust.HeldMark{Point: g.Points[i], HeightM: g.Truth[i]})
			}
			var sum adjust.NetworkTimings
			b.ResetTimer()
			for b.Loop() {
				sol, err := adjust.SolveNetwork(net, adjust.NetworkOptions{})
				if err != nil {
					b.Fatal(err)
				}
				t := sol.Stats.Timings
				sum.Reduce += t.Reduce
				sum.Order += t.Order
				sum.Factor += t.Factor
				sum.Solve += t.Solve
				sum.Inverse += t.Inverse
				sum.Back += t.Back
			}
			n := float64(b.N)
			b.ReportMetric(sum.Reduce.Seconds()/n, "reduce-s")
			b.ReportMetric(sum.Order.Seconds()/n, "order-s")
			b.ReportMetric(sum.Factor.Seconds()/n, "factor-s")
			b.ReportMetric(sum.Solve.Seconds()/n, "solve-s")
			b.ReportMetric(sum.Inverse.Seconds()/n, "inverse-s")
			b.ReportMetric(sum.Back.Seconds()/n, "back-s")
		})
	}
}
