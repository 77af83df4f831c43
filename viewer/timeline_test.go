package viewer

import (
	"reflect"
	"testing"
)

func uniformTimes(n int, h float64) []float64 {
	t := make([]float64, n)
	for i := range t {
		t[i] = float64(i) * h
	}
	return t
}

// record plays a timeline with the given wall-clock increments and returns
// the frame after each.
func record(tl *Timeline, dts []float64) []int {
	out := make([]int, len(dts))
	for i, dt := range dts {
		tl.Advance(dt)
		out[i] = tl.Frame()
	}
	return out
}

func TestTimelineDeterministic(t *testing.T) {
	times := uniformTimes(1001, 1e-3) // 1 s at 1 ms
	dts := make([]float64, 200)
	for i := range dts {
		dts[i] = 1.0/60 + float64(i%7)*1e-4 // an uneven display clock
	}
	var runs [][]int
	for k := 0; k < 3; k++ {
		tl := NewTimeline(times, nil)
		tl.Play()
		runs = append(runs, record(tl, dts))
	}
	if !reflect.DeepEqual(runs[0], runs[1]) || !reflect.DeepEqual(runs[0], runs[2]) {
		t.Fatal("same increments gave different frame sequences")
	}
	// The frame shown is the last whose time is not after the clock, and
	// the clock is the sum of the increments: compare with that sum.
	tl := NewTimeline(times, nil)
	tl.Play()
	sum := 0.0
	for i, dt := range dts[:50] {
		tl.Advance(dt)
		sum += dt
		want := int(sum / 1e-3)
		if times[want] > sum { // rounding of the division
			want--
		}
		if tl.Frame() != want {
			t.Fatalf("step %d: frame %d, want %d (clock %v)", i, tl.Frame(), want, sum)
		}
	}
}

func TestTimelineSpeedAndEnd(t *testing.T) {
	times := uniformTimes(101, 0.01) // 1 s at 10 ms
	tl := NewTimeline(times, nil)
	tl.Slower() // 1/2
	if tl.Speed() != 0.5 {
		t.Fatalf("speed %v after one Slower, want 0.5", tl.Speed())
	}
	tl.Play()
	tl.Advance(0.5) // half a second of wall time: a quarter second of run
	if tl.Frame() != 25 {
		t.Errorf("frame %d after 0.5 s wall at speed 1/2, want 25", tl.Frame())
	}
	tl.NormalSpeed()
	tl.Faster() // 2
	if changed := tl.Advance(10); !changed || tl.Frame() != 100 || tl.Playing() {
		t.Errorf("past the end: frame %d playing %v, want 100 paused", tl.Frame(), tl.Playing())
	}
	// Playing from the last frame restarts at the first.
	tl.Play()
	if tl.Frame() != 0 || !tl.Playing() {
		t.Errorf("play at end: frame %d playing %v, want 0 playing", tl.Frame(), tl.Playing())
	}
	// Looping wraps instead of pausing.
	tl.SetLoop(true)
	tl.Advance(10)
	if tl.Frame() != 0 || !tl.Playing() {
		t.Errorf("looping past the end: frame %d playing %v, want 0 playing", tl.Frame(), tl.Playing())
	}
	// Paused: no motion.
	tl.Pause()
	if tl.Advance(1) || tl.Frame() != 0 {
		t.Error("paused timeline advanced")
	}
	// The ladder stops at its ends.
	for i := 0; i < 20; i++ {
		tl.Faster()
	}
	if tl.Speed() != Speeds[len(Speeds)-1] {
		t.Errorf("top speed %v", tl.Speed())
	}
	for i := 0; i < 20; i++ {
		tl.Slower()
	}
	if tl.Speed() != Speeds[0] {
		t.Errorf("bottom speed %v", tl.Speed())
	}
}

func TestTimelineStepScrubSeek(t *testing.T) {
	times := uniformTimes(11, 0.1)
	tl := NewTimeline(times, nil)
	tests := []struct {
		name string
		op   func()
		want int
	}{
		{"step back at start stays", func() { tl.Step(-1) }, 0},
		{"step forward", func() { tl.Step(1) }, 1},
		{"step 3", func() { tl.Step(3) }, 4},
		{"step past end clamps", func() { tl.Step(100) }, 10},
		{"seek", func() { tl.Seek(7) }, 7},
		{"seek below clamps", func() { tl.Seek(-3) }, 0},
		{"scrub half", func() { tl.Scrub(0.5) }, 5},
		{"scrub just before a frame", func() { tl.Scrub(0.349) }, 3},
		{"scrub clamps above", func() { tl.Scrub(2) }, 10},
		{"scrub clamps below", func() { tl.Scrub(-1) }, 0},
	}
	for _, tc := range tests {
		tl.Play()
		tc.op()
		if tl.Frame() != tc.want {
			t.Errorf("%s: frame %d, want %d", tc.name, tl.Frame(), tc.want)
		}
	}
	tl.Seek(4)
	tl.Play()
	tl.Step(1)
	if tl.Playing() {
		t.Error("Step should pause")
	}
	if f := tl.Fraction(); !near(f, 0.5, 1e-12) {
		t.Errorf("Fraction at frame 5 of 0..10 = %v, want 0.5", f)
	}
}

func TestTimelineEvents(t *testing.T) {
	times := uniformTimes(100, 0.01)
	tl := NewTimeline(times, []int{40, 10, 40, 75, 200, -1}) // unsorted, repeated, out of range
	if got, want := tl.Events(), []int{10, 40, 75}; !reflect.DeepEqual(got, want) {
		t.Fatalf("events %v, want %v", got, want)
	}
	var got []int
	for tl.NextEvent() {
		got = append(got, tl.Frame())
	}
	if want := []int{10, 40, 75}; !reflect.DeepEqual(got, want) {
		t.Errorf("forward through events: %v, want %v", got, want)
	}
	if tl.Frame() != 75 {
		t.Errorf("after the last event the frame moved to %d", tl.Frame())
	}
	got = got[:0]
	for tl.PrevEvent() {
		got = append(got, tl.Frame())
	}
	if want := []int{40, 10}; !reflect.DeepEqual(got, want) {
		t.Errorf("backward through events: %v, want %v", got, want)
	}
	tl.Seek(41)
	tl.PrevEvent()
	if tl.Frame() != 40 {
		t.Errorf("previous event from 41: %d, want 40", tl.Frame())
	}
	tl.Seek(40)
	tl.Play()
	tl.NextEvent()
	if tl.Frame() != 75 || tl.Playing() {
		t.Errorf("next event from 40: frame %d playing %v, want 75 paused", tl.Frame(), tl.Playing())
	}
}
