package adjust_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"cairn/internal/adjust"
)

// wideNetwork is randomNetwork with cofactors spread over six orders of
// magnitude (lengths 10⁻³ to 10³ km, weight ratios up to 10⁶) and a second,
// unheld part joined to the first by one bridge section, which has no
// redundancy: its adjusted difference must be its observed one exactly.
// It returns the index of the bridge section.
func wideNetwork(rng *rand.Rand) ([]adjust.Section, []adjust.HeldMark, int) {
	secs, held := randomNetwork(rng)
	far, _ := randomNetwork(rng)
	for _, s := range far {
		s.From, s.To = "X"+s.From, "X"+s.To
		secs = append(secs, s)
	}
	bridge := len(secs)
	secs = append(secs, adjust.Section{From: "M0", To: "XM0", DhM: 41.2345, LengthKm: 1, Setups: 1})
	for i := range secs {
		secs[i].LengthKm = math.Pow(10, -3+6*rng.Float64())
		secs[i].Setups = 1 + rng.IntN(1000000)
	}
	return secs, held, bridge
}

// TestHeightsDoNotDependOnDatumLevel: moving every held height by the same
// amount moves every adjusted height by that amount and changes nothing
// else. This is exact in the model (heights enter the observation equations
// only through differences, and a held height as H = Hₕ + v), so the test
// asks the arithmetic for it: held near 0 m and near 3,500 m, networks with
// weight ratios up to 10⁶ and a bridge section give the same heights to
// 1 nm and the bridge's observed difference to 1 nm. Before the solver
// worked relative to a reference height the normal equations carried the
// absolute heights, and held at 3,500 m the heights of these networks moved
// by up to 1.3·10⁻⁷ m (measured), more with wider weight ratios. At level 0 the
// heights are also compared with gonum's dense solve (denseReference); the
// tolerance there is that of the dense solve of an ill-conditioned system.
func TestHeightsDoNotDependOnDatumLevel(t *testing.T) {
	rng := rand.New(rand.NewPCG(2024, 13))
	// tol is for the change with the datum's level: the arithmetic of the
	// relative system is the same at both levels, so only the rounding of
	// Hₕ − H₀ and of adding H₀ back remains (about 10⁻¹² m at 3,500 m).
	// bridgeTol is for the bridge: its difference rests on the solve of an
	// ill-conditioned system, a few nanometres at the widest weights, the
	// same at either level.
	const tol, bridgeTol = 1e-9, 1e-8 // metres
	var worstShift, worstBridge, worstDense float64
	for trial := 0; trial < 300; trial++ {
		secs, held, bridge := wideNetwork(rng)
		opt := adjust.NetworkOptions{}
		if trial%3 == 1 {
			opt.Weighting = adjust.WeightBySetups
		}
		if trial%5 == 2 {
			opt.Minimal = true
		}
		solve := func(level float64) *adjust.NetworkSolution {
			h := make([]adjust.HeldMark, len(held))
			for k, m := range held {
				m.HeightM += level
				h[k] = m
			}
			sol, err := adjust.SolveNetwork(build(secs, h), opt)
			if err != nil {
				t.Fatalf("trial %d, level %g m: %v", trial, level, err)
			}
			return sol
		}
		// Held with the first mark at 0 m, and at 3,500 m.
		base := held[0].HeightM
		low, high := solve(-base), solve(3500-base)
		for i, p := range high.Points {
			d := math.Abs((p.HeightM - 3500) - low.Points[i].HeightM)
			worstShift = max(worstShift, d)
			if d > tol {
				t.Errorf("trial %d: %s is %.12f m above the first held mark held at 3,500 m and %.12f m held at 0 m: %.3g m apart",
					trial, p.Point, p.HeightM-3500, low.Points[i].HeightM, d)
			}
		}
		for _, sol := range []*adjust.NetworkSolution{low, high} {
			from, to := sol.Points[indexOf(sol, "M0")], sol.Points[indexOf(sol, "XM0")]
			d := math.Abs(to.HeightM - from.HeightM - secs[bridge].DhM)
			worstBridge = max(worstBridge, d)
			if d > bridgeTol {
				t.Errorf("trial %d: the bridge's adjusted difference is %.3g m off its observation", trial, d)
			}
		}
		ref := denseReference(t, secs, func() []adjust.HeldMark {
			h := make([]adjust.HeldMark, len(held))
			for k, m := range held {
				m.HeightM -= base
				h[k] = m
			}
			return h
		}(), opt.WithDefaults())
		for _, p := range low.Points {
			d := math.Abs(p.HeightM - ref.height[p.Point])
			worstDense = max(worstDense, d)
			if d > 1e-6 {
				t.Errorf("trial %d: %s = %.9f m, gonum's dense solve %.9f m", trial, p.Point, p.HeightM, ref.height[p.Point])
			}
		}
	}
	t.Logf("largest change with the datum's level %.3g m; bridge %.3g m; largest difference from the dense solve %.3g m", worstShift, worstBridge, worstDense)
}

func indexOf(sol *adjust.NetworkSolution, point string) int {
	for i, p := range sol.Points {
		if p.Point == point {
			return i
		}
	}
	panic("no point " + point)
}
