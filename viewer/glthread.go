package viewer

import (
	"errors"
	"fmt"
	"os"
	"runtime"
	"sync"

	"github.com/go-gl/gl/v3.3-core/gl"
	"github.com/go-gl/glfw/v3.3/glfw"
)

// ErrNoDisplay reports that no X display is available to open a window or
// a GL context on.
var ErrNoDisplay = errors.New("no X display (DISPLAY is not set)")

// glCalls feeds the one OS thread that makes every GLFW and GL call.
var (
	glCalls   = make(chan func())
	glStart   sync.Once
	glfwReady bool // touched only on the GL thread
	glLoaded  bool
)

// onGL runs f on the GL thread and waits for it. A panic in f (GLFW's Go
// binding panics on some errors, for example when it could not be
// initialized) comes back as an error instead of ending the process.
func onGL(f func() error) error {
	glStart.Do(func() {
		go func() {
			runtime.LockOSThread()
			for call := range glCalls {
				call()
			}
		}()
	})
	done := make(chan error, 1)
	glCalls <- func() {
		defer func() {
			if p := recover(); p != nil {
				done <- fmt.Errorf("OpenGL: %v", p)
			}
		}()
		done <- f()
	}
	return <-done
}

// initGLFW initializes GLFW once; it runs on the GL thread.
func initGLFW() error {
	// Checked every time, so that the error does not depend on whether an
	// earlier call already connected.
	if os.Getenv("DISPLAY") == "" {
		return ErrNoDisplay
	}
	if glfwReady {
		return nil
	}
	if err := glfw.Init(); err != nil {
		return fmt.Errorf("initializing GLFW on display %q: %w", os.Getenv("DISPLAY"), err)
	}
	// The binding returns no error when the X server cannot be reached; the
	// library is then uninitialized and its next call panics. Ask for
	// something harmless to find out here.
	var ok bool
	func() {
		defer func() { recover() }()
		glfw.DefaultWindowHints()
		ok = true
	}()
	if !ok {
		return fmt.Errorf("cannot open X display %q", os.Getenv("DISPLAY"))
	}
	glfwReady = true
	return nil
}

// newContextWindow opens a window with an OpenGL 3.3 core context and makes
// its context current; it runs on the GL thread.
func newContextWindow(width, height int, visible bool, title string, samples int) (*glfw.Window, error) {
	if err := initGLFW(); err != nil {
		return nil, err
	}
	glfw.DefaultWindowHints()
	glfw.WindowHint(glfw.ContextVersionMajor, 3)
	glfw.WindowHint(glfw.ContextVersionMinor, 3)
	glfw.WindowHint(glfw.OpenGLProfile, glfw.OpenGLCoreProfile)
	glfw.WindowHint(glfw.OpenGLForwardCompatible, glfw.True)
	glfw.WindowHint(glfw.Samples, samples)
	v := glfw.False
	if visible {
		v = glfw.True
	}
	glfw.WindowHint(glfw.Visible, v)
	w, err := glfw.CreateWindow(width, height, title, nil, nil)
	if err != nil {
		return nil, fmt.Errorf("creating an OpenGL 3.3 core window: %w", err)
	}
	w.MakeContextCurrent()
	if !glLoaded {
		if err := gl.Init(); err != nil {
			w.Destroy()
			return nil, fmt.Errorf("loading OpenGL functions: %w", err)
		}
		glLoaded = true
	}
	return w, nil
}
