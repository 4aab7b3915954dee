// Package report writes a fadeloop result as one self-contained HTML file:
// the verdict first, every figure with its confidence interval, the plots
// of client/plots as inline SVG, the candidates of a tuning run, the
// effort, the scenario (as a readable table and as the exact JSON), the
// seed and engine version for reproduction, and the caution about real
// transmitters. The page loads nothing from the network, needs no
// JavaScript and has a print style sheet.
//
// Inputs are the API messages: a RunReport (Simulate), sweep points
// (Sweep), a Recommendation (Tune) or a CapacityResult (Capacity), given in
// an Input, or a RESULT.json written by `fadeloop ... --format json`, read
// with ReadResult.
//
//	in, err := report.ReadResult(f)      // or report.Input{Run: rep}
//	err = report.Write(w, in)
package report

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"io"
	"time"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// Sweep is the result of a Sweep call: its axes, its points (any order;
// the report sorts them by index) and the closing summary (optional).
type Sweep struct {
	Base    *pb.Scenario // the base scenario (optional; else point 0's normalised scenario is shown)
	Axes    []*pb.SweepAxis
	Points  []*pb.SweepPoint
	Summary *pb.SweepSummary
}

// Input is one result to report. Exactly one of Run, Sweep, Tune and
// Capacity is set; the other fields are optional context.
type Input struct {
	Run      *pb.RunReport
	Sweep    *Sweep
	Tune     *pb.Recommendation
	Capacity *pb.CapacityResult

	// TuneRequest and CapacityRequest, when known, supply the base scenario
	// and the search settings of a Tune or Capacity result (the results
	// themselves do not carry the scenario).
	TuneRequest     *pb.TuneRequest
	CapacityRequest *pb.CapacityRequest
	// Scenario is shown when no request or report carries one.
	Scenario *pb.Scenario

	// Title overrides the page title (default: the scenario's name).
	Title string
	// EngineVersion is shown when the result does not carry it (Tune and
	// Capacity results do not).
	EngineVersion string
	// Source names where the result came from (e.g. the RESULT.json path).
	Source string
	// Created, when not zero, is printed as the time the report was written.
	Created time.Time
}

// kind returns the result kind, or an error unless exactly one is set.
func (in Input) kind() (string, error) {
	var kinds []string
	if in.Run != nil {
		kinds = append(kinds, "run")
	}
	if in.Sweep != nil {
		kinds = append(kinds, "sweep")
	}
	if in.Tune != nil {
		kinds = append(kinds, "tune")
	}
	if in.Capacity != nil {
		kinds = append(kinds, "capacity")
	}
	switch len(kinds) {
	case 1:
		return kinds[0], nil
	case 0:
		return "", errors.New("report input: no result (set one of Run, Sweep, Tune, Capacity)")
	}
	return "", fmt.Errorf("report input: one result at a time, got %v", kinds)
}

// Write renders in as one HTML document to w.
func Write(w io.Writer, in Input) error {
	d, err := build(in)
	if err != nil {
		return err
	}
	var b bytes.Buffer
	if err := page.Execute(&b, d); err != nil {
		return fmt.Errorf("report template: %w", err)
	}
	_, err = w.Write(b.Bytes())
	return err
}

// ReadResult reads a RESULT.json written by `fadeloop run|sweep|tune|capacity
// --format json` (proto field names, as protojson writes them) and returns
// the Input for it. The kind is recognised by its top-level fields: a run
// report has "aggregate", a sweep "points", a recommendation "conditions"
// or "overall", a capacity result "evaluated" or "pole". Unknown fields are
// an error, as in scenario files.
func ReadResult(r io.Reader) (Input, error) {
	raw, err := io.ReadAll(io.LimitReader(r, 1<<30))
	if err != nil {
		return Input{}, err
	}
	var top map[string]json.RawMessage
	if err := json.Unmarshal(raw, &top); err != nil {
		return Input{}, fmt.Errorf("result file is not a JSON object: %w", err)
	}
	has := func(keys ...string) bool {
		for _, k := range keys {
			if _, ok := top[k]; ok {
				return true
			}
		}
		return false
	}
	un := func(b []byte, m proto.Message) error { return protojson.Unmarshal(b, m) }
	var in Input
	switch {
	case has("points", "axes") && !has("aggregate"):
		s := &Sweep{}
		var doc struct {
			Axes    []json.RawMessage `json:"axes"`
			Points  []json.RawMessage `json:"points"`
			Summary json.RawMessage   `json:"summary"`
		}
		dec := json.NewDecoder(bytes.NewReader(raw))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&doc); err != nil {
			return Input{}, fmt.Errorf("sweep result: %w", err)
		}
		for i, a := range doc.Axes {
			m := &pb.SweepAxis{}
			if err := un(a, m); err != nil {
				return Input{}, fmt.Errorf("sweep result: axes[%d]: %w", i, err)
			}
			s.Axes = append(s.Axes, m)
		}
		for i, p := range doc.Points {
			m := &pb.SweepPoint{}
			if err := un(p, m); err != nil {
				return Input{}, fmt.Errorf("sweep result: points[%d]: %w", i, err)
			}
			s.Points = append(s.Points, m)
		}
		if len(doc.Summary) > 0 && string(doc.Summary) != "null" {
			s.Summary = &pb.SweepSummary{}
			if err := un(doc.Summary, s.Summary); err != nil {
				return Input{}, fmt.Errorf("sweep result: summary: %w", err)
			}
		}
		in.Sweep = s
	case has("conditions", "overall", "overall_candidates"):
		in.Tune = &pb.Recommendation{}
		if err := un(raw, in.Tune); err != nil {
			return Input{}, fmt.Errorf("tune result: %w", err)
		}
	case has("evaluated", "pole", "pole_params"):
		in.Capacity = &pb.CapacityResult{}
		if err := un(raw, in.Capacity); err != nil {
			return Input{}, fmt.Errorf("capacity result: %w", err)
		}
	case has("aggregate", "normalised_scenario", "feasibility"):
		in.Run = &pb.RunReport{}
		if err := un(raw, in.Run); err != nil {
			return Input{}, fmt.Errorf("run result: %w", err)
		}
	default:
		return Input{}, errors.New("result file: not a run, sweep, tune or capacity result of fadeloop (--format json)")
	}
	return in, nil
}

// page is parsed once; its data is a *doc.
var page = template.Must(template.New("report").Parse(pageTemplate))
