package main

import (
	"bufio"
	"bytes"
	"os"
	"path/filepath"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service/jobs"
)

// rowStream writes a queued sweep's points to the --out file as they
// arrive, each on disk at once; finish rewrites the file in grid order.
type rowStream interface {
	write(r jobs.Result, pt *pb.SweepPoint) error
	finish(pts []*pb.SweepPoint) error
	close() error
}

// jsonlStream is client.SweepFile in JSON Lines: one jobs.Result a line,
// failed points with their error.
type jsonlStream struct{ f *client.SweepFile }

func newJSONLStream(path string, axes []tune.Axis) (rowStream, error) {
	f, err := client.CreateSweepFile(path, client.SweepFileJSONL, axes)
	if err != nil {
		return nil, err
	}
	return jsonlStream{f}, nil
}

func (s jsonlStream) write(r jobs.Result, _ *pb.SweepPoint) error { return s.f.Write(r) }
func (s jsonlStream) finish([]*pb.SweepPoint) error               { return s.f.Finish() }
func (s jsonlStream) close() error                                { return s.f.Close() }

// csvStream writes the direct path's CSV (render.SweepCSV: the same
// header, columns and number format) row by row; a failed point has no
// row (its error is printed at the end).
type csvStream struct {
	path   string
	axes   []*pb.SweepAxis
	layout bool // render.SweepIsLayout: the layout columns
	f      *os.File
	header []byte
}

func newCSVStream(path string, axes []*pb.SweepAxis, layout bool) (rowStream, error) {
	var h bytes.Buffer
	if err := render.SweepCSV(&h, axes, nil, layout); err != nil {
		return nil, err
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	if _, err := f.Write(h.Bytes()); err != nil {
		f.Close()
		return nil, err
	}
	return &csvStream{path: path, axes: axes, layout: layout, f: f, header: h.Bytes()}, nil
}

func (s *csvStream) write(_ jobs.Result, pt *pb.SweepPoint) error {
	if pt == nil {
		return nil
	}
	var b bytes.Buffer
	if err := render.SweepCSV(&b, s.axes, []*pb.SweepPoint{pt}, s.layout); err != nil {
		return err
	}
	_, err := s.f.Write(bytes.TrimPrefix(b.Bytes(), s.header)) // unbuffered: on disk at once
	return err
}

// finish rewrites the file in grid order through a temporary file renamed
// over it, so the file is never partly written: the same bytes as the
// direct path's --format csv.
func (s *csvStream) finish(pts []*pb.SweepPoint) error {
	mode := os.FileMode(0o644)
	if fi, err := s.f.Stat(); err == nil {
		mode = fi.Mode().Perm()
	}
	s.f.Close()
	tmp, err := os.CreateTemp(filepath.Dir(s.path), ".sweep-*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	bw := bufio.NewWriter(tmp)
	err = render.SweepCSV(bw, s.axes, pts, s.layout)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = tmp.Chmod(mode)
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return err
	}
	return os.Rename(tmp.Name(), s.path)
}

func (s *csvStream) close() error { return s.f.Close() }
