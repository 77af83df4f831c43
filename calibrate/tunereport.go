package calibrate

import (
	"bytes"
	"encoding/json"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"stickslip/sim"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// TuneReportFormat identifies tuning report.json files.
const TuneReportFormat = "stickslip-tune-report/1"

// SafetyCaution goes with every set of tuned gains, printed and in the
// report.
const SafetyCaution = "Gains tuned in simulation must be verified on the hardware before use: " +
	"first at reduced speed and reduced effort limits, with an emergency stop within reach, " +
	"under the site's robot-safety procedures (ISO 10218-1 and ISO 10218-2)."

// TuneReportInfo describes the inputs of a tuning run for its report.
type TuneReportInfo struct {
	Scene      string
	TunedScene string // path of the scene file with the tuned gains, if written
	FitReport  string // path of the fit report the samples came from
	Seed       uint64
	Warnings   []string
	Weights    CostWeights
	Horizon    float64 // seconds
}

type jsonGain struct {
	Name    string `json:"name"`
	Initial num    `json:"initial"`
	Tuned   num    `json:"tuned"`
	Bounds  [2]num `json:"bounds"`
	AtBound bool   `json:"at_bound"`
}

type jsonTerms struct {
	Tracking    num `json:"tracking"`
	Effort      num `json:"effort"`
	EffortLimit num `json:"effort_limit"`
	FinalPose   num `json:"final_pose"`
	PoseError   num `json:"final_position_error_m"`
}

type jsonCost struct {
	Mean    num       `json:"mean"`
	SD      num       `json:"sd"`
	Min     num       `json:"min"`
	Max     num       `json:"max"`
	Worst10 num       `json:"worst_tenth_mean"`
	Terms   jsonTerms `json:"mean_terms"`
	Samples []num     `json:"per_sample"`
}

type jsonTuneReport struct {
	Format      string          `json:"format"`
	Scene       string          `json:"scene"`
	TunedScene  string          `json:"tuned_scene,omitempty"`
	FitReport   string          `json:"fit_report,omitempty"`
	Uncertain   []string        `json:"sampled_parameters"`
	Samples     int             `json:"samples"`
	Seed        uint64          `json:"seed"`
	Horizon     float64         `json:"horizon_s"`
	Weights     map[string]num  `json:"weights"`
	Gains       []jsonGain      `json:"gains"`
	Before      jsonCost        `json:"cost_before"`
	After       jsonCost        `json:"cost_after"`
	Status      string          `json:"status"`
	Converged   bool            `json:"converged"`
	Iterations  int             `json:"iterations"`
	Evaluations int             `json:"evaluations"`
	History     []TuneIteration `json:"history"`
	Warnings    []string        `json:"warnings"`
	Caution     string          `json:"caution"`
	Plots       []string        `json:"plots"`
}

func costJSON(ev *Evaluation) jsonCost {
	sp := ev.Spread()
	c := jsonCost{Mean: num(sp.Mean), SD: num(sp.SD), Min: num(sp.Min), Max: num(sp.Max), Worst10: num(sp.Worst10)}
	var t TermCosts
	n := float64(len(ev.Samples))
	for _, s := range ev.Samples {
		t.Tracking += s.Tracking / n
		t.Effort += s.Effort / n
		t.EffortLimit += s.EffortLimit / n
		t.FinalPose += s.FinalPose / n
		t.PoseError += s.PoseError / n
		c.Samples = append(c.Samples, num(s.Total()))
	}
	c.Terms = jsonTerms{num(t.Tracking), num(t.Effort), num(t.EffortLimit), num(t.FinalPose), num(t.PoseError)}
	return c
}

// JSON returns the report.json document of a tuning run. It holds no
// times or host details, so equal inputs give equal bytes.
func (r *TuneResult) JSON(t *Tuner, info TuneReportInfo, plots []string) ([]byte, error) {
	w := info.Weights
	doc := jsonTuneReport{Format: TuneReportFormat, Scene: info.Scene, TunedScene: info.TunedScene, FitReport: info.FitReport,
		Uncertain: append([]string{}, t.st.p.Uncertain...), Samples: len(t.st.p.Draws), Seed: info.Seed, Horizon: info.Horizon,
		Weights: map[string]num{"tracking": num(w.Tracking), "effort": num(w.Effort), "effort_limit": num(w.EffortLimit), "final_pose": num(w.FinalPose)},
		Before:  costJSON(r.Before), After: costJSON(r.After), Status: r.Status, Converged: r.Converged,
		Iterations: len(r.History) - 1, Evaluations: r.Evaluations, History: r.History,
		Warnings: append([]string{}, info.Warnings...), Caution: SafetyCaution, Plots: append([]string{}, plots...)}
	for j, n := range r.Names {
		x := r.Tuned[j]
		doc.Gains = append(doc.Gains, jsonGain{Name: n, Initial: num(r.Initial[j]), Tuned: num(x),
			Bounds: [2]num{num(r.Lower[j]), num(r.Upper[j])}, AtBound: x <= r.Lower[j] || x >= r.Upper[j]})
	}
	b, err := json.MarshalIndent(doc, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

func (r *TuneResult) costPlot() (*plot.Plot, error) {
	var pts plotter.XYs
	for _, h := range r.History {
		pts = append(pts, plotter.XY{X: float64(h.Iter), Y: h.Cost})
	}
	return historyPlot("Mean task cost per accepted step", "iteration", "cost", pts)
}

// trackingPlot draws one joint before and after tuning, with its
// reference (or target) and the commanded effort below it.
func trackingPlot(j int, before, after *TuneTrace) (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = fmt.Sprintf("Joint %s on the nominal model", before.Joints[j])
	p.X.Label.Text = "time (s)"
	p.Y.Label.Text = "position (rad or m)"
	p.Legend.Top = true
	p.Legend.Left = true
	line := func(ys []float64, c color.Color, dashed bool, label string) error {
		pts := make(plotter.XYs, len(ys))
		for i, y := range ys {
			pts[i] = plotter.XY{X: before.Times[i], Y: y}
		}
		l, err := plotter.NewLine(pts)
		if err != nil {
			return err
		}
		l.Color = c
		l.Width = vg.Points(1.5)
		if dashed {
			l.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
		}
		p.Add(l)
		p.Legend.Add(label, l)
		return nil
	}
	if before.Ref[j] != nil {
		if err := line(before.Ref[j], color.Gray{Y: 0x40}, true, "reference"); err != nil {
			return nil, err
		}
	}
	if err := line(before.Q[j], palette[1], false, "initial gains"); err != nil {
		return nil, err
	}
	if err := line(after.Q[j], palette[0], false, "tuned gains"); err != nil {
		return nil, err
	}
	return p, nil
}

// ReportFiles renders the report: file name → contents.
func (r *TuneResult) ReportFiles(t *Tuner, info TuneReportInfo) (map[string][]byte, error) {
	files := map[string][]byte{}
	var plots []string
	add := func(name string, p *plot.Plot) error {
		b, err := plotPNG(p, 6*vg.Inch, 3.5*vg.Inch)
		if err != nil {
			return err
		}
		files[name] = b
		plots = append(plots, name)
		return nil
	}
	cp, err := r.costPlot()
	if err != nil {
		return nil, err
	}
	if err := add("cost.png", cp); err != nil {
		return nil, err
	}
	before, err := t.Trajectory(r.Initial)
	if err != nil {
		return nil, fmt.Errorf("simulating the initial gains: %w", err)
	}
	after, err := t.Trajectory(r.Tuned)
	if err != nil {
		return nil, fmt.Errorf("simulating the tuned gains: %w", err)
	}
	for j := range before.Joints {
		p, err := trackingPlot(j, before, after)
		if err != nil {
			return nil, err
		}
		if err := add(fmt.Sprintf("joint-%s.png", before.Joints[j]), p); err != nil {
			return nil, err
		}
	}
	js, err := r.JSON(t, info, plots)
	if err != nil {
		return nil, err
	}
	files["report.json"] = js
	var h bytes.Buffer
	data := struct {
		R       *TuneResult
		Info    TuneReportInfo
		Before  Spread
		After   Spread
		Plots   []string
		Caution string
		Samples int
	}{r, info, r.Before.Spread(), r.After.Spread(), plots, SafetyCaution, len(r.Before.Samples)}
	if err := tuneTmpl.Execute(&h, data); err != nil {
		return nil, err
	}
	files["index.html"] = h.Bytes()
	return files, nil
}

var tuneTmpl = template.Must(template.New("tune").Funcs(template.FuncMap{
	"g": func(v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return "—"
		}
		return fmt.Sprintf("%.4g", v)
	},
	"idx": func(v []float64, i int) float64 { return v[i] },
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>Gain tuning: {{.Info.Scene}}</title>
<style>
body{font-family:system-ui,sans-serif;margin:2em auto;max-width:62em;color:#222}
table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;padding:.3em .6em;text-align:right}
th{background:#eef}td.l,th.l{text-align:left}img{max-width:100%}
.caution{border:2px solid #c44e1c;background:#fff4ee;padding:.8em 1em;font-weight:600}
</style></head><body>
<h1>Gain tuning: {{.Info.Scene}}</h1>
<p class="caution">{{.Caution}}</p>
<p>Horizon {{.Info.Horizon}} s; cost averaged over {{.Samples}} {{if eq .Samples 1}}model (nominal parameters){{else}}parameter samples drawn from <code>{{.Info.FitReport}}</code> (seed {{.Info.Seed}}){{end}}.
{{.R.Status}}{{if not .R.Converged}} (not converged){{end}}; {{len .R.History}} points, {{.R.Evaluations}} cost evaluations.</p>
{{if .Info.Warnings}}<ul>{{range .Info.Warnings}}<li>{{.}}</li>{{end}}</ul>{{end}}
<h2>Gains</h2>
<table><tr><th class="l">gain</th><th>initial</th><th>tuned</th><th>bounds</th></tr>
{{range $i, $n := .R.Names}}<tr><td class="l"><code>{{$n}}</code></td><td>{{g (idx $.R.Initial $i)}}</td><td>{{g (idx $.R.Tuned $i)}}</td><td>[{{g (idx $.R.Lower $i)}}, {{g (idx $.R.Upper $i)}}]</td></tr>
{{end}}</table>
<h2>Cost over the samples</h2>
<table><tr><th class="l"></th><th>mean</th><th>sd</th><th>min</th><th>max</th><th>worst tenth</th></tr>
<tr><td class="l">initial gains</td><td>{{g .Before.Mean}}</td><td>{{g .Before.SD}}</td><td>{{g .Before.Min}}</td><td>{{g .Before.Max}}</td><td>{{g .Before.Worst10}}</td></tr>
<tr><td class="l">tuned gains</td><td>{{g .After.Mean}}</td><td>{{g .After.SD}}</td><td>{{g .After.Min}}</td><td>{{g .After.Max}}</td><td>{{g .After.Worst10}}</td></tr>
</table>
<p>Weights: tracking {{.Info.Weights.Tracking}}, effort {{.Info.Weights.Effort}}, effort above limit {{.Info.Weights.EffortLimit}}, final position {{.Info.Weights.FinalPose}}.</p>
<h2>Plots</h2>
{{range .Plots}}<p><img src="{{.}}" alt="{{.}}"></p>
{{end}}
</body></html>
`))

// WriteReport writes the report directory dir atomically: the files go to
// a hidden sibling directory that replaces dir when complete. An existing
// dir is replaced only if it is empty or holds a report.json.
func (r *TuneResult) WriteReport(t *Tuner, dir string, info TuneReportInfo) error {
	files, err := r.ReportFiles(t, info)
	if err != nil {
		return err
	}
	return sim.WriteDir(dir, "report.json", files)
}
