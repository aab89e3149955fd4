package sparse

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// randomSPD returns a random sparse symmetric positive definite matrix: a
// weighted graph Laplacian of a random graph plus a random positive diagonal
// on a few rows, the shape of leveling normal equations.
func randomSPD(rng *rand.Rand, n int, density float64) *Symmetric {
	b := NewBuilder(n, 4*n)
	for i := 0; i < n; i++ {
		for j := 0; j < i; j++ {
			if rng.Float64() < density || j == i-1 {
				w := 0.1 + rng.Float64()
				b.Add(i, i, w)
				b.Add(j, j, w)
				b.Add(i, j, -w)
			}
		}
	}
	b.Add(rng.IntN(n), 0, 0) // a structural entry that is zero
	for k := 0; k < 1+n/10; k++ {
		i := rng.IntN(n)
		b.Add(i, i, 0.5+rng.Float64())
	}
	return b.Symmetric()
}

func dense(a *Symmetric) *mat.SymDense {
	d := mat.NewSymDense(a.N, nil)
	for j := 0; j < a.N; j++ {
		for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
			d.SetSym(int(a.RowIdx[p]), j, a.Val[p])
		}
	}
	return d
}

func TestCholeskyAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := 0; trial < 200; trial++ {
		n := 1 + rng.IntN(60)
		a := randomSPD(rng, n, 0.08)
		var c Cholesky
		if err := c.Factorize(a); err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		var ref mat.Cholesky
		if !ref.Factorize(dense(a)) {
			t.Fatalf("trial %d: gonum says not positive definite", trial)
		}
		var inv mat.SymDense
		if err := ref.InverseTo(&inv); err != nil {
			t.Fatal(err)
		}
		scale := 0.0
		for i := 0; i < n; i++ {
			scale = max(scale, inv.At(i, i))
		}

		b := make([]float64, n)
		for i := range b {
			b[i] = rng.NormFloat64()
		}
		x := make([]float64, n)
		c.SolveTo(x, b)
		// Invariant: A·x = b.
		ax := make([]float64, n)
		a.MulVecTo(ax, x)
		for i := range b {
			if math.Abs(ax[i]-b[i]) > 1e-10*(1+math.Abs(b[i])) {
				t.Fatalf("trial %d: (A·x)[%d] = %g, b[%d] = %g", trial, i, ax[i], i, b[i])
			}
		}
		// Against gonum's dense Cholesky.
		var xr mat.VecDense
		if err := ref.SolveVecTo(&xr, mat.NewVecDense(n, b)); err != nil {
			t.Fatal(err)
		}
		for i := range x {
			if math.Abs(x[i]-xr.AtVec(i)) > 1e-9*(1+math.Abs(xr.AtVec(i))) {
				t.Fatalf("trial %d: x[%d] = %g, gonum %g", trial, i, x[i], xr.AtVec(i))
			}
		}
		// Selected inverse: every entry on the pattern of L, and every
		// non-zero of A.
		c.SelectedInverse()
		diag := make([]float64, n)
		c.InverseDiagTo(diag)
		for i := 0; i < n; i++ {
			if math.Abs(diag[i]-inv.At(i, i)) > 1e-10*scale {
				t.Fatalf("trial %d: Z(%d,%d) = %g, gonum %g", trial, i, i, diag[i], inv.At(i, i))
			}
		}
		for k := 0; k < n; k++ {
			for p := c.lp[k]; p < c.lp[k+1]; p++ {
				i, j := int(c.perm[c.li[p]]), int(c.perm[k])
				if math.Abs(c.zx[p]-inv.At(i, j)) > 1e-10*scale {
					t.Fatalf("trial %d: Z(%d,%d) = %g, gonum %g", trial, i, j, c.zx[p], inv.At(i, j))
				}
			}
		}
		for j := 0; j < n; j++ {
			for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
				i := int(a.RowIdx[p])
				z, ok := c.InverseAt(i, j)
				if !ok {
					t.Fatalf("trial %d: A(%d,%d) ≠ 0 but Z(%d,%d) is off the pattern", trial, i, j, i, j)
				}
				if math.Abs(z-inv.At(i, j)) > 1e-10*scale {
					t.Fatalf("trial %d: InverseAt(%d,%d) = %g, gonum %g", trial, i, j, z, inv.At(i, j))
				}
			}
		}
	}
}

func TestRefactorizeSamePattern(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	a := randomSPD(rng, 40, 0.1)
	var c Cholesky
	if err := c.Factorize(a); err != nil {
		t.Fatal(err)
	}
	perm := c.Perm()
	for p := range a.Val {
		a.Val[p] *= 2
	}
	if err := c.Factorize(a); err != nil {
		t.Fatal(err)
	}
	if &c.Perm()[0] != &perm[0] {
		t.Error("same pattern was ordered again")
	}
	b := make([]float64, a.N)
	b[7] = 1
	x := make([]float64, a.N)
	c.SolveTo(x, b)
	ax := make([]float64, a.N)
	a.MulVecTo(ax, x)
	for i := range b {
		if math.Abs(ax[i]-b[i]) > 1e-10 {
			t.Fatalf("(A·x)[%d] = %g, want %g", i, ax[i], b[i])
		}
	}
}

func TestNotPositiveDefinite(t *testing.T) {
	// A graph Laplacian without any fixed row is singular: its rows sum to 0.
	b := NewBuilder(3, 6)
	for _, e := range [][2]int{{0, 1}, {1, 2}} {
		b.Add(e[0], e[0], 1)
		b.Add(e[1], e[1], 1)
		b.Add(e[0], e[1], -1)
	}
	var c Cholesky
	err := c.Factorize(b.Symmetric())
	var npd *NotPositiveDefiniteError
	if !errors.As(err, &npd) {
		t.Fatalf("got %v, want a NotPositiveDefiniteError", err)
	}
}

// grid returns the 5-point Laplacian of an r×r grid with one row held,
// numbered in a random order.
func grid(rng *rand.Rand, r int) *Symmetric {
	n := r * r
	label := rng.Perm(n)
	b := NewBuilder(n, 3*n)
	edge := func(u, v int) {
		u, v = label[u], label[v]
		b.Add(u, u, 1)
		b.Add(v, v, 1)
		b.Add(u, v, -1)
	}
	for i := 0; i < r; i++ {
		for j := 0; j < r; j++ {
			if j+1 < r {
				edge(i*r+j, i*r+j+1)
			}
			if i+1 < r {
				edge(i*r+j, (i+1)*r+j)
			}
		}
	}
	b.Add(label[0], label[0], 1)
	return b.Symmetric()
}

func TestOrderIsPermutationAndReducesFill(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	a := grid(rng, 40)
	perm := Order(a)
	seen := make([]bool, a.N)
	for _, i := range perm {
		if seen[i] {
			t.Fatalf("row %d ordered twice", i)
		}
		seen[i] = true
	}
	natural := make([]int32, a.N)
	for i := range natural {
		natural[i] = int32(i)
	}
	var cn, ca Cholesky
	if err := cn.FactorizeOrdered(a, natural); err != nil {
		t.Fatal(err)
	}
	if err := ca.Factorize(a); err != nil {
		t.Fatal(err)
	}
	// A 40×40 grid under minimum degree has nnz(L) of the order of
	// n·log n, about 2·10⁴ (A. George and J. W. H. Liu, Computer Solution of
	// Large Sparse Positive Definite Systems, Prentice-Hall, 1981, ch. 8,
	// from memory); a random numbering fills most of the triangle.
	if ca.NNZ() > 30000 || ca.NNZ()*5 > cn.NNZ() {
		t.Errorf("nnz(L) with ordering %d, random numbering %d", ca.NNZ(), cn.NNZ())
	}
	t.Logf("nnz(L): ordered %d, random numbering %d", ca.NNZ(), cn.NNZ())
}

func BenchmarkGrid316(b *testing.B) {
	rng := rand.New(rand.NewPCG(7, 8))
	a := grid(rng, 316)
	b.Run("order", func(b *testing.B) {
		for b.Loop() {
			Order(a)
		}
	})
	var c Cholesky
	if err := c.Factorize(a); err != nil {
		b.Fatal(err)
	}
	b.Logf("n = %d, nnz(L) = %d", a.N, c.NNZ())
	b.Run("factor", func(b *testing.B) {
		for b.Loop() {
			if err := c.numeric(a); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("selinv", func(b *testing.B) {
		for b.Loop() {
			c.SelectedInverse()
		}
	})
}
