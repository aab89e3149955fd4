package sparse

import (
	"fmt"
	"slices"
)

// NotPositiveDefiniteError reports a pivot of the LDLᵀ factorization that is
// not safely positive: the matrix is singular or indefinite.
type NotPositiveDefiniteError struct {
	Col   int     // row and column of the original matrix
	Pivot float64 // the pivot dₖ found
}

func (e *NotPositiveDefiniteError) Error() string {
	return fmt.Sprintf("matrix is not positive definite: pivot %g at row %d", e.Pivot, e.Col)
}

// pivotTol is the smallest accepted pivot relative to its diagonal entry,
// dₖ > pivotTol·A(k, k) (common practice for a symmetric positive definite
// factorization without pivoting).
const pivotTol = 1e-14

// Cholesky is the factorization
//
//	P·A·Pᵀ = L·D·Lᵀ
//
// of a sparse symmetric positive definite matrix, with P from Order, L unit
// lower triangular stored by columns and D diagonal. The zero value is ready
// for Factorize; factoring again a matrix with the same pattern reuses the
// ordering, the symbolic analysis and every buffer.
type Cholesky struct {
	n           int
	perm, iperm []int32
	// Upper triangle of P·A·Pᵀ by columns; amap indexes the value in A.
	ap, ai, amap []int32
	parent       []int32
	lp, li       []int32
	lx, d        []float64
	// Work space.
	y             []float64
	flag, pattern []int32
	lnz           []int32
	// Selected inverse on the pattern of L (zx beside lx) and its diagonal.
	zx, zd []float64
	hasInv bool
	pat    *Symmetric // the pattern analysed
}

// Factorize computes the factorization of a. The first call (or a call with
// a matrix of another pattern) orders and analyses a; later calls with the
// same pattern only redo the numbers. A data-dependent failure (a pivot not
// safely positive) is a *NotPositiveDefiniteError.
func (c *Cholesky) Factorize(a *Symmetric) error {
	if !c.samePattern(a) {
		c.analyze(a, Order(a))
	}
	return c.numeric(a)
}

// FactorizeOrdered is Factorize with the given ordering instead of Order's.
func (c *Cholesky) FactorizeOrdered(a *Symmetric, perm []int32) error {
	if len(perm) != a.N {
		panic("sparse: ordering of wrong length")
	}
	c.analyze(a, perm)
	return c.numeric(a)
}

func (c *Cholesky) samePattern(a *Symmetric) bool {
	p := c.pat
	return p != nil && (p == a || p.N == a.N && slices.Equal(p.ColPtr, a.ColPtr) && slices.Equal(p.RowIdx, a.RowIdx))
}

// analyze permutes the pattern, builds the elimination tree and the column
// counts of L, and allocates L (T. A. Davis, "Algorithm 849: a concise sparse
// Cholesky factorization package", ACM TOMS 31(4), 2005, pp. 587-591).
func (c *Cholesky) analyze(a *Symmetric, perm []int32) {
	n := a.N
	c.n = n
	c.perm = perm
	c.iperm = grow32(c.iperm, n)
	for k, i := range perm {
		c.iperm[i] = int32(k)
	}
	// Upper triangle of the permuted matrix, column by column.
	nnz := len(a.RowIdx)
	c.ap = grow32(c.ap, n+1)
	clear(c.ap)
	c.ai = grow32(c.ai, nnz)
	c.amap = grow32(c.amap, nnz)
	for j := 0; j < n; j++ {
		nj := c.iperm[j]
		for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
			c.ap[max(nj, c.iperm[a.RowIdx[p]])+1]++
		}
	}
	for k := 0; k < n; k++ {
		c.ap[k+1] += c.ap[k]
	}
	c.flag = grow32(c.flag, n)
	copy(c.flag, c.ap[:n])
	for j := 0; j < n; j++ {
		nj := c.iperm[j]
		for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
			ni := c.iperm[a.RowIdx[p]]
			col, row := max(nj, ni), min(nj, ni)
			q := c.flag[col]
			c.ai[q] = row
			c.amap[q] = p
			c.flag[col]++
		}
	}
	// Elimination tree and column counts.
	c.parent = grow32(c.parent, n)
	c.lnz = grow32(c.lnz, n)
	for k := 0; k < n; k++ {
		c.parent[k] = -1
		c.flag[k] = int32(k)
		c.lnz[k] = 0
		for p := c.ap[k]; p < c.ap[k+1]; p++ {
			for i := c.ai[p]; c.flag[i] != int32(k); i = c.parent[i] {
				if c.parent[i] == -1 {
					c.parent[i] = int32(k)
				}
				c.lnz[i]++
				c.flag[i] = int32(k)
			}
		}
	}
	c.lp = grow32(c.lp, n+1)
	c.lp[0] = 0
	for k := 0; k < n; k++ {
		c.lp[k+1] = c.lp[k] + c.lnz[k]
	}
	c.li = grow32(c.li, int(c.lp[n]))
	c.lx = grow64(c.lx, int(c.lp[n]))
	c.d = grow64(c.d, n)
	c.y = grow64(c.y, n)
	c.pattern = grow32(c.pattern, n)
	c.hasInv = false
	c.pat = a
}

// numeric is the up-looking LDLᵀ factorization: row k of L solves
// L(0:k,0:k)·D·l = A(0:k, k) over the reach of A(:, k) in the elimination
// tree (Davis 2005, as above).
func (c *Cholesky) numeric(a *Symmetric) error {
	n := c.n
	y, flag, pattern, lnz := c.y, c.flag, c.pattern, c.lnz
	lp, li, lx, d, parent := c.lp, c.li, c.lx, c.d, c.parent
	c.hasInv = false
	for k := 0; k < n; k++ {
		y[k] = 0
		top := n
		flag[k] = int32(k)
		lnz[k] = 0
		diag := 0.0
		for p := c.ap[k]; p < c.ap[k+1]; p++ {
			i := c.ai[p]
			v := a.Val[c.amap[p]]
			y[i] += v
			if int(i) == k {
				diag = v
			}
			ln := 0
			for ; flag[i] != int32(k); i = parent[i] {
				pattern[ln] = i
				ln++
				flag[i] = int32(k)
			}
			for ln > 0 {
				top--
				ln--
				pattern[top] = pattern[ln]
			}
		}
		dk := y[k]
		y[k] = 0
		for ; top < n; top++ {
			i := pattern[top]
			yi := y[i]
			y[i] = 0
			p0, p2 := lp[i], lp[i]+lnz[i]
			rows, vals := li[p0:p2], lx[p0:p2]
			for q, r := range rows {
				y[r] -= vals[q] * yi
			}
			lki := yi / d[i]
			dk -= lki * yi
			li[p2] = int32(k)
			lx[p2] = lki
			lnz[i]++
		}
		if !(dk > pivotTol*diag) {
			return &NotPositiveDefiniteError{Col: int(c.perm[k]), Pivot: dk}
		}
		d[k] = dk
	}
	return nil
}

// N returns the order of the factorized matrix.
func (c *Cholesky) N() int { return c.n }

// NNZ returns the number of entries of L below the diagonal.
func (c *Cholesky) NNZ() int { return int(c.lp[c.n]) }

// Perm returns the ordering used: row k of the factor is row Perm()[k] of A.
// The slice must not be modified.
func (c *Cholesky) Perm() []int32 { return c.perm }

// SolveTo sets dst to the solution x of A·x = b. dst and b may be the same
// slice.
func (c *Cholesky) SolveTo(dst, b []float64) {
	n := c.n
	if len(dst) != n || len(b) != n {
		panic("sparse: dimension mismatch")
	}
	x := c.y
	for k, i := range c.perm {
		x[k] = b[i]
	}
	lp, li, lx := c.lp, c.li, c.lx
	for j := 0; j < n; j++ {
		xj := x[j]
		rows, vals := li[lp[j]:lp[j+1]], lx[lp[j]:lp[j+1]]
		for q, r := range rows {
			x[r] -= vals[q] * xj
		}
	}
	for j := 0; j < n; j++ {
		x[j] /= c.d[j]
	}
	for j := n - 1; j >= 0; j-- {
		s := x[j]
		rows, vals := li[lp[j]:lp[j+1]], lx[lp[j]:lp[j+1]]
		for q, r := range rows {
			s -= vals[q] * x[r]
		}
		x[j] = s
	}
	for k, i := range c.perm {
		dst[i] = x[k]
	}
	clear(x)
}

func grow32(s []int32, n int) []int32 {
	if cap(s) < n {
		return make([]int32, n)
	}
	return s[:n]
}

func grow64(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
