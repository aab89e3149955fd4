package sparse

// Order returns a fill-reducing ordering of the pattern of a: perm[k] is the
// row and column of a that is eliminated k-th, so that the Cholesky factor of
// P·A·Pᵀ, with (P·A·Pᵀ)(k, l) = A(perm[k], perm[l]), has little fill.
//
// The method is approximate minimum degree on the quotient graph, with
// element absorption, aggressive absorption, supervariables found by hashing
// and the approximate external degree bound
//
//	d̄ᵢ = min(n − k, d̄ᵢ(old) + |Lₚ∖i|, |Aᵢ∖i| + |Lₚ∖i| + Σ_{e∈Eᵢ∖p} |Lₑ∖Lₚ|)
//
// of P. R. Amestoy, T. A. Davis and I. S. Duff, "An approximate minimum degree
// ordering algorithm", SIAM J. Matrix Anal. Appl. 17(4), 1996, pp. 886-905.
func Order(a *Symmetric) []int32 {
	n := a.N
	// Full adjacency without the diagonal.
	xadj := make([]int32, n+1)
	for j := 0; j < n; j++ {
		for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
			if i := a.RowIdx[p]; int(i) != j {
				xadj[i+1]++
				xadj[j+1]++
			}
		}
	}
	for j := 0; j < n; j++ {
		xadj[j+1] += xadj[j]
	}
	adj := make([]int32, xadj[n])
	fill := make([]int32, n)
	copy(fill, xadj[:n])
	for j := 0; j < n; j++ {
		for p := a.ColPtr[j]; p < a.ColPtr[j+1]; p++ {
			if i := a.RowIdx[p]; int(i) != j {
				adj[fill[i]] = int32(j)
				fill[i]++
				adj[fill[j]] = i
				fill[j]++
			}
		}
	}
	return amd(n, xadj, adj)
}

const (
	kindVar  = 0 // a principal variable not yet eliminated
	kindElem = 1 // an element: an eliminated pivot not yet absorbed
	kindDead = 2 // an absorbed element or a non-principal variable
)

func amd(n int, xadj, adj []int32) []int32 {
	vars := make([][]int32, n)  // Aᵢ for variables, Lₑ for elements
	elems := make([][]int32, n) // Eᵢ for variables
	nv := make([]int32, n)      // supervariable size; negative while in Lₚ
	kind := make([]uint8, n)
	degree := make([]int32, n)
	w := make([]int, n)
	head := make([]int32, n+1)
	next := make([]int32, n)
	prev := make([]int32, n)
	hkey := make([]int32, n)
	hhead := make([]int32, n)
	hnext := make([]int32, n)
	mark := make([]int32, n)
	mnext := make([]int32, n) // members of a supervariable
	mtail := make([]int32, n)
	for i := range head {
		head[i] = -1
	}
	for i := 0; i < n; i++ {
		vars[i] = adj[xadj[i]:xadj[i+1]:xadj[i+1]]
		nv[i] = 1
		degree[i] = xadj[i+1] - xadj[i]
		hhead[i] = -1
		mnext[i] = -1
		mtail[i] = int32(i)
	}
	insert := func(i, d int32) {
		next[i], prev[i] = head[d], -1
		if head[d] >= 0 {
			prev[head[d]] = i
		}
		head[d] = i
	}
	remove := func(i int32) {
		if prev[i] >= 0 {
			next[prev[i]] = next[i]
		} else {
			head[degree[i]] = next[i]
		}
		if next[i] >= 0 {
			prev[next[i]] = prev[i]
		}
	}
	for i := 0; i < n; i++ {
		insert(int32(i), degree[i])
	}

	pivots := make([]int32, 0, n)
	var pool []int32
	wflg := 1
	stamp := int32(0)
	mindeg := int32(0)
	for k := 0; k < n; {
		for head[mindeg] < 0 {
			mindeg++
		}
		p := head[mindeg]
		remove(p)
		pivots = append(pivots, p)
		nvp := nv[p]
		k += int(nvp)

		// Lₚ = (Aₚ ∪ ⋃_{e∈Eₚ} Lₑ) ∖ p, principal variables only.
		bound := len(vars[p])
		for _, e := range elems[p] {
			if kind[e] == kindElem {
				bound += len(vars[e])
			}
		}
		if cap(pool)-len(pool) < bound {
			pool = make([]int32, 0, max(bound, 1<<16, 2*cap(pool)))
		}
		start := len(pool)
		degme := int32(0)
		nv[p] = -nvp
		add := func(i int32) {
			if kind[i] != kindVar || nv[i] <= 0 {
				return
			}
			degme += nv[i]
			nv[i] = -nv[i]
			pool = append(pool, i)
			remove(i)
		}
		for _, e := range elems[p] {
			if kind[e] != kindElem {
				continue
			}
			for _, i := range vars[e] {
				add(i)
			}
			kind[e] = kindDead
			vars[e] = nil
		}
		for _, i := range vars[p] {
			add(i)
		}
		lp := pool[start:len(pool):len(pool)]
		kind[p] = kindElem
		elems[p] = nil

		// w(e) − wflg = |Lₑ ∖ Lₚ| for every element next to Lₚ.
		if wflg > 1<<60 {
			clear(w)
			wflg = 1
		}
		for _, i := range lp {
			nvi := int(-nv[i])
			for _, e := range elems[i] {
				if kind[e] != kindElem {
					continue
				}
				if w[e] >= wflg {
					w[e] -= nvi
				} else {
					w[e] = int(degree[e]) + wflg - nvi
				}
			}
		}

		// Partial degrees (outside Lₚ), pruned lists and hash keys.
		for _, i := range lp {
			deg := int32(0)
			h := uint32(0)
			es := elems[i]
			m := 0
			for _, e := range es {
				if kind[e] != kindElem {
					continue
				}
				if dext := w[e] - wflg; dext > 0 {
					deg += int32(dext)
					es[m] = e
					m++
					h += uint32(e)
				} else {
					kind[e] = kindDead // aggressive absorption: Lₑ ⊆ Lₚ
					vars[e] = nil
				}
			}
			elems[i] = append(es[:m], p)
			as := vars[i]
			m = 0
			for _, j := range as {
				if kind[j] != kindVar || nv[j] <= 0 {
					continue // eliminated, non-principal, or in Lₚ (now reached through p)
				}
				deg += nv[j]
				as[m] = j
				m++
				h += uint32(j)
			}
			vars[i] = as[:m]
			degree[i] = min(degree[i], deg) // old external degree bound, or the new one
			hk := int32(h % uint32(n))
			hkey[i] = hk
			hnext[i] = hhead[hk]
			hhead[hk] = i
		}

		// Supervariables: variables of Lₚ with equal Eᵢ and Aᵢ merge.
		for _, i := range lp {
			hk := hkey[i]
			first := hhead[hk]
			if first < 0 {
				continue
			}
			hhead[hk] = -1
			for a := first; a >= 0; a = hnext[a] {
				if nv[a] == 0 {
					continue
				}
				stamp++
				for _, e := range elems[a] {
					mark[e] = stamp
				}
				for _, j := range vars[a] {
					mark[j] = stamp
				}
			scan:
				for b := hnext[a]; b >= 0; b = hnext[b] {
					if nv[b] == 0 || len(elems[b]) != len(elems[a]) || len(vars[b]) != len(vars[a]) {
						continue
					}
					for _, e := range elems[b] {
						if mark[e] != stamp {
							continue scan
						}
					}
					for _, j := range vars[b] {
						if mark[j] != stamp {
							continue scan
						}
					}
					nv[a] += nv[b] // both negative
					nv[b] = 0
					kind[b] = kindDead
					elems[b], vars[b] = nil, nil
					mnext[mtail[a]] = b
					mtail[a] = mtail[b]
				}
			}
		}
		if stamp > 1<<30 {
			clear(mark)
			stamp = 0
		}

		// Final degrees; the new element keeps its principal variables.
		m := 0
		for _, i := range lp {
			if nv[i] == 0 {
				continue
			}
			nvi := -nv[i]
			nv[i] = nvi
			d := min(degree[i]+degme-nvi, int32(n-k)-nvi)
			degree[i] = d
			insert(i, d)
			mindeg = min(mindeg, d)
			lp[m] = i
			m++
		}
		vars[p] = lp[:m:m]
		degree[p] = degme
		nv[p] = nvp
		wflg += n + 1
	}

	perm := make([]int32, 0, n)
	for _, p := range pivots {
		for i := p; i >= 0; i = mnext[i] {
			perm = append(perm, i)
		}
	}
	if len(perm) != n {
		panic("sparse: ordering lost variables")
	}
	return perm
}
