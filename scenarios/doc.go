// Package scenarios reads, checks and writes scene files, the YAML documents
// that describe what a rollout simulates, and holds the built-in scenes.
//
// A scene file names the bodies (their shapes, mass properties, surface
// material, starting pose and velocity, and the joint that holds each to its
// parent), the static world geometry, the friction and restitution of
// material pairs, external loads, the actuators on joints and the
// controller that commands them, gravity and the time-stepping settings.
// Controller tables (targets, efforts) may live in CSV files beside the
// scene file.
// Load turns it into a sim.Model and sim.Settings; Marshal writes a scene
// back so that loading it again gives the same model.
//
// Conventions, stated once:
//
//   - SI units throughout (m, kg, s, N, N·m, rad), except that rotations
//     written as a turn about an axis take their angle in degrees, the unit
//     people measure inclines in.
//   - Quaternions are Hamilton quaternions written [w, x, y, z].
//   - Vectors in the file are world-frame unless the field says otherwise
//     (shape poses are in the body frame, joint frames in the parent frame,
//     load points in the body frame).
//   - World z is up: the default gravity is (0, 0, −9.80665) m/s², standard
//     gravity (3rd CGPM, 1901).
//   - A box's size is its full extents; the model holds half extents.
//
// Every error is an *Error that names the file, line, column and field and
// says what would be valid. Values supplied by an override (--set) name the
// override instead of a line. The loader never panics on bad input; a fuzz
// target checks that.
package scenarios
