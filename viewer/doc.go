// Package viewer replays run files in an OpenGL window and renders single
// frames of them to images without one.
//
// # What it draws
//
// The bodies of a sim.Model posed by the frames of a sim.Run, shaded with a
// light that follows the camera; static shapes in neutral grey, a static
// plane as a finite patch with a grid whose spacing is written on screen;
// the run's contact points as markers coloured by their state, with the
// normal and friction forces (impulse divided by the time step) as arrows
// from the contact point; and, when a logged trajectory is given, the
// logged poses as translucent ghosts with the position error between
// simulated and logged body origins.
//
// # Conventions
//
// World coordinates are those of the simulator: SI units, right-handed,
// z up. The camera orbits a target point: Azimuth is measured about +z from
// +x, Elevation above the xy-plane, both in radians. Pixel coordinates put
// the origin at the top-left corner with y growing downwards, as in package
// image, so Camera.Project gives the pixel of an image returned by Snapshot.
// Force arrows are drawn at ArrowScale metres per newton; the default maps
// the largest contact force of the run to a quarter of the scene radius.
//
// # Pure logic and GL
//
// The timeline (Timeline), the camera (Camera), contact events
// (ContactEvents), the log reader (ReadTrajectory) and the tessellation of
// shapes are plain Go and need no window. Everything that calls OpenGL or
// GLFW runs on one dedicated OS thread owned by this package: each public
// entry point that draws (NewRenderer's methods, Snapshot, View) hands its
// work to that thread and waits, so callers may use any goroutine, and GL
// contexts never migrate between threads. GLFW documents that on macOS its
// calls must come from the process's main thread; the supported platform
// here is Linux with X11 (a real display or Xvfb with Mesa's software
// renderer, no GPU needed), where a dedicated thread is allowed.
//
// The GL code targets the OpenGL 3.3 core profile with shaders only.
package viewer
