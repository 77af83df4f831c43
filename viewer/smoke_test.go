package viewer

import "testing"

func TestSmokeSnapshot(t *testing.T) {
	needDisplay(t)
	m, r := boxOnFloor(100, 2, 50)
	s, err := NewScene(m, r, nil)
	if err != nil {
		t.Fatal(err)
	}
	img, err := Snapshot(s, 99, 640, 480, nil, &Style{Selected: &ContactID{"floor", "crate", 2}})
	if err != nil {
		t.Fatal(err)
	}
	if err := WritePNG("/tmp/smoke.png", img); err != nil {
		t.Fatal(err)
	}
}
