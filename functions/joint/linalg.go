package joint

import "math"

// Small dense symmetric matrices (p <= MaxMarkers), stored row major in a
// []float64 of length p*p. Hand-written rather than gonum's mat: the chart
// factorises a 2x2 to 8x8 matrix at every exam of every worker, where
// gonum's general-purpose types would allocate and dominate the cost.

// cholesky overwrites the lower triangle of a (n x n) with L, a = L L',
// and reports false if a is not positive definite (a pivot at most 1e-12
// times its diagonal entry).
func cholesky(a []float64, n int) bool { return choleskyAt(a, n, 1e-12) < 0 }

// choleskyAt is cholesky that returns the index of the first pivot at most
// tol times its diagonal entry (the factorisation stops there), or -1 when
// a is positive definite.
func choleskyAt(a []float64, n int, tol float64) int {
	for j := range n {
		d := a[j*n+j]
		for k := range j {
			d -= a[j*n+k] * a[j*n+k]
		}
		if !(d > tol*math.Max(a[j*n+j], 1e-300)) {
			return j
		}
		d = math.Sqrt(d)
		a[j*n+j] = d
		for i := j + 1; i < n; i++ {
			s := a[i*n+j]
			for k := range j {
				s -= a[i*n+k] * a[j*n+k]
			}
			a[i*n+j] = s / d
		}
	}
	return -1
}

// cholSolve solves (L L') x = b in place in b, L from cholesky.
func cholSolve(l []float64, n int, b []float64) {
	for i := range n {
		s := b[i]
		for k := range i {
			s -= l[i*n+k] * b[k]
		}
		b[i] = s / l[i*n+i]
	}
	for i := n - 1; i >= 0; i-- {
		s := b[i]
		for k := i + 1; k < n; k++ {
			s -= l[k*n+i] * b[k]
		}
		b[i] = s / l[i*n+i]
	}
}

// cholQuad returns b' (L L')^-1 b = |L^-1 b|^2, using work (length n).
func cholQuad(l []float64, n int, b, work []float64) float64 {
	var q float64
	for i := range n {
		s := b[i]
		for k := range i {
			s -= l[i*n+k] * work[k]
		}
		work[i] = s / l[i*n+i]
		q += work[i] * work[i]
	}
	return q
}

// sub copies the rows and columns idx of the n x n matrix a into out
// (len(idx)^2).
func sub(a []float64, n int, idx []int, out []float64) []float64 {
	k := len(idx)
	out = out[:k*k]
	for i, r := range idx {
		for j, c := range idx {
			out[i*k+j] = a[r*n+c]
		}
	}
	return out
}
