package render

import (
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// This file is the client's one home for the label, unit, display scale
// and decimals of every figure: the CLI's tables and plots and the HTML
// report (client/report) take them from here. Where a message carries the
// API's own label (a Recommendation's FigureLabel, from loop/tune), tune
// outputs use that instead (FigureLabelOf).

// Figure is one figure of a Figures message: a column of the report
// tables and CSV files.
type Figure struct {
	Key string // CSV column stem, the proto field name (percentiles: with _p1 etc.)
	// Label is the figure's one name with its unit, in every table row,
	// column head, CSV description and HTML report: the API's own
	// name for the figures a search reports (loop/tune's FigureLabels,
	// "mean Tx power (dBm)").
	Label string
	Scale float64 // table value = scale × value (e.g. 100 for %)
	Dec   int     // table decimals
	Get   func(*pb.Figures) *pb.Estimate
	// Search is the figure in TuneFigures (tune and capacity results);
	// nil for figures a search does not report.
	Search func(*pb.TuneFigures) *pb.ReplicationEstimate
}

func pct(get func(*pb.Percentiles) *pb.Estimate, of func(*pb.Figures) *pb.Percentiles) func(*pb.Figures) *pb.Estimate {
	return func(f *pb.Figures) *pb.Estimate { return get(of(f)) }
}

var (
	sirPct = (*pb.Figures).GetSirErrorPercentilesDb
	txPct  = (*pb.Figures).GetTxPowerPercentilesDbm
)

// figures lists every figure of a Figures message in CSV order.
var figures = []Figure{
	{"sir_error_mean_db", "SIR error mean (dB)", 1, 2, (*pb.Figures).GetSirErrorMeanDb, (*pb.TuneFigures).GetSirErrorMeanDb},
	{"sir_error_std_db", "SIR error std (dB)", 1, 2, (*pb.Figures).GetSirErrorStdDb, (*pb.TuneFigures).GetSirErrorStdDb},
	{"sir_error_p1_db", "SIR error 1st pct (dB)", 1, 2, pct((*pb.Percentiles).GetP1, sirPct), nil},
	{"sir_error_p5_db", "SIR error 5th pct (dB)", 1, 2, pct((*pb.Percentiles).GetP5, sirPct), nil},
	{"sir_error_p50_db", "SIR error median (dB)", 1, 2, pct((*pb.Percentiles).GetP50, sirPct), nil},
	{"sir_error_p95_db", "SIR error 95th pct (dB)", 1, 2, pct((*pb.Percentiles).GetP95, sirPct), nil},
	{"sir_error_p99_db", "SIR error 99th pct (dB)", 1, 2, pct((*pb.Percentiles).GetP99, sirPct), nil},
	{"outage_probability", "outage (%)", 100, 2, (*pb.Figures).GetOutageProbability, (*pb.TuneFigures).GetOutageProbability},
	{"achieved_bler", "BLER (%)", 100, 2, (*pb.Figures).GetAchievedBler, (*pb.TuneFigures).GetAchievedBler},
	{"bler_target_error", "BLER − target (%)", 100, 2, (*pb.Figures).GetBlerTargetError, nil},
	{"tx_power_mean_dbm", "mean Tx power (dBm)", 1, 2, (*pb.Figures).GetTxPowerMeanDbm, (*pb.TuneFigures).GetTxPowerMeanDbm},
	{"tx_power_p1_dbm", "Tx power 1st pct (dBm)", 1, 2, pct((*pb.Percentiles).GetP1, txPct), nil},
	{"tx_power_p5_dbm", "Tx power 5th pct (dBm)", 1, 2, pct((*pb.Percentiles).GetP5, txPct), nil},
	{"tx_power_p50_dbm", "Tx power median (dBm)", 1, 2, pct((*pb.Percentiles).GetP50, txPct), nil},
	{"tx_power_p95_dbm", "Tx power 95th pct (dBm)", 1, 2, pct((*pb.Percentiles).GetP95, txPct), nil},
	{"tx_power_p99_dbm", "Tx power 99th pct (dBm)", 1, 2, pct((*pb.Percentiles).GetP99, txPct), nil},
	{"max_power_fraction", "time at max power (%)", 100, 2, (*pb.Figures).GetMaxPowerFraction, (*pb.TuneFigures).GetMaxPowerFraction},
	{"noise_rise_mean_db", "noise rise (dB)", 1, 2, (*pb.Figures).GetNoiseRiseMeanDb, (*pb.TuneFigures).GetNoiseRiseMeanDb},
	{"noise_rise_p95_db", "noise rise 95th pct (dB)", 1, 2, (*pb.Figures).GetNoiseRiseP95Db, nil},
	{"convergence_time_s", "convergence time (s)", 1, 3, (*pb.Figures).GetConvergenceTimeS, nil},
}

// Figures returns every figure of a Figures message in CSV order.
func Figures() []Figure { return append([]Figure(nil), figures...) }

// FigureKeys lists the CSV column stems of the figures in CSV order.
func FigureKeys() []string {
	var k []string
	for _, f := range figures {
		k = append(k, f.Key)
	}
	return k
}

// FigureByKey returns the figure whose CSV stem is key.
func FigureByKey(key string) (Figure, bool) {
	for _, f := range figures {
		if f.Key == key {
			return f, true
		}
	}
	return Figure{}, false
}

// MustFigure is FigureByKey for a key written in this module's code; it
// panics on an unknown key (a programmer error).
func MustFigure(key string) Figure {
	f, ok := FigureByKey(key)
	if !ok {
		panic("render: unknown figure " + key)
	}
	return f
}

// Head is the figure's column head: its label (one name per figure, in
// narrow tables too).
func (f Figure) Head() string { return f.Label }

// shortLabel is the column head of the figure key.
func shortLabel(key string) string { return MustFigure(key).Head() }

// Column lists of the narrower tables, by figure key.
var (
	// RunDetailFigures are the columns of the per-bin and per-user tables
	// of a run.
	RunDetailFigures = []string{"sir_error_mean_db", "sir_error_std_db", "outage_probability", "achieved_bler",
		"tx_power_mean_dbm", "tx_power_p95_dbm", "max_power_fraction"}
	// SweepTableFigures are the figure columns of a sweep's point table.
	SweepTableFigures = []string{"sir_error_mean_db", "sir_error_std_db", "outage_probability", "achieved_bler",
		"tx_power_mean_dbm", "max_power_fraction", "noise_rise_mean_db"}
	// CandidateFigures are the figure columns of a tune candidate table
	// (the ranked figure is left out there).
	CandidateFigures = []string{"sir_error_std_db", "outage_probability", "achieved_bler", "tx_power_mean_dbm", "noise_rise_mean_db"}
	// CapacityFigures are the figure columns of a capacity table after
	// outage and noise rise (its limits).
	CapacityFigures = []string{"sir_error_std_db", "achieved_bler", "tx_power_mean_dbm", "max_power_fraction"}
)

// searchFigures are the figures of TuneFigures, in the field order of the
// tune and capacity CSV files.
var searchFigures = func() []Figure {
	var out []Figure
	for _, f := range figures {
		if f.Search != nil {
			out = append(out, f)
		}
	}
	return out
}()

// SearchFigure returns the figure of fs named by key (nil when fs is nil
// or the key is not a search figure).
func SearchFigure(fs *pb.TuneFigures, key string) *pb.ReplicationEstimate {
	f, ok := FigureByKey(key)
	if !ok || f.Search == nil || fs == nil {
		return nil
	}
	return f.Search(fs)
}

// SearchCell is the figure key of fs as a table cell, "1.98 [1.95, 2.02]"
// in the figure's display scale and decimals.
func SearchCell(fs *pb.TuneFigures, key string) string {
	f := MustFigure(key)
	return estCell(SearchFigure(fs, key), f.Scale, f.Dec)
}

// ObjectiveKey is the figure key of an objective's ranked figure.
func ObjectiveKey(k pb.ObjectiveKind) string {
	switch k {
	case pb.ObjectiveKind_OBJECTIVE_KIND_MIN_OUTAGE:
		return "outage_probability"
	case pb.ObjectiveKind_OBJECTIVE_KIND_MIN_TX_POWER:
		return "tx_power_mean_dbm"
	}
	return "sir_error_std_db"
}

// FigureLabelOf returns the label of the figure key among labels (a
// Recommendation's figures); nil when absent.
func FigureLabelOf(labels []*pb.FigureLabel, key string) *pb.FigureLabel {
	for _, l := range labels {
		if l.GetKey() == key {
			return l
		}
	}
	return nil
}

// SearchLabel is the API's label of a search figure when labels (a
// Recommendation's figures) carry it, else one made from this file's
// table (results written before the API sent labels): name and unit from
// Label, difference unit "percentage points" for per-cent figures and the
// unit otherwise ("dB" for dBm).
func SearchLabel(labels []*pb.FigureLabel, key string) *pb.FigureLabel {
	if l := FigureLabelOf(labels, key); l != nil {
		return l
	}
	f := MustFigure(key)
	name, unit := f.Label, ""
	if i := lastParen(name); i > 0 {
		name, unit = name[:i-1], name[i+1:len(name)-1]
	}
	diff := unit
	switch {
	case f.Scale == 100:
		diff = "percentage points"
	case unit == "dBm":
		diff = "dB"
	}
	return &pb.FigureLabel{Key: key, Name: name, Unit: unit, DiffUnit: diff, DisplayScale: f.Scale, Decimals: int32(f.Dec)}
}

// lastParen is the index of the " (" opening a label's unit, or -1.
func lastParen(s string) int {
	for i := len(s) - 1; i > 0; i-- {
		if s[i] == '(' && s[i-1] == ' ' {
			return i
		}
	}
	return -1
}
