package report

import (
	"bytes"
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

// The reports are opened in a real browser: FADELOOP_BROWSER names a
// Chromium binary (Debian's chromium; .ci/report-check sets it). Each page
// is rendered headless, with no network, to a PNG screenshot and to a PDF;
// the test fails on any console message (a blocked load, a CSP violation,
// a script error) and on a blank screenshot. FADELOOP_REPORT_DIR keeps the
// HTML, PNG and PDF files for looking at. Without FADELOOP_BROWSER the test
// skips.

// consoleLine is how Chromium's --enable-logging=stderr prints a console
// message of the page.
var consoleLine = regexp.MustCompile(`:CONSOLE[:(]`)

// chromium runs the browser headless on file with extra arguments and
// returns its stderr.
func chromium(t *testing.T, bin, dir string, args ...string) string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	base := []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
		"--disable-component-update", "--disable-sync", "--no-first-run", "--disable-default-apps",
		"--user-data-dir=" + t.TempDir(), "--enable-logging=stderr", "--v=0", "--hide-scrollbars",
		// No network: every non-file URL resolves nowhere.
		"--host-resolver-rules=MAP * ~NOTFOUND", "--proxy-server=127.0.0.1:9"}
	cmd := exec.CommandContext(ctx, bin, append(base, args...)...)
	cmd.Dir = dir
	var stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stderr, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s: %v\n%s", bin, err, stderr.String())
	}
	return stderr.String()
}

// inked is the share of pixels of img that are not (near) white.
func inked(img image.Image) float64 {
	b := img.Bounds()
	n := 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			if r < 0xF000 || g < 0xF000 || bl < 0xF000 {
				n++
			}
		}
	}
	return float64(n) / float64(b.Dx()*b.Dy())
}

func TestBrowserRender(t *testing.T) {
	bin := os.Getenv("FADELOOP_BROWSER")
	if bin == "" {
		t.Skip("FADELOOP_BROWSER (a Chromium binary) not set")
	}
	dir := os.Getenv("FADELOOP_REPORT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	dir, _ = filepath.Abs(dir)

	// Controls: a blank page must be judged blank, and a page that tries
	// to load from the network must produce a console message; otherwise
	// the checks below could not fail.
	t.Run("controls", func(t *testing.T) {
		blank := filepath.Join(dir, "control-blank.html")
		loads := filepath.Join(dir, "control-loads.html")
		os.WriteFile(blank, []byte("<!DOCTYPE html><html><body></body></html>"), 0o644)
		os.WriteFile(loads, []byte(`<!DOCTYPE html><html><head><meta http-equiv="Content-Security-Policy" content="default-src 'none'; img-src data:"></head><body><img src="http://127.0.0.1:9/x.png"></body></html>`), 0o644)
		chromium(t, bin, dir, "--window-size=800,600", "--screenshot="+filepath.Join(dir, "control-blank.png"), "file://"+blank)
		img := decodePNG(t, filepath.Join(dir, "control-blank.png"))
		if f := inked(img); f > 0.001 {
			t.Errorf("blank control page has %.4f inked pixels; the blank check cannot tell", f)
		}
		logs := chromium(t, bin, dir, "--window-size=800,600", "--screenshot="+filepath.Join(dir, "control-loads.png"), "file://"+loads)
		if !consoleLine.MatchString(logs) {
			t.Errorf("a blocked network load gave no console line; the console check cannot tell:\n%s", logs)
		}
	})

	for _, tc := range []struct{ file, kind string }{{"run.json", "run"}, {"sweep.json", "sweep"}, {"sweep_heat.json", "sweep-heatmap"}, {"tune.json", "tune"}, {"cap.json", "capacity"}} {
		t.Run(tc.kind, func(t *testing.T) {
			page := render(t, readFixture(t, tc.file))
			htmlPath := filepath.Join(dir, tc.kind+".html")
			if err := os.WriteFile(htmlPath, []byte(page), 0o644); err != nil {
				t.Fatal(err)
			}
			pngPath := filepath.Join(dir, tc.kind+".png")
			logs := chromium(t, bin, dir, "--window-size=1280,1600", "--screenshot="+pngPath, "file://"+htmlPath)
			for _, l := range strings.Split(logs, "\n") {
				if consoleLine.MatchString(l) {
					t.Errorf("console message: %s", l)
				}
			}
			img := decodePNG(t, pngPath)
			// The top of every report has the title, the coloured verdict
			// box, the caution and a table: well above 2 % of the pixels.
			if f := inked(img); f < 0.02 {
				t.Errorf("screenshot is nearly blank: %.4f of the pixels inked", f)
			}
			pdfPath := filepath.Join(dir, tc.kind+".pdf")
			logs = chromium(t, bin, dir, "--no-pdf-header-footer", "--print-to-pdf="+pdfPath, "file://"+htmlPath)
			for _, l := range strings.Split(logs, "\n") {
				if consoleLine.MatchString(l) {
					t.Errorf("console message while printing: %s", l)
				}
			}
			pdf, err := os.ReadFile(pdfPath)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.HasPrefix(pdf, []byte("%PDF-")) || len(pdf) < 10000 {
				t.Errorf("%s is not a plausible PDF (%d bytes)", pdfPath, len(pdf))
			}
			t.Logf("%s: %d bytes PDF, screenshot %.1f %% inked", tc.kind, len(pdf), 100*inked(img))
		})
	}
}

func decodePNG(t *testing.T, path string) image.Image {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return img
}
