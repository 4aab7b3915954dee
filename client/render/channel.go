package render

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// CheckCSV writes a channel self-check with columns name, measured,
// theory, tolerance, unit, pass.
func CheckCSV(w io.Writer, resp *pb.CheckChannelResponse) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"name", "measured", "theory", "tolerance", "unit", "pass"})
	for _, l := range resp.GetLines() {
		cw.Write([]string{l.GetName(), CSVNum(l.GetMeasured()), CSVNum(l.GetTheory()), CSVNum(l.GetTolerance()), l.GetUnit(), strconv.FormatBool(l.GetPass())})
	}
	cw.Flush()
	return cw.Error()
}

// CheckTable writes a channel self-check for people: the channel, one line
// per statistic against theory, and the verdict.
func CheckTable(w io.Writer, spec *pb.ChannelSpec, generator string, resp *pb.CheckChannelResponse) {
	name := spec.GetProfile()
	if name == "" {
		name = "custom"
	}
	fmt.Fprintf(w, "channel self-check: profile %s, %s, generator %s\n", name, fading(spec), generator)
	fmt.Fprintf(w, "%d links × %g Doppler periods each\n\n", resp.GetLinks(), resp.GetDopplerPeriods())
	t := NewTable("check", "measured", "theory", "tolerance", "unit", "result").AlignRight(1, 2, 3)
	for _, l := range resp.GetLines() {
		res := "pass"
		if !l.GetPass() {
			res = "FAIL"
		}
		t.Add(l.GetName(), sig(l.GetMeasured()), sig(l.GetTheory()), "±"+sig(l.GetTolerance()), l.GetUnit(), res)
	}
	t.Write(w)
	verdict := "all checks pass"
	if !resp.GetPass() {
		verdict = "SOME CHECKS FAIL"
	}
	fmt.Fprintf(w, "\n%s\n", verdict)
}

// sig formats with four significant digits.
func sig(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

// TraceSummary writes the measured mean power per tap of a gain trace
// (power: summed |h|² per tap over count samples) against the profile.
func TraceSummary(w io.Writer, spec *pb.ChannelSpec, links int, samples int64, power []float64, count int64) {
	name := spec.GetProfile()
	if name == "" {
		name = "custom"
	}
	fmt.Fprintf(w, "%s × %s samples, profile %s, %s\n\n", Count(links, "link", "links"), GroupDigits(samples), name, fading(spec))
	t := NewTable("tap", "mean power (dB)", "share of total (%)").AlignRight(0, 1, 2)
	total := 0.0
	for _, p := range power {
		total += p
	}
	for l, p := range power {
		m := p / float64(max(count, 1))
		t.Add(strconv.Itoa(l), Num(10*math.Log10(m), 2), Num(100*p/total, 1))
	}
	t.Add("all", Num(10*math.Log10(total/float64(max(count, 1))), 2), "100.0")
	t.Write(w)
	fmt.Fprintln(w, "\n(each link's taps have unit total mean power: 0 dB expected in the last row)")
}

// fading describes the spec's time variation as sent: the Doppler
// frequency and its product with the sample period, or the speed and
// carrier the server turns into it.
func fading(spec *pb.ChannelSpec) string {
	if spec.GetSpeedKmh() > 0 {
		return fmt.Sprintf("%g km/h at %g GHz carrier, sampled at %.0f Hz", spec.GetSpeedKmh(), spec.GetCarrierHz()/1e9, spec.GetSampleRateHz())
	}
	return fmt.Sprintf("f_D = %.2f Hz at %.0f Hz (f_D·T = %.4f)", spec.GetDopplerHz(), spec.GetSampleRateHz(), spec.GetDopplerHz()/spec.GetSampleRateHz())
}
