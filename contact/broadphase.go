package contact

import (
	"cmp"
	"slices"

	"gonum.org/v1/gonum/spatial/r3"
)

// BroadPhase finds overlapping bounding boxes by sort-and-sweep (sorted
// bounding boxes) along one axis. Its zero value is ready to use; it keeps
// its sorted order between calls, so frames that change little sort in
// near-linear time, and it allocates only when the number of boxes grows.
type BroadPhase struct {
	order []int32
	axis  int
}

// Pairs appends to dst the index pairs (i<j) of overlapping boxes in a
// deterministic order (ascending i, then j), and returns dst. Boxes that
// touch count as overlapping. The sweep runs along the axis on which the
// box centres spread most, so that few boxes share an interval.
func (bp *BroadPhase) Pairs(boxes []r3.Box, dst [][2]int32) [][2]int32 {
	n := len(boxes)
	axis := sweepAxis(boxes)
	lo := func(i int32) float64 { return vecAt(boxes[i].Min, axis) }
	// Sort by (min, index): a total order, so the result does not depend
	// on the order kept from the previous call. A fresh order gets a full
	// sort; a kept one an insertion sort, fast when little has moved.
	if len(bp.order) != n || bp.axis != axis {
		bp.order = bp.order[:0]
		for i := 0; i < n; i++ {
			bp.order = append(bp.order, int32(i))
		}
		bp.axis = axis
		slices.SortFunc(bp.order, func(x, y int32) int {
			if c := cmp.Compare(lo(x), lo(y)); c != 0 {
				return c
			}
			return cmp.Compare(x, y)
		})
	}
	ord := bp.order
	for i := 1; i < n; i++ {
		x := ord[i]
		lx := lo(x)
		j := i
		for ; j > 0; j-- {
			y := ord[j-1]
			if c := cmp.Compare(lo(y), lx); c < 0 || c == 0 && y < x {
				break
			}
			ord[j] = y
		}
		ord[j] = x
	}
	start := len(dst)
	for i := 0; i < n; i++ {
		a := ord[i]
		ba := &boxes[a]
		hi := vecAt(ba.Max, axis)
		for j := i + 1; j < n; j++ {
			b := ord[j]
			bb := &boxes[b]
			if vecAt(bb.Min, axis) > hi {
				break
			}
			if ba.Min.X <= bb.Max.X && bb.Min.X <= ba.Max.X &&
				ba.Min.Y <= bb.Max.Y && bb.Min.Y <= ba.Max.Y &&
				ba.Min.Z <= bb.Max.Z && bb.Min.Z <= ba.Max.Z {
				if a < b {
					dst = append(dst, [2]int32{a, b})
				} else {
					dst = append(dst, [2]int32{b, a})
				}
			}
		}
	}
	slices.SortFunc(dst[start:], func(p, q [2]int32) int {
		if c := cmp.Compare(p[0], q[0]); c != 0 {
			return c
		}
		return cmp.Compare(p[1], q[1])
	})
	return dst
}

// sweepAxis returns the axis along which the finite box centres have the
// largest variance.
func sweepAxis(boxes []r3.Box) int {
	var sum, sum2 r3.Vec
	n := 0.0
	for i := range boxes {
		c := r3.Scale(0.5, r3.Add(boxes[i].Min, boxes[i].Max))
		if !finite(c.X) || !finite(c.Y) || !finite(c.Z) {
			continue // planes and other unbounded boxes
		}
		sum = r3.Add(sum, c)
		sum2 = r3.Add(sum2, r3.Vec{X: c.X * c.X, Y: c.Y * c.Y, Z: c.Z * c.Z})
		n++
	}
	if n == 0 {
		return 0
	}
	v := r3.Sub(r3.Scale(1/n, sum2), r3.Scale(1/(n*n), r3.Vec{X: sum.X * sum.X, Y: sum.Y * sum.Y, Z: sum.Z * sum.Z}))
	switch {
	case v.X >= v.Y && v.X >= v.Z:
		return 0
	case v.Y >= v.Z:
		return 1
	}
	return 2
}

func finite(x float64) bool { return x-x == 0 }
