package render

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"regexp"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// GroupDigits writes an integer with groups of three: 90 000.
func GroupDigits(n int64) string { return GroupDigitsSep(n, " ") }

// GroupDigitsSep writes an integer with groups of three separated by sep
// (e.g. a narrow no-break space in HTML).
func GroupDigitsSep(n int64, sep string) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, r := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteString(sep)
		}
		b.WriteRune(r)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// Table collects rows and prints them with aligned columns: text left,
// numbers right, two spaces between columns.
type Table struct {
	header []string
	right  []bool
	rows   [][]string
}

// NewTable starts a table with the given column heads.
func NewTable(header ...string) *Table {
	return &Table{header: header, right: make([]bool, len(header))}
}

// alignRight marks columns (by index) as right-aligned.
func (t *Table) AlignRight(cols ...int) *Table {
	for _, c := range cols {
		t.right[c] = true
	}
	return t
}

func (t *Table) Add(cells ...string) { t.rows = append(t.rows, cells) }

func (t *Table) Write(w io.Writer) {
	widths := make([]int, len(t.header))
	for i, h := range t.header {
		widths[i] = utf8.RuneCountInString(h)
	}
	for _, r := range t.rows {
		for i, c := range r {
			if i < len(widths) {
				widths[i] = max(widths[i], utf8.RuneCountInString(c))
			}
		}
	}
	line := func(cells []string) {
		var b strings.Builder
		for i, c := range cells {
			if i >= len(widths) {
				break
			}
			pad := widths[i] - utf8.RuneCountInString(c)
			if i > 0 {
				b.WriteString("  ")
			}
			if t.right[i] {
				b.WriteString(strings.Repeat(" ", pad))
				b.WriteString(c)
			} else {
				b.WriteString(c)
				if i < len(cells)-1 {
					b.WriteString(strings.Repeat(" ", pad))
				}
			}
		}
		fmt.Fprintln(w, strings.TrimRight(b.String(), " "))
	}
	line(t.header)
	for _, r := range t.rows {
		line(r)
	}
}

// Num formats a float for tables: fixed decimals, "–" for NaN.
func Num(v float64, decimals int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	s := strconv.FormatFloat(v, 'f', decimals, 64)
	if s == "-"+strconv.FormatFloat(0, 'f', decimals, 64) {
		s = s[1:]
	}
	return s
}

// CSVNum formats a float for CSV and JSON-free scripts: shortest exact
// representation, empty for NaN.
func CSVNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// MarshalJSON writes a message as stable, indented JSON with proto field
// names and every scalar field present, also at its zero value (an
// interval's ci_low of 0 is a key a script can read: jsonOptions).
// protojson's own whitespace is deliberately unstable, so the output is
// re-indented by encoding/json.
func MarshalJSON(m proto.Message) ([]byte, error) {
	raw, err := jsonOptions.Marshal(m)
	if err != nil {
		return nil, err
	}
	return indentJSON(raw)
}

func indentJSON(raw []byte) ([]byte, error) {
	var b bytes.Buffer
	if err := json.Indent(&b, raw, "", "  "); err != nil {
		return nil, err
	}
	b.WriteByte('\n')
	return b.Bytes(), nil
}

// jsonOptions are the CLI's JSON options: proto field names, zero scalars
// and empty lists written out (unset messages are left out).
var jsonOptions = protojson.MarshalOptions{UseProtoNames: true, EmitDefaultValues: true}

// compactJSON is the one-line stable form of a message.
func compactJSON(m proto.Message) (json.RawMessage, error) {
	raw, err := jsonOptions.Marshal(m)
	if err != nil {
		return nil, err
	}
	var b bytes.Buffer
	if err := json.Compact(&b, raw); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// figureCSVHeader is the figure columns of the CSV files: each figure's
// value, then its 95 % confidence interval.
func figureCSVHeader() []string { return csvHeader(figures, "_ci_low", "_ci_high") }

// csvHeader is each figure's key, then key+low and key+high.
func csvHeader(figs []Figure, low, high string) []string {
	var h []string
	for _, f := range figs {
		h = append(h, f.Key, f.Key+low, f.Key+high)
	}
	return h
}

func figureCSVCells(fs *pb.Figures) []string {
	var c []string
	for _, f := range figures {
		e := f.Get(fs)
		if e == nil {
			c = append(c, "", "", "")
			continue
		}
		c = append(c, CSVNum(e.GetValue()), CSVNum(e.GetCiLow()), CSVNum(e.GetCiHigh()))
	}
	return c
}

// cell formats an estimate for a table: "1.98 [1.95, 2.02]", the value and
// its 95 % interval. Intervals may be asymmetric (Wilson for proportions,
// log-scale for variances), so both ends are printed, never a ± half-width.
func cell(f Figure, e *pb.Estimate) string {
	if e == nil {
		return "–"
	}
	v := f.Scale * e.GetValue()
	lo, hi := f.Scale*e.GetCiLow(), f.Scale*e.GetCiHigh()
	if math.IsNaN(lo) || math.IsNaN(hi) || (lo == 0 && hi == 0 && v != 0) {
		return Num(v, f.Dec)
	}
	return withInterval(v, lo, hi, f.Dec)
}

// Interval is "[lo, hi]" with dec decimals, or "–" when the interval is
// not available (a NaN bound: e.g. one replication of a layout too short
// for one).
func Interval(lo, hi float64, dec int) string {
	if math.IsNaN(lo) || math.IsNaN(hi) {
		return "–"
	}
	return "[" + Num(lo, dec) + ", " + Num(hi, dec) + "]"
}

// withInterval is "v [lo, hi]" with dec decimals.
func withInterval(v, lo, hi float64, dec int) string {
	return Num(v, dec) + " [" + Num(lo, dec) + ", " + Num(hi, dec) + "]"
}

// groupedNumber is a number written with its digits grouped by spaces
// ("3 600 000"), which Wrap keeps on one line.
var groupedNumber = regexp.MustCompile(`\b\d{1,3}(?: \d{3})+\b`)

// Wrap breaks text into lines of at most width runes (words and numbers
// grouped as "2 400" are not split), joining them with a newline and
// indent; existing newlines stay.
func Wrap(text string, width int, indent string) string {
	const keep = "\ue000" // a space inside a grouped number while splitting
	text = groupedNumber.ReplaceAllStringFunc(text, func(m string) string { return strings.ReplaceAll(m, " ", keep) })
	var out []string
	for _, para := range strings.Split(text, "\n") {
		line := ""
		for _, word := range strings.Fields(para) {
			word = strings.ReplaceAll(word, keep, " ")
			if line != "" && len([]rune(line))+1+len([]rune(word)) > width {
				out = append(out, line)
				line = word
				continue
			}
			if line != "" {
				line += " "
			}
			line += word
		}
		out = append(out, line)
	}
	return strings.Join(out, "\n"+indent)
}

// FmtRate writes a rate with an SI prefix: "12.3 M user-slots/s".
func FmtRate(rate float64, unit string) string {
	switch {
	case math.IsNaN(rate) || rate <= 0:
		return "– " + unit
	case rate >= 1e9:
		return fmt.Sprintf("%.2f G %s", rate/1e9, unit)
	case rate >= 1e6:
		return fmt.Sprintf("%.2f M %s", rate/1e6, unit)
	case rate >= 1e3:
		return fmt.Sprintf("%.1f k %s", rate/1e3, unit)
	}
	return fmt.Sprintf("%.1f %s", rate, unit)
}

// GroupNumbersIn writes every whole number of four or more digits in text
// (an engine's note: "the 2400 measured slots … 3600000 measured slots")
// with its digits grouped by sep, as the tables write them ("2 400").
// Digits that are part of a decimal ("0.833"), a version ("1.3.0") or a
// name ("p1500", "run.warmup_slots") are left alone.
func GroupNumbersIn(text, sep string) string {
	r := []rune(text)
	isDigit := func(i int) bool { return i >= 0 && i < len(r) && r[i] >= '0' && r[i] <= '9' }
	var b strings.Builder
	for i := 0; i < len(r); {
		if !isDigit(i) {
			b.WriteRune(r[i])
			i++
			continue
		}
		j := i
		for isDigit(j) {
			j++
		}
		num := string(r[i:j])
		before := rune(0)
		if i > 0 {
			before = r[i-1]
		}
		after := rune(0)
		if j < len(r) {
			after = r[j]
		}
		standalone := !unicode.IsLetter(before) && before != '.' && before != '_' && before != '/' && before != ',' &&
			!unicode.IsLetter(after) && after != '_' && !((after == '.' || after == ',') && isDigit(j+1))
		if standalone && len(num) >= 4 {
			if n, err := strconv.ParseInt(num, 10, 64); err == nil && num[0] != '0' {
				num = GroupDigitsSep(n, sep)
			}
		}
		b.WriteString(num)
		i = j
	}
	return b.String()
}
