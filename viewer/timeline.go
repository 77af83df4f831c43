package viewer

import "sort"

// Speeds are the replay rates a Timeline steps through, in simulated
// seconds per wall-clock second. Contact events last milliseconds, so the
// ladder reaches far into slow motion.
var Speeds = []float64{1.0 / 64, 1.0 / 32, 1.0 / 16, 1.0 / 8, 1.0 / 4, 1.0 / 2, 1, 2, 4, 8}

const normalSpeed = 6 // index of 1 in Speeds

// Timeline is the replay clock of a run: which frame is shown, whether it
// plays and how fast. It is driven by the caller's wall-clock increments
// (Advance), never by reading a clock itself, so the same calls always give
// the same frames.
//
// The clock holds a simulated time; the frame shown is the last one whose
// time is not after the clock.
type Timeline struct {
	times   []float64
	events  []int
	frame   int
	t       float64
	playing bool
	speed   int
	loop    bool
}

// NewTimeline returns a paused timeline at the first of the frames with the
// given increasing times, with the given contact-event frames (in any
// order; duplicates are ignored) for NextEvent and PrevEvent.
func NewTimeline(times []float64, eventFrames []int) *Timeline {
	ev := append([]int(nil), eventFrames...)
	sort.Ints(ev)
	uniq := ev[:0]
	for i, f := range ev {
		if f < 0 || f >= len(times) {
			continue
		}
		if i == 0 || f != ev[i-1] {
			uniq = append(uniq, f)
		}
	}
	tl := &Timeline{times: times, events: uniq, speed: normalSpeed}
	if len(times) > 0 {
		tl.t = times[0]
	}
	return tl
}

// Frame returns the index of the frame shown.
func (tl *Timeline) Frame() int { return tl.frame }

// Len returns the number of frames.
func (tl *Timeline) Len() int { return len(tl.times) }

// Time returns the replay clock in simulated seconds.
func (tl *Timeline) Time() float64 { return tl.t }

// Playing reports whether the clock advances.
func (tl *Timeline) Playing() bool { return tl.playing }

// Speed returns the replay rate in simulated seconds per wall second.
func (tl *Timeline) Speed() float64 { return Speeds[tl.speed] }

// Events returns the sorted frames of contact events.
func (tl *Timeline) Events() []int { return tl.events }

// SetLoop makes playback wrap to the first frame at the end instead of
// pausing on the last.
func (tl *Timeline) SetLoop(loop bool) { tl.loop = loop }

// Play starts the clock, from the first frame if it stands at the end.
func (tl *Timeline) Play() {
	if len(tl.times) == 0 {
		return
	}
	if tl.frame == len(tl.times)-1 {
		tl.Seek(0)
	}
	tl.playing = true
}

// Pause stops the clock.
func (tl *Timeline) Pause() { tl.playing = false }

// TogglePlay plays when paused and pauses when playing.
func (tl *Timeline) TogglePlay() {
	if tl.playing {
		tl.Pause()
	} else {
		tl.Play()
	}
}

// Faster and Slower move one rung up or down the Speeds ladder;
// NormalSpeed returns to real time.
func (tl *Timeline) Faster() {
	if tl.speed < len(Speeds)-1 {
		tl.speed++
	}
}

// Slower moves one rung down the Speeds ladder.
func (tl *Timeline) Slower() {
	if tl.speed > 0 {
		tl.speed--
	}
}

// NormalSpeed sets the replay rate to real time.
func (tl *Timeline) NormalSpeed() { tl.speed = normalSpeed }

// Advance moves the clock by wall seconds times the speed while playing
// and reports whether the frame changed. Reaching the last frame pauses
// (or wraps to the first when looping).
func (tl *Timeline) Advance(wall float64) bool {
	if !tl.playing || len(tl.times) == 0 || !(wall > 0) {
		return false
	}
	old := tl.frame
	tl.t += wall * Speeds[tl.speed]
	last := tl.times[len(tl.times)-1]
	if tl.t >= last {
		if tl.loop && len(tl.times) > 1 {
			tl.t = tl.times[0]
			tl.frame = 0
		} else {
			tl.t = last
			tl.frame = len(tl.times) - 1
			tl.playing = false
		}
	} else {
		tl.frame = tl.frameAt(tl.t)
	}
	return tl.frame != old
}

// frameAt returns the last frame whose time is not after t (0 before the
// first).
func (tl *Timeline) frameAt(t float64) int {
	i := sort.Search(len(tl.times), func(i int) bool { return tl.times[i] > t })
	if i == 0 {
		return 0
	}
	return i - 1
}

// Seek shows frame i (clamped to the run) and sets the clock to its time.
func (tl *Timeline) Seek(i int) {
	if len(tl.times) == 0 {
		return
	}
	i = max(0, min(i, len(tl.times)-1))
	tl.frame = i
	tl.t = tl.times[i]
}

// Step pauses and moves n frames forward (negative: back), stopping at the
// ends.
func (tl *Timeline) Step(n int) {
	tl.Pause()
	tl.Seek(tl.frame + n)
}

// Scrub sets the clock to the fraction f ∈ [0, 1] of the run's time span
// (clamped) and shows the frame at that time.
func (tl *Timeline) Scrub(f float64) {
	if len(tl.times) == 0 {
		return
	}
	f = max(0, min(f, 1))
	t0, t1 := tl.times[0], tl.times[len(tl.times)-1]
	tl.t = t0 + f*(t1-t0)
	tl.frame = tl.frameAt(tl.t)
}

// Fraction returns the clock's position in the run's time span, in [0, 1].
func (tl *Timeline) Fraction() float64 {
	if len(tl.times) < 2 {
		return 0
	}
	t0, t1 := tl.times[0], tl.times[len(tl.times)-1]
	return (tl.t - t0) / (t1 - t0)
}

// NextEvent pauses and shows the first contact event after the current
// frame; it reports false, and stays, when there is none.
func (tl *Timeline) NextEvent() bool {
	i := sort.SearchInts(tl.events, tl.frame+1)
	if i == len(tl.events) {
		return false
	}
	tl.Pause()
	tl.Seek(tl.events[i])
	return true
}

// PrevEvent pauses and shows the last contact event before the current
// frame; it reports false, and stays, when there is none.
func (tl *Timeline) PrevEvent() bool {
	i := sort.SearchInts(tl.events, tl.frame) - 1
	if i < 0 {
		return false
	}
	tl.Pause()
	tl.Seek(tl.events[i])
	return true
}
