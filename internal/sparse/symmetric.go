// Package sparse solves sparse symmetric positive definite systems
//
//	A·x = b
//
// with a fill-reducing ordering (approximate minimum degree), an LDLᵀ
// factorization of the permuted matrix
//
//	P·A·Pᵀ = L·D·Lᵀ,  L unit lower triangular, D diagonal,
//
// and the selected inverse: the entries of A⁻¹ on the pattern of L, found
// with Takahashi's recurrences without forming the dense inverse.
package sparse

import (
	"fmt"
	"slices"
)

// Symmetric is a symmetric n×n matrix in compressed sparse column form
// holding the lower triangle: the entries of column j have rows i ≥ j,
// listed in RowIdx[ColPtr[j]:ColPtr[j+1]] in increasing order, with values
// in Val at the same positions. Each (i, j) appears at most once.
type Symmetric struct {
	N      int
	ColPtr []int32
	RowIdx []int32
	Val    []float64
}

// At returns A(i, j), zero off the pattern.
func (a *Symmetric) At(i, j int) float64 {
	if i < 0 || j < 0 || i >= a.N || j >= a.N {
		panic("sparse: index out of range")
	}
	if i < j {
		i, j = j, i
	}
	rows := a.RowIdx[a.ColPtr[j]:a.ColPtr[j+1]]
	if k, ok := slices.BinarySearch(rows, int32(i)); ok {
		return a.Val[int(a.ColPtr[j])+k]
	}
	return 0
}

// MulVecTo sets dst = A·x.
func (a *Symmetric) MulVecTo(dst, x []float64) {
	if len(dst) != a.N || len(x) != a.N {
		panic("sparse: dimension mismatch")
	}
	clear(dst)
	for j := 0; j < a.N; j++ {
		for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
			i, v := a.RowIdx[p], a.Val[p]
			dst[i] += v * x[j]
			if int(i) != j {
				dst[j] += v * x[i]
			}
		}
	}
}

// Builder collects the entries of a symmetric matrix as triplets; entries at
// the same position are summed. The zero value is not usable: make one with
// NewBuilder.
type Builder struct {
	n    int
	i, j []int32
	v    []float64
}

// NewBuilder returns a builder for an n×n matrix with room for about nnz
// triplets.
func NewBuilder(n, nnz int) *Builder {
	if n < 0 {
		panic("sparse: negative dimension")
	}
	return &Builder{n: n, i: make([]int32, 0, nnz), j: make([]int32, 0, nnz), v: make([]float64, 0, nnz)}
}

// Add adds v to A(i, j) and, by symmetry, to A(j, i) (once, when i ≠ j).
func (b *Builder) Add(i, j int, v float64) {
	if i < 0 || j < 0 || i >= b.n || j >= b.n {
		panic(fmt.Sprintf("sparse: index (%d, %d) out of range for %d×%d", i, j, b.n, b.n))
	}
	if i < j {
		i, j = j, i
	}
	b.i = append(b.i, int32(i))
	b.j = append(b.j, int32(j))
	b.v = append(b.v, v)
}

// Symmetric returns the matrix collected so far. Every diagonal position is
// stored, zero if nothing was added there.
func (b *Builder) Symmetric() *Symmetric {
	n := b.n
	// Count per column (plus the diagonal), bucket, then sort and merge.
	cnt := make([]int32, n+1)
	for _, j := range b.j {
		cnt[j+1]++
	}
	for j := 0; j < n; j++ {
		cnt[j+1]++ // diagonal
	}
	for j := 0; j < n; j++ {
		cnt[j+1] += cnt[j]
	}
	rows := make([]int32, cnt[n])
	vals := make([]float64, cnt[n])
	next := slices.Clone(cnt[:n])
	for j := 0; j < n; j++ {
		rows[next[j]] = int32(j)
		next[j]++
	}
	for k, j := range b.j {
		rows[next[j]] = b.i[k]
		vals[next[j]] = b.v[k]
		next[j]++
	}
	// Sort each column by row and sum duplicates in place.
	colPtr := make([]int32, n+1)
	w := int32(0)
	for j := 0; j < n; j++ {
		lo, hi := cnt[j], cnt[j+1]
		sortPairs(rows[lo:hi], vals[lo:hi])
		colPtr[j] = w
		for p := lo; p < hi; p++ {
			if w > colPtr[j] && rows[w-1] == rows[p] {
				vals[w-1] += vals[p]
				continue
			}
			rows[w], vals[w] = rows[p], vals[p]
			w++
		}
	}
	colPtr[n] = w
	return &Symmetric{N: n, ColPtr: colPtr, RowIdx: rows[:w:w], Val: vals[:w:w]}
}

// sortPairs sorts r increasing, carrying v along: insertion sort for the
// short columns of leveling networks, a library sort otherwise.
func sortPairs(r []int32, v []float64) {
	if len(r) > 32 {
		idx := make([]int, len(r))
		for k := range idx {
			idx[k] = k
		}
		slices.SortFunc(idx, func(a, b int) int { return int(r[a]) - int(r[b]) })
		rr, vv := slices.Clone(r), slices.Clone(v)
		for k, x := range idx {
			r[k], v[k] = rr[x], vv[x]
		}
		return
	}
	for a := 1; a < len(r); a++ {
		ra, va := r[a], v[a]
		b := a - 1
		for b >= 0 && r[b] > ra {
			r[b+1], v[b+1] = r[b], v[b]
			b--
		}
		r[b+1], v[b+1] = ra, va
	}
}
