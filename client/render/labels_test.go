package render

import (
	"testing"

	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestFigureLabelsAgreeWithAPI: the client's figure table (this package,
// used by the CLI and client/report) shows each search figure in the same
// unit, display scale and decimals as the API's labels (loop/tune's
// FigureLabels, sent in every Recommendation), so a figure reads the same
// in every output.
func TestFigureLabelsAgreeWithAPI(t *testing.T) {
	for _, l := range tune.FigureLabels() {
		f, ok := FigureByKey(l.Key)
		if !ok {
			t.Errorf("%s: the API labels it, the client's table lacks it", l.Key)
			continue
		}
		if f.Search == nil {
			t.Errorf("%s: not marked as a search figure", l.Key)
		}
		// One name per figure: the run, sweep and capacity tables name
		// it as the tune tables do (the API's name and unit).
		if want := l.Name + " (" + l.Unit + ")"; f.Label != want || f.Head() != want {
			t.Errorf("%s: labels %q / %q, API name and unit %q", l.Key, f.Label, f.Head(), want)
		}
		if f.Scale != l.Scale || f.Dec != l.Decimals {
			t.Errorf("%s: scale %g, %d decimals; API %g, %d", l.Key, f.Scale, f.Dec, l.Scale, l.Decimals)
		}
	}
	if len(searchFigures) != len(tune.FigureLabels()) {
		t.Errorf("%d search figures here, %d in the API's labels", len(searchFigures), len(tune.FigureLabels()))
	}
}

// TestSearchLabelFallback: without API labels (a result written before
// they were sent) a search figure's label is built from the table.
func TestSearchLabelFallback(t *testing.T) {
	for _, tc := range []struct {
		key              string
		name, unit, diff string
		scale            float64
	}{
		{"outage_probability", "outage", "%", "percentage points", 100},
		{"tx_power_mean_dbm", "mean Tx power", "dBm", "dB", 1},
		{"sir_error_std_db", "SIR error std", "dB", "dB", 1},
	} {
		l := SearchLabel(nil, tc.key)
		if l.GetName() != tc.name || l.GetUnit() != tc.unit || l.GetDiffUnit() != tc.diff || l.GetDisplayScale() != tc.scale {
			t.Errorf("%s: got %v", tc.key, l)
		}
	}
	api := &pb.FigureLabel{Key: "outage_probability", Name: "outage", Unit: "%", DisplayScale: 100, Decimals: 1}
	if l := SearchLabel([]*pb.FigureLabel{api}, "outage_probability"); l != api {
		t.Errorf("the API's label must win, got %v", l)
	}
}
