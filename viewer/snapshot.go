package viewer

import (
	"fmt"
	"image"
	"image/png"
	"os"
	"path/filepath"

	"github.com/go-gl/gl/v3.3-core/gl"
	"github.com/go-gl/glfw/v3.3/glfw"
)

// Renderer draws frames of a scene off screen, into images of a fixed size.
// It owns a hidden window whose GL context lives on the package's GL
// thread; any goroutine may call its methods, one at a time.
type Renderer struct {
	scene                   *Scene
	width, height           int
	samples                 int32
	win                     *glfw.Window
	r                       *renderer
	msFBO, msColor, msDepth uint32 // multisampled target (samples > 0)
	fbo, color, depth       uint32 // resolved target that is read back
	closed                  bool
}

// RendererOptions tune off-screen rendering. The zero value asks for 4×
// multisampling.
type RendererOptions struct {
	// NoMultisample turns antialiasing off: edges are then exact pixel
	// boundaries and frames render faster.
	NoMultisample bool
}

// NewRenderer opens a hidden window with an OpenGL 3.3 core context and
// prepares to draw the scene at width×height pixels. It returns
// ErrNoDisplay (wrapped) when no X display is set.
func NewRenderer(s *Scene, width, height int, opt RendererOptions) (*Renderer, error) {
	if width < 16 || height < 16 || width > 8192 || height > 8192 {
		return nil, fmt.Errorf("image size %dx%d: want 16 to 8192 pixels a side", width, height)
	}
	rd := &Renderer{scene: s, width: width, height: height}
	err := onGL(func() error {
		w, err := newContextWindow(16, 16, false, "stickslip snapshot", 0)
		if err != nil {
			return err
		}
		rd.win = w
		if rd.r, err = newRenderer(s); err != nil {
			w.Destroy()
			return err
		}
		if !opt.NoMultisample {
			var maxS int32
			gl.GetIntegerv(gl.MAX_SAMPLES, &maxS)
			rd.samples = min(4, maxS)
		}
		return rd.makeTargets()
	})
	if err != nil {
		return nil, err
	}
	return rd, nil
}

func (rd *Renderer) makeTargets() error {
	w, h := int32(rd.width), int32(rd.height)
	target := func(fbo, color, depth *uint32, samples int32) error {
		gl.GenFramebuffers(1, fbo)
		gl.BindFramebuffer(gl.FRAMEBUFFER, *fbo)
		gl.GenRenderbuffers(1, color)
		gl.BindRenderbuffer(gl.RENDERBUFFER, *color)
		gl.RenderbufferStorageMultisample(gl.RENDERBUFFER, samples, gl.RGBA8, w, h)
		gl.FramebufferRenderbuffer(gl.FRAMEBUFFER, gl.COLOR_ATTACHMENT0, gl.RENDERBUFFER, *color)
		gl.GenRenderbuffers(1, depth)
		gl.BindRenderbuffer(gl.RENDERBUFFER, *depth)
		gl.RenderbufferStorageMultisample(gl.RENDERBUFFER, samples, gl.DEPTH24_STENCIL8, w, h)
		gl.FramebufferRenderbuffer(gl.FRAMEBUFFER, gl.DEPTH_STENCIL_ATTACHMENT, gl.RENDERBUFFER, *depth)
		if st := gl.CheckFramebufferStatus(gl.FRAMEBUFFER); st != gl.FRAMEBUFFER_COMPLETE {
			return fmt.Errorf("off-screen framebuffer of %dx%d with %d samples is incomplete (status 0x%x)", w, h, samples, st)
		}
		return nil
	}
	if err := target(&rd.fbo, &rd.color, &rd.depth, 0); err != nil {
		return err
	}
	if rd.samples > 0 {
		if err := target(&rd.msFBO, &rd.msColor, &rd.msDepth, rd.samples); err != nil {
			return err
		}
	}
	return nil
}

// Size returns the image size in pixels.
func (rd *Renderer) Size() (width, height int) { return rd.width, rd.height }

// Render draws frame seen by cam with style st (nil: defaults) into dst,
// which is allocated when nil or of the wrong size, and returns it. The
// image is opaque, its origin at the top-left corner.
func (rd *Renderer) Render(frame int, cam Camera, st *Style, dst *image.RGBA) (*image.RGBA, error) {
	if rd.closed {
		return nil, fmt.Errorf("viewer: Render after Close")
	}
	run := rd.scene.run
	if frame < 0 || frame >= len(run.Frames) {
		return nil, fmt.Errorf("frame %d is outside the run's frames 0 to %d", frame, len(run.Frames)-1)
	}
	if st == nil {
		st = &Style{}
	}
	if dst == nil || dst.Rect.Dx() != rd.width || dst.Rect.Dy() != rd.height || dst.Rect.Min != (image.Point{}) {
		dst = image.NewRGBA(image.Rect(0, 0, rd.width, rd.height))
	}
	in := frameInput{scene: rd.scene, frame: frame, cam: cam, width: rd.width, height: rd.height,
		style: st, selected: selectedIndex(rd.scene, frame, st)}
	err := onGL(func() error {
		rd.win.MakeContextCurrent()
		if rd.samples > 0 {
			gl.BindFramebuffer(gl.FRAMEBUFFER, rd.msFBO)
		} else {
			gl.BindFramebuffer(gl.FRAMEBUFFER, rd.fbo)
		}
		rd.r.draw(&in)
		if rd.samples > 0 {
			gl.BindFramebuffer(gl.READ_FRAMEBUFFER, rd.msFBO)
			gl.BindFramebuffer(gl.DRAW_FRAMEBUFFER, rd.fbo)
			w, h := int32(rd.width), int32(rd.height)
			gl.BlitFramebuffer(0, 0, w, h, 0, 0, w, h, gl.COLOR_BUFFER_BIT, gl.NEAREST)
		}
		gl.BindFramebuffer(gl.READ_FRAMEBUFFER, rd.fbo)
		gl.PixelStorei(gl.PACK_ALIGNMENT, 1)
		gl.ReadPixels(0, 0, int32(rd.width), int32(rd.height), gl.RGBA, gl.UNSIGNED_BYTE, gl.Ptr(dst.Pix))
		if e := gl.GetError(); e != gl.NO_ERROR {
			return fmt.Errorf("OpenGL error 0x%x while rendering frame %d", e, frame)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	flipOpaque(dst)
	return dst, nil
}

// flipOpaque turns GL's bottom-up rows into image order and sets every
// alpha to opaque (blending leaves the framebuffer's alpha meaningless).
func flipOpaque(img *image.RGBA) {
	h, stride := img.Rect.Dy(), img.Stride
	for y := 0; y < h/2; y++ {
		a := img.Pix[y*stride : (y+1)*stride]
		b := img.Pix[(h-1-y)*stride : (h-y)*stride]
		for i := range a {
			a[i], b[i] = b[i], a[i]
		}
	}
	for i := 3; i < len(img.Pix); i += 4 {
		img.Pix[i] = 0xff
	}
}

// Close releases the renderer's GL objects and its window.
func (rd *Renderer) Close() error {
	if rd.closed {
		return nil
	}
	rd.closed = true
	return onGL(func() error {
		rd.win.MakeContextCurrent()
		rd.r.delete()
		for _, f := range []*uint32{&rd.fbo, &rd.msFBO} {
			if *f != 0 {
				gl.DeleteFramebuffers(1, f)
			}
		}
		for _, b := range []*uint32{&rd.color, &rd.depth, &rd.msColor, &rd.msDepth} {
			if *b != 0 {
				gl.DeleteRenderbuffers(1, b)
			}
		}
		glfw.DetachCurrentContext()
		rd.win.Destroy()
		return nil
	})
}

// Snapshot renders one frame of the scene at width×height pixels with the
// camera (nil: fitted to the whole motion) and style (nil: defaults).
func Snapshot(s *Scene, frame, width, height int, cam *Camera, st *Style) (*image.RGBA, error) {
	rd, err := NewRenderer(s, width, height, RendererOptions{})
	if err != nil {
		return nil, err
	}
	defer rd.Close()
	c := FitCamera(s.Bounds(), float64(width)/float64(height))
	if cam != nil {
		c = *cam
	}
	return rd.Render(frame, c, st, nil)
}

// WritePNG encodes img as PNG to path atomically: it writes a temporary
// file in the same directory and renames it over path, so readers never see
// a partial image.
func WritePNG(path string, img image.Image) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return err
	}
	tmp := f.Name()
	defer os.Remove(tmp) // after a successful rename there is nothing to remove
	if err := png.Encode(f, img); err != nil {
		f.Close()
		return fmt.Errorf("encoding %s: %w", path, err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	if err := os.Chmod(tmp, 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, path)
}
