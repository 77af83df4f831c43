package calibrate

import (
	"bytes"
	"encoding/json"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"stickslip/sim"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// ReportFormat identifies report.json files.
const ReportFormat = "stickslip-fit-report/1"

// ReportInfo describes the inputs of a fit for its report.
type ReportInfo struct {
	Scene       string
	FittedScene string // path of the fitted scene file, if written
	Train       []string
	HeldOut     []string
	Options     Options
	// Snapshots are pictures of key contact events (rendered by the
	// caller, which can reach the viewer), shown in their own section.
	Snapshots []ReportImage
}

// ReportImage is a PNG picture for the report, with its caption.
type ReportImage struct {
	File    string // file name inside the report directory
	Caption string
	PNG     []byte
}

// num is a JSON number that writes null when not finite.
type num float64

func (n num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

func nums(v []float64) []num {
	out := make([]num, len(v))
	for i, x := range v {
		out[i] = num(x)
	}
	return out
}

type jsonParam struct {
	Name            string `json:"name"`
	Initial         num    `json:"initial"`
	Value           num    `json:"value"`
	StdErr          num    `json:"standard_error"`
	CI95            [2]num `json:"interval_95"`
	Bounds          [2]num `json:"bounds"`
	AtBound         bool   `json:"at_bound"`
	RelErr          num    `json:"relative_error_from_logs"`
	Identifiability string `json:"identifiability"`
	Note            string `json:"note"`
}

type jsonErrors struct {
	Loss     num `json:"loss"`
	RMS      num `json:"rms_whitened"`
	Position num `json:"rms_position_m"`
	Rotation num `json:"rms_rotation_rad"`
	Joint    num `json:"rms_joint"`
	Rows     int `json:"rows"`
}

func jsonErr(e *ErrorSummary) *jsonErrors {
	if e == nil {
		return nil
	}
	return &jsonErrors{num(e.Loss), num(e.RMS), num(e.Position), num(e.Rotation), num(e.Joint), e.Rows}
}

type jsonReport struct {
	Format         string        `json:"format"`
	Scene          string        `json:"scene"`
	FittedScene    string        `json:"fitted_scene,omitempty"`
	Train          []string      `json:"train"`
	HeldOut        []string      `json:"held_out"`
	Window         float64       `json:"window_s"`
	Smoothing      []float64     `json:"smoothing"`
	Converged      bool          `json:"converged"`
	Warnings       []string      `json:"warnings"`
	Params         []jsonParam   `json:"parameters"`
	Correlations   [][]num       `json:"correlations"`
	SingularValues []num         `json:"singular_values"`
	Condition      num           `json:"condition"`
	Sigma2         num           `json:"residual_variance"`
	DOF            int           `json:"degrees_of_freedom"`
	Windows        int           `json:"windows"`
	Rows           int           `json:"residual_rows"`
	Evaluations    int           `json:"evaluations"`
	Stages         []StageResult `json:"stages"`
	TrainBefore    *jsonErrors   `json:"train_before"`
	TrainAfter     *jsonErrors   `json:"train_after"`
	HeldOutBefore  *jsonErrors   `json:"held_out_before,omitempty"`
	HeldOutAfter   *jsonErrors   `json:"held_out_after,omitempty"`
	History        []TracePoint  `json:"history"`
	Plots          []string      `json:"plots"`
}

// JSON returns the report.json document of a fit. It holds no times or
// host details, so equal inputs give equal bytes.
func (c *Calibration) JSON(info ReportInfo, plots []string) ([]byte, error) {
	opts := info.Options.withDefaults()
	r := jsonReport{Format: ReportFormat, Scene: info.Scene, FittedScene: info.FittedScene,
		Train: nonNil(info.Train), HeldOut: nonNil(info.HeldOut), Window: opts.Window, Smoothing: opts.Smoothing,
		Converged: c.Converged, Warnings: nonNil(c.Warnings), SingularValues: nums(c.SingularValues), Condition: num(c.Condition),
		Sigma2: num(c.Sigma2), DOF: c.DOF, Windows: c.Windows, Rows: c.Rows, Evaluations: c.Evaluations,
		Stages: c.Stages, TrainBefore: jsonErr(&c.TrainBefore), TrainAfter: jsonErr(&c.TrainAfter),
		HeldOutBefore: jsonErr(c.HeldOutBefore), HeldOutAfter: jsonErr(c.HeldOutAfter), History: c.History, Plots: nonNil(plots)}
	for _, p := range c.Params {
		r.Params = append(r.Params, jsonParam{Name: p.Name, Initial: num(p.Initial), Value: num(p.Value), StdErr: num(p.StdErr),
			CI95: [2]num{num(p.Lower95), num(p.Upper95)}, Bounds: [2]num{num(p.Lower), num(p.Upper)}, AtBound: p.AtBound,
			RelErr: num(p.RelErr), Identifiability: p.Class.String(), Note: p.Note})
	}
	for _, row := range c.Corr {
		r.Correlations = append(r.Correlations, nums(row))
	}
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// WriteReport writes the report directory dir atomically: report.json,
// index.html and the PNG plots go to a hidden sibling directory that
// replaces dir when complete. An existing dir is replaced only if it is
// empty or holds a report.json.
func (c *Calibration) WriteReport(dir string, info ReportInfo) error {
	files, err := c.ReportFiles(info)
	if err != nil {
		return err
	}
	return sim.WriteDir(dir, "report.json", files)
}

// plotPNG renders a plot as PNG bytes of the given size.
func plotPNG(p *plot.Plot, w, h vg.Length) ([]byte, error) {
	wt, err := p.WriterTo(w, h, "png")
	if err != nil {
		return nil, err
	}
	var b bytes.Buffer
	if _, err := wt.WriteTo(&b); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// ReportFiles renders the report: file name → contents.
func (c *Calibration) ReportFiles(info ReportInfo) (map[string][]byte, error) {
	files := map[string][]byte{}
	var plots []string
	addPlot := func(name string, p *plot.Plot, w, h vg.Length) error {
		b, err := plotPNG(p, w, h)
		if err != nil {
			return err
		}
		files[name] = b
		plots = append(plots, name)
		return nil
	}
	if len(c.History) > 0 {
		lp, err := c.lossPlot()
		if err != nil {
			return nil, err
		}
		if err := addPlot("loss.png", lp, 6*vg.Inch, 3.5*vg.Inch); err != nil {
			return nil, err
		}
		if err := addPlot("parameters.png", c.paramPlot(), 6*vg.Inch, 3.5*vg.Inch); err != nil {
			return nil, err
		}
	}
	for _, set := range []struct {
		o      *Objective
		label  string
		names  []string
		x0, x1 []float64
	}{{c.Train, "train", info.Train, c.initialFull, c.fittedFull}, {c.HeldOut, "held-out", info.HeldOut, c.Initial, c.Fitted}} {
		if set.o == nil {
			continue
		}
		before, _, err := set.o.Simulate(set.x0)
		if err != nil {
			before = nil // drawn without the "before" curves
		}
		after, resid, err := set.o.Simulate(set.x1)
		if err != nil {
			return nil, fmt.Errorf("simulating the %s logs at the fitted values: %w", set.label, err)
		}
		for li := range set.o.logs {
			p, err := set.o.trajectoryPlot(li, before, after)
			if err != nil {
				return nil, err
			}
			if err := addPlot(fmt.Sprintf("%s-%d.png", set.label, li+1), p, 7*vg.Inch, 6*vg.Inch); err != nil {
				return nil, err
			}
		}
		if set.label == "train" {
			if err := addPlot("residuals.png", set.o.residualPlot(resid), 6*vg.Inch, 3.5*vg.Inch); err != nil {
				return nil, err
			}
		}
	}
	for _, im := range info.Snapshots {
		if im.File == "" || strings.ContainsAny(im.File, `/\`) || files[im.File] != nil {
			return nil, fmt.Errorf("snapshot file name %q is empty, has a path or is taken", im.File)
		}
		files[im.File] = im.PNG
	}
	j, err := c.JSON(info, plots)
	if err != nil {
		return nil, err
	}
	files["report.json"] = j
	h, err := c.html(info, plots)
	if err != nil {
		return nil, err
	}
	files["index.html"] = h
	return files, nil
}

var palette = []color.Color{
	color.RGBA{R: 0x1f, G: 0x5f, B: 0xa8, A: 0xff},
	color.RGBA{R: 0xc4, G: 0x4e, B: 0x1c, A: 0xff},
	color.RGBA{R: 0x2e, G: 0x8b, B: 0x57, A: 0xff},
	color.RGBA{R: 0x80, G: 0x4d, B: 0xa0, A: 0xff},
	color.RGBA{R: 0xb8, G: 0x8a, B: 0x00, A: 0xff},
}

// historyPlot draws a positive quantity per step on a log scale.
func historyPlot(title, xLabel, yLabel string, pts plotter.XYs) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = title
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = plot.LogTicks{Prec: 1}
	for i := range pts {
		pts[i].Y = math.Max(pts[i].Y, 1e-300)
	}
	l, s, err := plotter.NewLinePoints(pts)
	if err != nil {
		return nil, err
	}
	l.Color, s.Color = palette[0], palette[0]
	p.Add(l, s)
	return p, nil
}

func (c *Calibration) lossPlot() (*plot.Plot, error) {
	var pts plotter.XYs
	for i, h := range c.History {
		pts = append(pts, plotter.XY{X: float64(i), Y: h.Loss})
	}
	return historyPlot("Loss per accepted step", "step (all smoothing stages)", "½‖r‖² (whitened)", pts)
}

func (c *Calibration) paramPlot() *plot.Plot {
	p := plot.New()
	p.Title.Text = "Parameter traces (value / fitted value)"
	p.X.Label.Text = "step (all smoothing stages)"
	p.Y.Label.Text = "relative value"
	p.Legend.Top = true
	for j, pr := range c.Params {
		var pts plotter.XYs
		for i, h := range c.History {
			v := h.X[j]
			if pr.Value != 0 {
				v /= pr.Value
			}
			pts = append(pts, plotter.XY{X: float64(i), Y: v})
		}
		l, _ := plotter.NewLine(pts)
		l.Color = palette[j%len(palette)]
		l.Width = vg.Points(1.5)
		p.Add(l)
		p.Legend.Add(pr.Name, l)
	}
	return p
}

// plotChannel is one logged quantity drawn against the simulation.
type plotChannel struct {
	name  string
	kind  uint8
	idx   int // body or joint
	axis  int
	col   int
	span  float64
	sigma float64
}

// channels picks up to three logged position or joint channels that move
// the most relative to their noise.
func (o *Objective) channels(li int) []plotChannel {
	bl := o.logs[li]
	lg := bl.log
	var out []plotChannel
	span := func(col int) float64 {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, v := range lg.Values[col] {
			if !math.IsNaN(v) {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
		return hi - lo
	}
	sigma := map[int]float64{}
	for _, w := range o.windows {
		for _, r := range w.rows {
			sigma[int(r.column)] = r.sigma
		}
	}
	for b := range o.model.Bodies {
		for a, col := range bl.pos[b] {
			if col >= 0 {
				out = append(out, plotChannel{name: lg.Columns[col], kind: kindPos, idx: b, axis: a, col: col, span: span(col), sigma: sigma[col]})
			}
		}
	}
	for j, col := range bl.jq {
		out = append(out, plotChannel{name: lg.Columns[col], kind: kindJoint, idx: j, col: col, span: span(col), sigma: sigma[col]})
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].span/out[i].sigma > out[j].span/out[j].sigma })
	// Channels that stay within a few σ show nothing of the fit.
	keep := 1
	for keep < len(out) && keep < 3 && out[keep].span > 3*out[keep].sigma {
		keep++
	}
	if len(out) > keep {
		out = out[:keep]
	}
	return out
}

func (ch *plotChannel) of(f *sim.Frame) float64 {
	if ch.kind == kindJoint {
		return f.Joints[ch.idx].Q
	}
	return component(f.Bodies[ch.idx].Pose.Pos, ch.axis)
}

// trajectoryPlot draws the most active channels of log li: the log as
// points, each window's simulation before (dashed) and after the fit.
func (o *Objective) trajectoryPlot(li int, before, after []Trace) (*plot.Plot, error) {
	lg := o.logs[li].log
	chans := o.channels(li)
	p := plot.New()
	p.Title.Text = fmt.Sprintf("%s: log and simulation before and after the fit", filepath.Base(lg.File))
	p.X.Label.Text = "t (s)"
	p.Y.Label.Text = "value (m or rad)"
	p.Legend.Top = true
	p.Legend.Left = true
	for ci, ch := range chans {
		col := palette[ci%len(palette)]
		var logPts plotter.XYs
		for i, t := range lg.T {
			if v := lg.Values[ch.col][i]; !math.IsNaN(v) {
				logPts = append(logPts, plotter.XY{X: t, Y: v})
			}
		}
		sc, err := plotter.NewScatter(logPts)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle.Color = col
		sc.GlyphStyle.Radius = vg.Points(1.5)
		p.Add(sc)
		p.Legend.Add(ch.name+" log", sc)
		for k, tr := range [][]Trace{before, after} {
			for wi, w := range tr {
				if w.Log != li {
					continue
				}
				var pts plotter.XYs
				for i := range w.Frames {
					pts = append(pts, plotter.XY{X: w.Times[i], Y: ch.of(&w.Frames[i])})
				}
				l, err := plotter.NewLine(pts)
				if err != nil {
					return nil, err
				}
				l.Color = col
				if k == 0 {
					l.Color = color.Gray{Y: 0x90}
					l.Dashes = []vg.Length{vg.Points(3), vg.Points(2)}
				}
				l.Width = vg.Points(1)
				p.Add(l)
				if wi == firstWindow(tr, li) {
					p.Legend.Add(ch.name+[]string{" before", " after"}[k], l)
				}
			}
		}
	}
	return p, nil
}

func firstWindow(tr []Trace, li int) int {
	for i, w := range tr {
		if w.Log == li {
			return i
		}
	}
	return -1
}

// residualPlot draws the whitened residuals after the fit against time.
func (o *Objective) residualPlot(r []float64) *plot.Plot {
	p := plot.New()
	p.Title.Text = "Residuals after the fit (whitened: units of σ)"
	p.X.Label.Text = "t (s)"
	p.Y.Label.Text = "r"
	p.Legend.Top = true
	var pts [3]plotter.XYs
	for _, w := range o.windows {
		row := w.off
		for _, rr := range w.rows {
			for c := 0; c < rr.n(); c++ {
				pts[rr.kind] = append(pts[rr.kind], plotter.XY{X: w.times[rr.k], Y: r[row]})
				row++
			}
		}
	}
	for k := range pts {
		if len(pts[k]) == 0 {
			continue
		}
		s, _ := plotter.NewScatter(pts[k])
		s.GlyphStyle.Color = palette[k]
		s.GlyphStyle.Radius = vg.Points(1.2)
		s.GlyphStyle.Shape = draw.CircleGlyph{}
		p.Add(s)
		p.Legend.Add(KindNames[k], s)
	}
	return p
}

var reportTmpl = template.Must(template.New("report").Funcs(template.FuncMap{
	"g": func(v float64) string {
		if math.IsNaN(v) {
			return "—"
		}
		if math.IsInf(v, 0) {
			return "∞"
		}
		return fmt.Sprintf("%.4g", v)
	},
	"mm":  func(v float64) string { return fmtUnit(v, 1e3, "mm") },
	"deg": func(v float64) string { return fmtUnit(v, 180/math.Pi, "°") },
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>Fit report: {{.Info.Scene}}</title>
<style>
body{font-family:system-ui,sans-serif;margin:2em auto;max-width:62em;color:#222}
table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;padding:.3em .6em;text-align:right}
th{background:#eef}td.l,th.l{text-align:left}.bad{color:#a00}.weak{color:#a60}img{max-width:100%}
</style></head><body>
<h1>Fit report: {{.Info.Scene}}</h1>
<p>Training logs: {{range .Info.Train}}<code>{{.}}</code> {{end}}<br>
Held-out logs: {{range .Info.HeldOut}}<code>{{.}}</code> {{else}}none{{end}}<br>
{{.C.Windows}} windows of {{.Opts.Window}} s, {{.C.Rows}} residual rows; smoothing schedule κ = {{range $i, $k := .Opts.Smoothing}}{{if $i}} → {{end}}{{$k}}{{end}}.
{{range .C.Warnings}}<p class="weak">Warning: {{.}}</p>{{end}}
{{if .C.Converged}}The fit converged.{{else}}<span class="bad">The fit did not meet a convergence test; see the stages below.</span>{{end}}</p>
<h2>Parameters</h2>
<table><tr><th class="l">parameter</th><th>initial</th><th>fitted</th><th>standard error</th><th>95 % interval</th><th class="l">identifiability</th></tr>
{{range .C.Params}}<tr><td class="l"><code>{{.Name}}</code></td><td>{{g .Initial}}</td><td>{{g .Value}}</td><td>{{g .StdErr}}</td>
<td>[{{g .Lower95}}, {{g .Upper95}}]</td><td class="l {{if eq .Class 3 2}}bad{{else if eq .Class 1}}weak{{end}}">{{.Note}}</td></tr>
{{end}}</table>
<p>Residual variance {{g .C.Sigma2}} (near 1 when the noise levels given match the data) on {{.C.DOF}} degrees of freedom.
Singular values of the column-scaled Jacobian: {{range .C.SingularValues}}{{g .}} {{end}}(condition number {{g .C.Condition}}).</p>
{{if gt (len .C.Params) 1}}<h3>Correlations</h3>
<table><tr><th></th>{{range .C.Params}}<th><code>{{.Name}}</code></th>{{end}}</tr>
{{range $i, $row := .C.Corr}}<tr><th class="l"><code>{{(index $.C.Params $i).Name}}</code></th>{{range $row}}<td>{{g .}}</td>{{end}}</tr>
{{end}}</table>{{end}}
<h2>Errors before and after</h2>
<table><tr><th class="l">logs</th><th>position RMS</th><th>rotation RMS</th><th>joint RMS</th><th>whitened RMS</th></tr>
{{range .Errors}}<tr><td class="l">{{.Label}}</td><td>{{mm .E.Position}}</td><td>{{deg .E.Rotation}}</td><td>{{g .E.Joint}}</td><td>{{g .E.RMS}}</td></tr>
{{end}}</table>
<h2>Stages</h2>
<table><tr><th>κ</th><th class="l">status</th><th>steps</th><th>loss</th></tr>
{{range .C.Stages}}<tr><td>{{.Kappa}}</td><td class="l">{{.Status}}</td><td>{{.Iterations}}</td><td>{{g .Loss}}</td></tr>{{end}}</table>
<h2>Plots</h2>
{{range .Plots}}<p><img src="{{.}}" alt="{{.}}"></p>
{{end}}{{if .Info.Snapshots}}<h2>Contact events in the fitted model</h2>
{{range .Info.Snapshots}}<figure><img src="{{.File}}" alt="{{.Caption}}"><figcaption>{{.Caption}}</figcaption></figure>
{{end}}{{end}}
</body></html>
`))

func fmtUnit(v, f float64, unit string) string {
	if math.IsNaN(v) {
		return "—"
	}
	return fmt.Sprintf("%.4g %s", v*f, unit)
}

func (c *Calibration) html(info ReportInfo, plots []string) ([]byte, error) {
	type row struct {
		Label string
		E     ErrorSummary
	}
	rows := []row{{"training, before", c.TrainBefore}, {"training, after", c.TrainAfter}}
	if c.HeldOutBefore != nil {
		rows = append(rows, row{"held out, before", *c.HeldOutBefore}, row{"held out, after", *c.HeldOutAfter})
	}
	var b bytes.Buffer
	err := reportTmpl.Execute(&b, map[string]any{"Info": info, "C": c, "Opts": info.Options.withDefaults(), "Errors": rows, "Plots": plots})
	if err != nil {
		return nil, err
	}
	return []byte(strings.TrimSpace(b.String()) + "\n"), nil
}
