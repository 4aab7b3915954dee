package client

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// Formats of SweepFile.
const (
	SweepFileCSV   = "csv"   // one header row, then one row per point
	SweepFileJSONL = "jsonl" // one jobs.Result (deterministic fields, jobs.EncodeResult) per line
)

// SweepFile writes the points of a queued sweep to a file as they arrive,
// each row flushed at once, so an interrupted run leaves every point it saw
// on disk. Finish rewrites the file in grid order, so a finished job's file
// is the same however the run was interrupted and resumed.
type SweepFile struct {
	path, format string
	axes         []tune.Axis
	f            *os.File
	bw           *bufio.Writer
	cw           *csv.Writer
	rows         []jobs.Result
}

// CreateSweepFile creates (truncates) path for a sweep over axes in format
// SweepFileCSV or SweepFileJSONL.
func CreateSweepFile(path, format string, axes []tune.Axis) (*SweepFile, error) {
	if format != SweepFileCSV && format != SweepFileJSONL {
		return nil, fmt.Errorf("sweep file format must be %s or %s, got %q", SweepFileCSV, SweepFileJSONL, format)
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	s := &SweepFile{path: path, format: format, axes: axes, f: f}
	s.reset(f)
	if err := s.header(); err != nil {
		f.Close()
		return nil, err
	}
	return s, nil
}

func (s *SweepFile) reset(f *os.File) {
	s.f = f
	s.bw = bufio.NewWriter(f)
	s.cw = csv.NewWriter(s.bw)
}

func (s *SweepFile) header() error {
	if s.format != SweepFileCSV {
		return nil
	}
	s.cw.Write(SweepCSVHeader(s.axes))
	return s.flush()
}

func (s *SweepFile) flush() error {
	s.cw.Flush()
	if err := s.cw.Error(); err != nil {
		return err
	}
	return s.bw.Flush()
}

// Write appends one point and flushes it to the file.
func (s *SweepFile) Write(r jobs.Result) error {
	s.rows = append(s.rows, r)
	if err := s.write(r); err != nil {
		return err
	}
	return s.flush()
}

func (s *SweepFile) write(r jobs.Result) error {
	if s.format == SweepFileCSV {
		return s.cw.Write(SweepCSVRow(r))
	}
	b, err := jobs.EncodeResult(r.Deterministic())
	if err != nil {
		return err
	}
	b = append(b, '\n')
	_, err = s.bw.Write(b)
	return err
}

// Finish rewrites the file with the points in grid order (through a
// temporary file renamed over it, so the file is never partly written) and
// closes it.
func (s *SweepFile) Finish() error {
	mode := os.FileMode(0o644)
	if fi, err := s.f.Stat(); err == nil {
		mode = fi.Mode().Perm() // the file keeps the mode it was created with (umask applied)
	}
	s.f.Close()
	tmp, err := os.CreateTemp(filepath.Dir(s.path), ".sweep-*")
	if err != nil {
		return err
	}
	if err := tmp.Chmod(mode); err != nil {
		tmp.Close()
		os.Remove(tmp.Name())
		return err
	}
	defer os.Remove(tmp.Name())
	s.reset(tmp)
	rows := slices.Clone(s.rows)
	slices.SortFunc(rows, func(a, b jobs.Result) int { return a.Index - b.Index })
	if err := s.header(); err != nil {
		tmp.Close()
		return err
	}
	for _, r := range rows {
		if err := s.write(r); err != nil {
			tmp.Close()
			return err
		}
	}
	if err := s.flush(); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), s.path)
}

// Close closes the file as it is (arrival order).
func (s *SweepFile) Close() error { return s.f.Close() }

// sweepFigures are the aggregate figures in a sweep CSV, by their loop json
// names.
var sweepFigures = []struct {
	key string
	get func(*loop.Figures) loop.Estimate
}{
	{"sir_error_mean_db", func(f *loop.Figures) loop.Estimate { return f.SIRErrorMeanDB }},
	{"sir_error_std_db", func(f *loop.Figures) loop.Estimate { return f.SIRErrorStdDB }},
	{"outage_probability", func(f *loop.Figures) loop.Estimate { return f.OutageProbability }},
	{"achieved_bler", func(f *loop.Figures) loop.Estimate { return f.AchievedBLER }},
	{"bler_target_error", func(f *loop.Figures) loop.Estimate { return f.BLERTargetError }},
	{"tx_power_mean_dbm", func(f *loop.Figures) loop.Estimate { return f.TxPowerMeanDBm }},
	{"max_power_fraction", func(f *loop.Figures) loop.Estimate { return f.MaxPowerFraction }},
	{"noise_rise_mean_db", func(f *loop.Figures) loop.Estimate { return f.NoiseRiseMeanDB }},
	{"noise_rise_p95_db", func(f *loop.Figures) loop.Estimate { return f.NoiseRiseP95DB }},
	{"convergence_time_s", func(f *loop.Figures) loop.Estimate { return f.ConvergenceTimeS }},
}

// SweepCSVHeader is the header of a queued sweep's CSV: index, seed, one
// column per axis (its path), status, error, feasible, users, user_slots,
// then each aggregate figure with its 95 % interval (key, key_ci_low,
// key_ci_high).
func SweepCSVHeader(axes []tune.Axis) []string {
	h := []string{"index", "seed"}
	for _, a := range axes {
		h = append(h, a.Path)
	}
	h = append(h, "status", "error", "feasible", "users", "user_slots")
	for _, f := range sweepFigures {
		h = append(h, f.key, f.key+"_ci_low", f.key+"_ci_high")
	}
	return h
}

// SweepCSVRow is one point's row (numbers in Go's shortest exact form;
// figure cells empty for a failed point, feasible and convergence_time_s
// empty for a layout point (not computed in multi-cell mode), and a cell
// empty for a value that
// is not available — NaN, e.g. the bounds of an interval a one-replication
// layout run was too short for — as render.CSVNum writes them).
func SweepCSVRow(r jobs.Result) []string {
	num := func(v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return ""
		}
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	row := []string{strconv.Itoa(r.Index), strconv.FormatUint(r.Seed, 10)}
	for _, c := range r.Point.Coords {
		row = append(row, num(c.Value))
	}
	row = append(row, r.Status, r.Error)
	if r.Report == nil {
		for range 3 + 3*len(sweepFigures) {
			row = append(row, "")
		}
		return row
	}
	agg := &r.Report.Aggregate
	// A layout point (multi-cell engine) has no feasibility verdict and no
	// convergence time: empty cells, never true or 0.
	layout := r.Report.Layout != nil
	feasible := strconv.FormatBool(!r.Report.Feasibility.Infeasible)
	if layout {
		feasible = ""
	}
	row = append(row, feasible, strconv.Itoa(agg.Users), strconv.FormatInt(agg.UserSlots, 10))
	for _, f := range sweepFigures {
		if layout && f.key == "convergence_time_s" {
			row = append(row, "", "", "")
			continue
		}
		e := f.get(agg)
		row = append(row, num(e.Value), num(e.CILow), num(e.CIHigh))
	}
	return row
}
