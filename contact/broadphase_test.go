package contact

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/spatial/r3"
)

// bruteForcePairs is the O(n²) definition of overlapping boxes: every
// pair whose intervals overlap on all three axes.
func bruteForcePairs(boxes []r3.Box) [][2]int32 {
	var out [][2]int32
	for i := range boxes {
		for j := i + 1; j < len(boxes); j++ {
			a, b := boxes[i], boxes[j]
			if a.Min.X <= b.Max.X && b.Min.X <= a.Max.X && a.Min.Y <= b.Max.Y && b.Min.Y <= a.Max.Y && a.Min.Z <= b.Max.Z && b.Min.Z <= a.Max.Z {
				out = append(out, [2]int32{int32(i), int32(j)})
			}
		}
	}
	return out
}

func randomBoxes(rng *rand.Rand, n int, spread float64) []r3.Box {
	boxes := make([]r3.Box, n)
	for i := range boxes {
		c := r3.Vec{X: spread * rng.Float64(), Y: spread * rng.Float64() / 3, Z: spread * rng.Float64() / 5}
		e := r3.Vec{X: 0.5 * rng.Float64(), Y: 0.5 * rng.Float64(), Z: 0.5 * rng.Float64()}
		boxes[i] = r3.Box{Min: r3.Sub(c, e), Max: r3.Add(c, e)}
	}
	return boxes
}

func TestBroadPhaseMatchesBruteForce(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	var bp BroadPhase
	var got [][2]int32
	for _, n := range []int{0, 1, 2, 10, 100, 400} {
		boxes := randomBoxes(rng, n, 10)
		if n > 3 {
			// A plane's infinite box and two touching boxes.
			boxes[0] = Bounds(plane(), IdentityPose, 0)
			boxes[2] = r3.Box{Min: boxes[1].Max, Max: r3.Add(boxes[1].Max, r3.Vec{X: 1, Y: 1, Z: 1})}
		}
		// Several frames with small moves exercise the kept order.
		for frame := 0; frame < 5; frame++ {
			got = bp.Pairs(boxes, got[:0])
			want := bruteForcePairs(boxes)
			if !slices.Equal(got, want) {
				t.Fatalf("n=%d frame %d: %d pairs, brute force %d", n, frame, len(got), len(want))
			}
			for i := range boxes {
				if math.IsInf(boxes[i].Min.X, 0) {
					continue
				}
				d := r3.Vec{X: 0.3 * (rng.Float64() - 0.5), Y: 0.3 * (rng.Float64() - 0.5)}
				boxes[i] = r3.Box{Min: r3.Add(boxes[i].Min, d), Max: r3.Add(boxes[i].Max, d)}
			}
		}
	}
}

func TestBroadPhaseAppendsAndAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	boxes := randomBoxes(rng, 100, 10)
	var bp BroadPhase
	dst := bp.Pairs(boxes, [][2]int32{{-1, -1}})
	if dst[0] != [2]int32{-1, -1} || len(dst) != 1+len(bruteForcePairs(boxes)) {
		t.Fatalf("Pairs did not append to dst")
	}
	dst = make([][2]int32, 0, 4096)
	if a := testing.AllocsPerRun(20, func() { dst = bp.Pairs(boxes, dst[:0]) }); a != 0 {
		t.Errorf("%v allocations per call", a)
	}
}

// TestBoundsContainShape checks Bounds against points sampled on each
// shape's surface (definition of a bounding box) and its tightness along
// each axis against the support function.
func TestBoundsContainShape(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for _, s := range testShapes[1:] {
		for trial := 0; trial < 50; trial++ {
			p := randomPose(rng, 2)
			b := Bounds(s, p, 0.01)
			cs := makeConvex(s, p)
			for _, d := range []r3.Vec{{X: 1}, {Y: 1}, {Z: 1}} {
				hi := r3.Dot(d, cs.support(d)) + cs.sweep + 0.01
				lo := r3.Dot(d, cs.support(r3.Scale(-1, d))) - cs.sweep - 0.01
				if !near(r3.Dot(d, b.Max), hi, 1e-12) || !near(r3.Dot(d, b.Min), lo, 1e-12) {
					t.Errorf("%v: bounds %v, support extent [%v, %v] along %v", s.Kind, b, lo, hi, d)
				}
			}
		}
	}
	b := Bounds(plane(), IdentityPose, 0)
	if !math.IsInf(b.Min.X, -1) || !math.IsInf(b.Max.Z, 1) {
		t.Errorf("plane bounds %v not infinite", b)
	}
}

func BenchmarkBroadPhase100(b *testing.B) {
	rng := rand.New(rand.NewPCG(13, 14))
	boxes := randomBoxes(rng, 100, 10)
	var bp BroadPhase
	dst := bp.Pairs(boxes, nil)
	b.ReportAllocs()
	for b.Loop() {
		dst = bp.Pairs(boxes, dst[:0])
	}
}
