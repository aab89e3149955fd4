package sparse

import (
	"slices"
)

// SelectedInverse computes the entries of Z = A⁻¹ on the pattern of the
// factor: every (i, j) with L(i, j) structurally non-zero, and the diagonal.
// With P·A·Pᵀ = L·D·Lᵀ, Z is found column by column from the last with
// Takahashi's recurrences
//
//	Z(i, j) = −Σ_{k∈S(j)} Z(i, k)·L(k, j),   i ∈ S(j),
//	Z(j, j) = 1/dⱼ − Σ_{k∈S(j)} L(k, j)·Z(k, j),
//
// where S(j) is the pattern of column j of L below the diagonal. Every Z(i, k)
// needed lies on the pattern, since S(j) ∖ {≤ k} ⊆ S(k) for k ∈ S(j)
// (K. Takahashi, J. Fagan and M.-S. Chen, "Formation of a sparse bus impedance
// matrix and its application to short circuit study", 8th PICA Conference,
// 1973; A. M. Erisman and W. F. Tinney, "On computing certain elements of the
// inverse of a sparse matrix", Comm. ACM 18(3), 1975, pp. 177-179).
//
// The work is of the order of the factorization's. SelectedInverse panics if
// the matrix has not been factorized.
func (c *Cholesky) SelectedInverse() {
	if c.pat == nil {
		panic("sparse: SelectedInverse before Factorize")
	}
	n := c.n
	lp, li, lx, d := c.lp, c.li, c.lx, c.d
	c.zx = grow64(c.zx, len(lx))
	c.zd = grow64(c.zd, n)
	zx, zd := c.zx, c.zd
	pos := c.flag // position of row i in the current column, or -1
	for i := range pos[:n] {
		pos[i] = -1
	}
	for j := n - 1; j >= 0; j-- {
		p0, p1 := lp[j], lp[j+1]
		if p0 == p1 {
			zd[j] = 1 / d[j]
			continue
		}
		last := li[p1-1]
		for p := p0; p < p1; p++ {
			zx[p] = 0
			pos[li[p]] = p
		}
		for p := p0; p < p1; p++ {
			k, lkj := li[p], lx[p]
			acc := zx[p] - zd[k]*lkj
			rows, zs := li[lp[k]:lp[k+1]], zx[lp[k]:lp[k+1]]
			for q, i := range rows {
				if i > last {
					break
				}
				if pp := pos[i]; pp >= 0 {
					zik := zs[q]
					zx[pp] -= zik * lkj
					acc -= zik * lx[pp]
				}
			}
			zx[p] = acc
		}
		zjj := 1 / d[j]
		for p := p0; p < p1; p++ {
			zjj -= lx[p] * zx[p]
			pos[li[p]] = -1
		}
		zd[j] = zjj
	}
	c.hasInv = true
}

// InverseDiagTo sets dst[i] = A⁻¹(i, i) for every i, from the selected
// inverse (computed first if needed).
func (c *Cholesky) InverseDiagTo(dst []float64) {
	if len(dst) != c.n {
		panic("sparse: dimension mismatch")
	}
	if !c.hasInv {
		c.SelectedInverse()
	}
	for k, i := range c.perm {
		dst[i] = c.zd[k]
	}
}

// InverseAt returns A⁻¹(i, j) and true when (i, j) lies on the pattern of the
// selected inverse (always for i = j, and for every non-zero A(i, j)), or
// 0 and false otherwise.
func (c *Cholesky) InverseAt(i, j int) (float64, bool) {
	if i < 0 || j < 0 || i >= c.n || j >= c.n {
		panic("sparse: index out of range")
	}
	if !c.hasInv {
		c.SelectedInverse()
	}
	a, b := c.iperm[i], c.iperm[j]
	if a == b {
		return c.zd[a], true
	}
	if a < b {
		a, b = b, a
	}
	p0, p1 := c.lp[b], c.lp[b+1]
	if q, ok := slices.BinarySearch(c.li[p0:p1], a); ok {
		return c.zx[int(p0)+q], true
	}
	return 0, false
}
