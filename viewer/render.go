package viewer

import (
	"fmt"
	"image"
	"strings"

	"stickslip/sim"

	"github.com/go-gl/gl/v3.3-core/gl"
	"gonum.org/v1/gonum/spatial/r3"
)

const meshVS = `#version 330 core
layout(location = 0) in vec3 aPos;
layout(location = 1) in vec3 aNormal;
uniform mat4 uViewProj;
uniform mat4 uModel;
uniform mat3 uNormal;
out vec3 vNormal;
void main() {
	vNormal = uNormal * aNormal;
	gl_Position = uViewProj * uModel * vec4(aPos, 1.0);
}
` + "\x00"

// Lambert shading with an ambient floor: the colour is only scaled, so a
// body keeps its hue under any light.
const meshFS = `#version 330 core
in vec3 vNormal;
uniform vec4 uColor;
uniform vec3 uLight;
uniform vec3 uFill;
uniform int uUnlit;
out vec4 fragColor;
void main() {
	if (uUnlit != 0) {
		fragColor = uColor;
		return;
	}
	vec3 n = normalize(vNormal);
	float k = 0.3 + 0.6 * max(dot(n, uLight), 0.0) + 0.25 * max(dot(n, uFill), 0.0);
	k = min(k, 1.0);
	fragColor = vec4(uColor.rgb * k, uColor.a);
}
` + "\x00"

const lineVS = `#version 330 core
layout(location = 0) in vec3 aPos;
layout(location = 1) in vec4 aColor;
uniform mat4 uViewProj;
out vec4 vColor;
void main() {
	vColor = aColor;
	gl_Position = uViewProj * vec4(aPos, 1.0);
}
` + "\x00"

const lineFS = `#version 330 core
in vec4 vColor;
out vec4 fragColor;
void main() { fragColor = vColor; }
` + "\x00"

// The 2D pass works in pixels from the top-left corner and in premultiplied
// alpha (image.RGBA's convention for text panels).
const flatVS = `#version 330 core
layout(location = 0) in vec2 aPos;
layout(location = 1) in vec2 aUV;
layout(location = 2) in vec4 aColor;
uniform vec2 uScreen;
out vec2 vUV;
out vec4 vColor;
void main() {
	vUV = aUV;
	vColor = aColor;
	vec2 p = aPos / uScreen * 2.0 - 1.0;
	gl_Position = vec4(p.x, -p.y, 0.0, 1.0);
}
` + "\x00"

const flatFS = `#version 330 core
in vec2 vUV;
in vec4 vColor;
uniform sampler2D uTex;
uniform int uUseTex;
out vec4 fragColor;
void main() {
	if (uUseTex != 0) {
		fragColor = texture(uTex, vUV);
	} else {
		fragColor = vec4(vColor.rgb * vColor.a, vColor.a);
	}
}
` + "\x00"

type glMesh struct {
	vao, vbo, ebo uint32
	count         int32
}

type meshProgram struct {
	id                                                    uint32
	viewProj, model, normal, color, light, fill, unlitLoc int32
}

type textSlot struct {
	tex  uint32
	key  string
	w, h int
	img  *image.RGBA
}

// renderer holds the GL objects of one context. All its methods run on the
// GL thread with its context current.
type renderer struct {
	mesh                meshProgram
	lineProg            uint32
	lineViewProj        int32
	flatProg            uint32
	flatScreen, flatUse int32
	meshes              [numMeshes]glMesh

	// Static lines (grid and trails) are uploaded once.
	staticVAO, staticVBO uint32
	staticCount          int32
	gridCount            int32 // the grid's vertices come first, then the trails'
	dynVAO, dynVBO       uint32
	flatVAO, flatVBO     uint32

	status, contactPanel, help textSlot

	dl   drawList
	flat []float32
	errs []BodyError
}

func compileShader(src string, kind uint32) (uint32, error) {
	s := gl.CreateShader(kind)
	csrc, free := gl.Strs(src)
	gl.ShaderSource(s, 1, csrc, nil)
	free()
	gl.CompileShader(s)
	var ok int32
	gl.GetShaderiv(s, gl.COMPILE_STATUS, &ok)
	if ok == gl.FALSE {
		var n int32
		gl.GetShaderiv(s, gl.INFO_LOG_LENGTH, &n)
		msg := strings.Repeat("\x00", int(n+1))
		gl.GetShaderInfoLog(s, n, nil, gl.Str(msg))
		gl.DeleteShader(s)
		return 0, fmt.Errorf("compiling shader: %s", strings.TrimRight(msg, "\x00"))
	}
	return s, nil
}

func linkProgram(vs, fs string) (uint32, error) {
	v, err := compileShader(vs, gl.VERTEX_SHADER)
	if err != nil {
		return 0, err
	}
	f, err := compileShader(fs, gl.FRAGMENT_SHADER)
	if err != nil {
		gl.DeleteShader(v)
		return 0, err
	}
	p := gl.CreateProgram()
	gl.AttachShader(p, v)
	gl.AttachShader(p, f)
	gl.LinkProgram(p)
	gl.DeleteShader(v)
	gl.DeleteShader(f)
	var ok int32
	gl.GetProgramiv(p, gl.LINK_STATUS, &ok)
	if ok == gl.FALSE {
		var n int32
		gl.GetProgramiv(p, gl.INFO_LOG_LENGTH, &n)
		msg := strings.Repeat("\x00", int(n+1))
		gl.GetProgramInfoLog(p, n, nil, gl.Str(msg))
		gl.DeleteProgram(p)
		return 0, fmt.Errorf("linking shaders: %s", strings.TrimRight(msg, "\x00"))
	}
	return p, nil
}

func uniform(p uint32, name string) int32 { return gl.GetUniformLocation(p, gl.Str(name+"\x00")) }

// newRenderer compiles the shaders and uploads the meshes and the scene's
// static lines into the current context.
func newRenderer(s *Scene) (*renderer, error) {
	r := &renderer{}
	var err error
	if r.mesh.id, err = linkProgram(meshVS, meshFS); err != nil {
		return nil, err
	}
	r.mesh.viewProj = uniform(r.mesh.id, "uViewProj")
	r.mesh.model = uniform(r.mesh.id, "uModel")
	r.mesh.normal = uniform(r.mesh.id, "uNormal")
	r.mesh.color = uniform(r.mesh.id, "uColor")
	r.mesh.light = uniform(r.mesh.id, "uLight")
	r.mesh.fill = uniform(r.mesh.id, "uFill")
	r.mesh.unlitLoc = uniform(r.mesh.id, "uUnlit")
	if r.lineProg, err = linkProgram(lineVS, lineFS); err != nil {
		return nil, err
	}
	r.lineViewProj = uniform(r.lineProg, "uViewProj")
	if r.flatProg, err = linkProgram(flatVS, flatFS); err != nil {
		return nil, err
	}
	r.flatScreen = uniform(r.flatProg, "uScreen")
	r.flatUse = uniform(r.flatProg, "uUseTex")
	gl.UseProgram(r.flatProg)
	gl.Uniform1i(uniform(r.flatProg, "uTex"), 0)

	for id := meshID(0); id < numMeshes; id++ {
		m := buildMesh(id)
		g := &r.meshes[id]
		gl.GenVertexArrays(1, &g.vao)
		gl.BindVertexArray(g.vao)
		gl.GenBuffers(1, &g.vbo)
		gl.BindBuffer(gl.ARRAY_BUFFER, g.vbo)
		gl.BufferData(gl.ARRAY_BUFFER, 4*len(m.verts), gl.Ptr(m.verts), gl.STATIC_DRAW)
		gl.GenBuffers(1, &g.ebo)
		gl.BindBuffer(gl.ELEMENT_ARRAY_BUFFER, g.ebo)
		gl.BufferData(gl.ELEMENT_ARRAY_BUFFER, 4*len(m.indices), gl.Ptr(m.indices), gl.STATIC_DRAW)
		gl.VertexAttribPointerWithOffset(0, 3, gl.FLOAT, false, 24, 0)
		gl.EnableVertexAttribArray(0)
		gl.VertexAttribPointerWithOffset(1, 3, gl.FLOAT, false, 24, 12)
		gl.EnableVertexAttribArray(1)
		g.count = int32(len(m.indices))
	}

	lineVAO := func(vao, vbo *uint32) {
		gl.GenVertexArrays(1, vao)
		gl.BindVertexArray(*vao)
		gl.GenBuffers(1, vbo)
		gl.BindBuffer(gl.ARRAY_BUFFER, *vbo)
		gl.VertexAttribPointerWithOffset(0, 3, gl.FLOAT, false, 28, 0)
		gl.EnableVertexAttribArray(0)
		gl.VertexAttribPointerWithOffset(1, 4, gl.FLOAT, false, 28, 12)
		gl.EnableVertexAttribArray(1)
	}
	lineVAO(&r.staticVAO, &r.staticVBO)
	lineVAO(&r.dynVAO, &r.dynVBO)

	gl.GenVertexArrays(1, &r.flatVAO)
	gl.BindVertexArray(r.flatVAO)
	gl.GenBuffers(1, &r.flatVBO)
	gl.BindBuffer(gl.ARRAY_BUFFER, r.flatVBO)
	gl.VertexAttribPointerWithOffset(0, 2, gl.FLOAT, false, 32, 0)
	gl.EnableVertexAttribArray(0)
	gl.VertexAttribPointerWithOffset(1, 2, gl.FLOAT, false, 32, 8)
	gl.EnableVertexAttribArray(1)
	gl.VertexAttribPointerWithOffset(2, 4, gl.FLOAT, false, 32, 16)
	gl.EnableVertexAttribArray(2)
	gl.BindVertexArray(0)

	for _, t := range []*textSlot{&r.status, &r.contactPanel, &r.help} {
		gl.GenTextures(1, &t.tex)
		gl.BindTexture(gl.TEXTURE_2D, t.tex)
		gl.TexParameteri(gl.TEXTURE_2D, gl.TEXTURE_MIN_FILTER, gl.NEAREST)
		gl.TexParameteri(gl.TEXTURE_2D, gl.TEXTURE_MAG_FILTER, gl.NEAREST)
		gl.TexParameteri(gl.TEXTURE_2D, gl.TEXTURE_WRAP_S, gl.CLAMP_TO_EDGE)
		gl.TexParameteri(gl.TEXTURE_2D, gl.TEXTURE_WRAP_T, gl.CLAMP_TO_EDGE)
	}
	r.uploadStatic(s, true)
	if e := gl.GetError(); e != gl.NO_ERROR {
		return nil, fmt.Errorf("setting up OpenGL objects: error 0x%x", e)
	}
	return r, nil
}

// uploadStatic uploads the grid and, if trails, the trails.
func (r *renderer) uploadStatic(s *Scene, trails bool) {
	var v []float32
	v = s.gridLines(v)
	r.gridCount = int32(len(v) / 7)
	if trails {
		v = s.trailLines(v)
	}
	gl.BindBuffer(gl.ARRAY_BUFFER, r.staticVBO)
	if len(v) > 0 {
		gl.BufferData(gl.ARRAY_BUFFER, 4*len(v), gl.Ptr(v), gl.STATIC_DRAW)
	}
	r.staticCount = int32(len(v) / 7)
}

func (r *renderer) delete() {
	for i := range r.meshes {
		g := &r.meshes[i]
		gl.DeleteBuffers(1, &g.vbo)
		gl.DeleteBuffers(1, &g.ebo)
		gl.DeleteVertexArrays(1, &g.vao)
	}
	for _, p := range []struct{ vao, vbo *uint32 }{{&r.staticVAO, &r.staticVBO}, {&r.dynVAO, &r.dynVBO}, {&r.flatVAO, &r.flatVBO}} {
		gl.DeleteBuffers(1, p.vbo)
		gl.DeleteVertexArrays(1, p.vao)
	}
	for _, t := range []*textSlot{&r.status, &r.contactPanel, &r.help} {
		gl.DeleteTextures(1, &t.tex)
	}
	gl.DeleteProgram(r.mesh.id)
	gl.DeleteProgram(r.lineProg)
	gl.DeleteProgram(r.flatProg)
}

func (r *renderer) drawInstances(list []instance) {
	for i := range list {
		in := &list[i]
		gl.UniformMatrix4fv(r.mesh.model, 1, false, &in.model[0])
		gl.UniformMatrix3fv(r.mesh.normal, 1, false, &in.normal[0])
		gl.Uniform4fv(r.mesh.color, 1, &in.color[0])
		var u int32
		if in.unlit {
			u = 1
		}
		gl.Uniform1i(r.mesh.unlitLoc, u)
		g := &r.meshes[in.mesh]
		gl.BindVertexArray(g.vao)
		gl.DrawElementsWithOffset(gl.TRIANGLES, g.count, gl.UNSIGNED_INT, 0)
	}
}

func (r *renderer) drawLines(vao, vbo uint32, v []float32, count int32, upload bool) {
	if count == 0 {
		return
	}
	gl.UseProgram(r.lineProg)
	gl.BindVertexArray(vao)
	if upload {
		gl.BindBuffer(gl.ARRAY_BUFFER, vbo)
		gl.BufferData(gl.ARRAY_BUFFER, 4*len(v), gl.Ptr(v), gl.STREAM_DRAW)
	}
	gl.DrawArrays(gl.LINES, 0, count)
}

// lightDirs returns the world directions towards the key light, over the
// viewer's left shoulder, and a weaker fill light from the right, so that
// faces turned to the camera are lit and no visible face is flat black.
func lightDirs(cam Camera) (key, fill r3.Vec) {
	right, up := cam.basis()
	back := r3.Unit(r3.Sub(cam.Eye(), cam.Target))
	key = r3.Unit(r3.Add(back, r3.Add(r3.Scale(0.6, up), r3.Scale(-0.4, right))))
	fill = r3.Unit(r3.Add(back, r3.Add(r3.Scale(-0.2, up), r3.Scale(1.2, right))))
	return key, fill
}

// frameInput is everything one drawn frame depends on.
type frameInput struct {
	scene         *Scene
	frame         int
	cam           Camera
	width, height int
	style         *Style
	timeline      *Timeline // nil in snapshots
	selected      int       // index into the frame's contacts, or -1
}

// draw renders one frame into the bound framebuffer.
func (r *renderer) draw(in *frameInput) {
	s, st := in.scene, in.style
	w, h := in.width, in.height
	gl.Viewport(0, 0, int32(w), int32(h))
	bg := toRGBA(backgroundColor)
	gl.ClearColor(bg[0], bg[1], bg[2], 1)
	gl.DepthMask(true)
	gl.Clear(gl.COLOR_BUFFER_BIT | gl.DEPTH_BUFFER_BIT)

	s.build(in.frame, in.cam, h, st, &r.dl)
	vp := in.cam.viewProj(float64(w) / float64(h))
	key, fill := lightDirs(in.cam)
	l32 := [3]float32{float32(key.X), float32(key.Y), float32(key.Z)}
	f32 := [3]float32{float32(fill.X), float32(fill.Y), float32(fill.Z)}

	gl.Enable(gl.DEPTH_TEST)
	gl.DepthFunc(gl.LEQUAL)
	gl.Enable(gl.CULL_FACE)
	gl.Disable(gl.BLEND)
	gl.UseProgram(r.mesh.id)
	gl.UniformMatrix4fv(r.mesh.viewProj, 1, false, &vp[0])
	gl.Uniform3fv(r.mesh.light, 1, &l32[0])
	gl.Uniform3fv(r.mesh.fill, 1, &f32[0])
	gl.Enable(gl.POLYGON_OFFSET_FILL)
	gl.PolygonOffset(1, 1)
	gl.Disable(gl.CULL_FACE) // the ground reads from both sides
	r.drawInstances(r.dl.ground)
	gl.Enable(gl.CULL_FACE)
	gl.Disable(gl.POLYGON_OFFSET_FILL)
	r.drawInstances(r.dl.opaque)

	gl.Enable(gl.BLEND)
	gl.BlendFunc(gl.SRC_ALPHA, gl.ONE_MINUS_SRC_ALPHA)
	gl.UseProgram(r.lineProg)
	gl.UniformMatrix4fv(r.lineViewProj, 1, false, &vp[0])
	count := r.staticCount
	if st.HideGrid || st.HideTrails {
		g := r.gridCount
		switch {
		case st.HideGrid && !st.HideTrails:
			gl.BindVertexArray(r.staticVAO)
			gl.DrawArrays(gl.LINES, g, count-g)
			count = 0
		case st.HideGrid:
			count = 0
		default:
			count = g
		}
	}
	r.drawLines(r.staticVAO, r.staticVBO, nil, count, false)

	// Ghosts: translucent, not writing depth, and pushed back a little so
	// that where a ghost face lies in the plane of the simulated body's
	// face (a logged pose equal to the simulated one) the body shows
	// cleanly instead of flickering between the two.
	gl.UseProgram(r.mesh.id)
	gl.DepthMask(false)
	gl.Enable(gl.POLYGON_OFFSET_FILL)
	gl.PolygonOffset(1, 4)
	r.drawInstances(r.dl.ghosts)
	gl.Disable(gl.POLYGON_OFFSET_FILL)
	gl.DepthMask(true)

	gl.Disable(gl.DEPTH_TEST)
	r.drawLines(r.dynVAO, r.dynVBO, r.dl.overlayLines, int32(len(r.dl.overlayLines)/7), true)
	gl.UseProgram(r.mesh.id)
	r.drawInstances(r.dl.glyphs)
	gl.Disable(gl.CULL_FACE)

	if !st.HideText {
		r.drawOverlay(in)
	}
	gl.BindVertexArray(0)
}

// quad appends a pixel rectangle with texture coordinates and a colour.
func (r *renderer) quad(x0, y0, x1, y1 float32, c rgba) {
	r.flat = append(r.flat,
		x0, y0, 0, 0, c[0], c[1], c[2], c[3],
		x1, y0, 1, 0, c[0], c[1], c[2], c[3],
		x1, y1, 1, 1, c[0], c[1], c[2], c[3],
		x0, y0, 0, 0, c[0], c[1], c[2], c[3],
		x1, y1, 1, 1, c[0], c[1], c[2], c[3],
		x0, y1, 0, 1, c[0], c[1], c[2], c[3])
}

func (r *renderer) flush(useTex bool) {
	if len(r.flat) == 0 {
		return
	}
	var u int32
	if useTex {
		u = 1
	}
	gl.Uniform1i(r.flatUse, u)
	gl.BindVertexArray(r.flatVAO)
	gl.BindBuffer(gl.ARRAY_BUFFER, r.flatVBO)
	gl.BufferData(gl.ARRAY_BUFFER, 4*len(r.flat), gl.Ptr(r.flat), gl.STREAM_DRAW)
	gl.DrawArrays(gl.TRIANGLES, 0, int32(len(r.flat)/8))
	r.flat = r.flat[:0]
}

// panel draws a text panel with its top-left corner at (x, y); the texture
// is redrawn only when the text changes.
func (r *renderer) panel(t *textSlot, lines []string, x, y int) {
	key := joinLines(lines)
	if key != t.key || t.img == nil {
		t.img = renderPanel(lines, t.img)
		t.key = key
		t.w, t.h = t.img.Rect.Dx(), t.img.Rect.Dy()
		gl.BindTexture(gl.TEXTURE_2D, t.tex)
		gl.PixelStorei(gl.UNPACK_ALIGNMENT, 1)
		gl.TexImage2D(gl.TEXTURE_2D, 0, gl.RGBA8, int32(t.w), int32(t.h), 0, gl.RGBA, gl.UNSIGNED_BYTE, gl.Ptr(t.img.Pix))
	}
	gl.ActiveTexture(gl.TEXTURE0)
	gl.BindTexture(gl.TEXTURE_2D, t.tex)
	r.quad(float32(x), float32(y), float32(x+t.w), float32(y+t.h), rgba{})
	r.flush(true)
}

// Geometry of the time bar along the bottom edge, in pixels.
const (
	barMargin = 12
	barHeight = 8
)

// timeBar returns the time bar's rectangle on a width×height viewport.
func timeBar(width, height int) (x0, y0, x1, y1 float64) {
	return barMargin, float64(height - barMargin - barHeight), float64(width - barMargin), float64(height - barMargin)
}

func eventColor(k sim.EventKind) rgba {
	switch k {
	case sim.StickSlip:
		return toRGBA(SlidingColor)
	case sim.SlipStick:
		return toRGBA(StickingColor)
	case sim.LiftOff:
		return toRGBA(SeparatingColor)
	}
	return rgba{1, 1, 1, 1}
}

func (r *renderer) drawOverlay(in *frameInput) {
	s, st := in.scene, in.style
	w, h := in.width, in.height
	gl.Enable(gl.BLEND)
	gl.BlendFunc(gl.ONE, gl.ONE_MINUS_SRC_ALPHA)
	gl.UseProgram(r.flatProg)
	screen := [2]float32{float32(w), float32(h)}
	gl.Uniform2fv(r.flatScreen, 1, &screen[0])

	// Time bar with event ticks and the clock's position.
	run := s.run
	x0, y0, x1, y1 := timeBar(w, h)
	r.quad(float32(x0), float32(y0), float32(x1), float32(y1), toRGBA(barColor))
	frac := 0.0
	if n := len(run.Frames); n > 1 {
		t0, t1 := run.Frames[0].T, run.Frames[n-1].T
		frac = (run.Frames[in.frame].T - t0) / (t1 - t0)
		if in.timeline != nil {
			frac = in.timeline.Fraction()
		}
		for _, e := range s.events {
			ef := (run.Frames[e.Frame].T - t0) / (t1 - t0)
			x := float32(x0 + ef*(x1-x0))
			r.quad(x-0.5, float32(y0-4), x+1, float32(y0), eventColor(e.Kind))
		}
	}
	fx := float32(x0 + frac*(x1-x0))
	r.quad(float32(x0), float32(y0), fx, float32(y1), toRGBA(barFillColor))
	r.quad(fx-1.5, float32(y0-3), fx+1.5, float32(y1+3), rgba{1, 1, 1, 1})
	r.flush(false)

	scale := st.ArrowScale
	if scale == 0 {
		scale = s.DefaultArrowScale()
	}
	r.errs = s.PositionErrors(in.frame, r.errs[:0])
	r.panel(&r.status, s.statusLines(in.frame, in.timeline, st, scale, r.errs), 10, 10)
	if in.selected >= 0 {
		recs := run.ContactsInFrame(in.frame)
		lines := ContactText(&recs[in.selected], run.TimeStep)
		pw, _ := panelSize(lines)
		r.panel(&r.contactPanel, lines, w-pw-10, 10)
	} else if st.Selected != nil {
		lines := []string{fmt.Sprintf("contact %s / %s  feature %d", st.Selected.A, st.Selected.B, st.Selected.Feature), "not present in this frame"}
		pw, _ := panelSize(lines)
		r.panel(&r.contactPanel, lines, w-pw-10, 10)
	}
	if st.ShowHelp {
		lines := append([]string{"keys and mouse"}, HelpText()...)
		pw, ph := panelSize(lines)
		r.panel(&r.help, lines, max(10, (w-pw)/2), max(10, (h-ph)/2))
	}
}

// selectedIndex returns the index of the style's selected contact in the
// frame, or -1.
func selectedIndex(s *Scene, frame int, st *Style) int {
	if st.Selected == nil {
		return -1
	}
	recs := s.run.ContactsInFrame(frame)
	for i := range recs {
		if ID(&recs[i]) == *st.Selected {
			return i
		}
	}
	return -1
}
