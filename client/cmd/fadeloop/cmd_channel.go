package main

import (
	"context"
	"encoding/binary"
	"encoding/csv"
	"errors"
	"flag"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

func init() {
	register(&command{
		order:   50,
		name:    "trace",
		summary: "write fading tap-gain traces (CSV or raw binary) for other tools",
		usage:   "",
		details: `Streams the complex tap gains of --links independent links, all with the same
channel settings, from the service's fading generators. The same seed gives
the same samples whatever the chunking.

Output formats:
  table  a summary: measured mean power per tap against the profile
  csv    columns link, sample, tap, re, im, power_db (power 10·log10(re²+im²))
  bin    float32 little-endian (re, im) pairs ordered by sample, then link,
         then tap: the pair of (sample s, link k, tap l) starts at byte
         8·((s·K + k)·L + l); e.g. numpy.fromfile(f, numpy.complex64)
         .reshape(samples, links, taps). Needs --out.

Examples:
  fadeloop trace --speed-kmh 30 --profile EPA --samples 15000 --format csv --out epa.csv
  fadeloop trace --doppler-hz 100 --rate-hz 1500 --links 8 --samples 150000 --format bin --out gains.f32
  fadeloop trace --speed-kmh 3 --los --rician-k-db 6 --profile FLAT`,
		run: runTrace,
	})
	register(&command{
		order:   60,
		name:    "check",
		summary: "run the channel self-check: fading statistics measured against theory",
		usage:   "",
		details: `Runs the statistical self-check of one generator configuration on the server:
autocorrelation against J0(2π f_D τ), envelope distribution, level-crossing
rate and average fade duration at several thresholds, each line measured
against theory with its tolerance. Exit status 1 when any line fails.

Output formats: table; csv with columns name, measured, theory, tolerance,
unit, pass; json (the fadeloop.v1 CheckChannelResponse).

Examples:
  fadeloop check
  fadeloop check --speed-kmh 120 --carrier-hz 2.6e9 --profile EVA --generator spectral
  fadeloop check --doppler-hz 50 --los --rician-k-db 3 --links 512 --format csv`,
		run: runCheck,
	})
}

// channelFlags describe one ChannelSpec.
type channelFlags struct {
	dopplerHz, speedKmh, carrierHz, rateHz float64
	profile, taps, generator               string
	ricianKDB, losAngleRad                 float64
	los                                    bool
	sinusoids                              int
	seed                                   uint64
}

func (c *channelFlags) register(fs *flag.FlagSet) {
	fs.Float64Var(&c.dopplerHz, "doppler-hz", 0, "maximum Doppler f_D in `Hz` (instead of --speed-kmh)")
	fs.Float64Var(&c.speedKmh, "speed-kmh", 30, "mobile speed in `km/h` (the server sets f_D = v·f_c/c)")
	fs.Float64Var(&c.carrierHz, "carrier-hz", 2e9, "carrier frequency in `Hz` for --speed-kmh")
	fs.Float64Var(&c.rateHz, "rate-hz", 1500, "sample rate in `Hz` (the power-control update rate)")
	fs.StringVar(&c.profile, "profile", "FLAT", "tap profile `NAME`: FLAT, EPA, EVA, ETU, PEDA or VEHA")
	fs.StringVar(&c.taps, "taps", "", "custom taps `DELAY_NS:POWER_DB,...` (instead of --profile)")
	fs.BoolVar(&c.los, "los", false, "first tap Rician, with a line-of-sight component")
	fs.Float64Var(&c.ricianKDB, "rician-k-db", 0, "Rician K factor of the first tap in `dB` (with --los)")
	fs.Float64Var(&c.losAngleRad, "los-angle-rad", 0, "arrival angle of the line-of-sight component in `rad`")
	fs.StringVar(&c.generator, "generator", "default", "fading `GENERATOR`: default, sos (sum of sinusoids) or spectral")
	fs.IntVar(&c.sinusoids, "sinusoids", 0, "sinusoids per branch for --generator sos (`N`, 0: its default)")
	fs.Uint64Var(&c.seed, "seed", 1, "`SEED` of the random streams")
}

func (c *channelFlags) spec(e *env) (*pb.ChannelSpec, error) {
	s := &pb.ChannelSpec{SampleRateHz: c.rateHz, RicianKDb: c.ricianKDB, Los: c.los,
		LosAngleRad: c.losAngleRad, Sinusoids: int32(c.sinusoids)}
	set := e.flagGiven
	if set("doppler-hz") {
		if set("speed-kmh") {
			return nil, badInputf("give --doppler-hz or --speed-kmh, not both")
		}
		s.DopplerHz = c.dopplerHz
	} else if c.speedKmh != 0 {
		// The server turns speed and carrier into the Doppler frequency.
		s.SpeedKmh, s.CarrierHz = c.speedKmh, c.carrierHz
	}
	switch c.generator {
	case "default":
		s.Generator = pb.Generator_GENERATOR_DEFAULT
	case "sos":
		s.Generator = pb.Generator_GENERATOR_SUM_OF_SINUSOIDS
	case "spectral":
		s.Generator = pb.Generator_GENERATOR_SPECTRAL
	default:
		return nil, badInputf("--generator %q: must be default, sos or spectral", c.generator)
	}
	if c.taps != "" {
		if set("profile") {
			return nil, badInputf("give --profile or --taps, not both")
		}
		for _, t := range strings.Split(c.taps, ",") {
			d, p, ok := strings.Cut(strings.TrimSpace(t), ":")
			dv, e1 := strconv.ParseFloat(d, 64)
			pv, e2 := strconv.ParseFloat(p, 64)
			if !ok || e1 != nil || e2 != nil {
				return nil, badInputf("--taps: %q is not DELAY_NS:POWER_DB", t)
			}
			s.CustomTaps = append(s.CustomTaps, &pb.Tap{DelayNs: dv, PowerDb: pv})
		}
	} else {
		s.Profile = c.profile
	}
	return s, nil
}

func runTrace(e *env, fs *flag.FlagSet) action {
	var ch channelFlags
	ch.register(fs)
	links := fs.Int("links", 1, "number of independent links `K`")
	samples := fs.Int64("samples", 15000, "samples per link `N`")
	chunk := fs.Int("chunk-samples", 0, "samples per link in each streamed chunk (`N`, 0: the server's choice)")
	return func(ctx context.Context, args []string) error {
		if err := noArgs(args); err != nil {
			return err
		}
		if err := e.g.checkFormat("table", "csv", "bin"); err != nil {
			return err
		}
		if e.g.format == "bin" && (e.g.out == "" || e.g.out == "-") && isTerminal(e.stdout) {
			return badInputf("--format bin writes raw binary: give --out FILE")
		}
		spec, err := ch.spec(e)
		if err != nil {
			return err
		}
		req := &pb.StreamGainsRequest{Channel: spec, Links: int32(*links), Samples: *samples, Seed: ch.seed, ChunkSamples: int32(*chunk)}
		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		prog := e.newProgress("samples/s")
		w := out.Writer()
		var cw *csv.Writer
		if e.g.format == "csv" {
			cw = csv.NewWriter(w)
			cw.Write([]string{"link", "sample", "tap", "re", "im", "power_db"})
		}
		var (
			power  []float64 // per tap
			count  int64
			taps   int
			buf    []byte
			got    int64
			target = float64(*samples)
		)
		for chunk, err := range cl.StreamGains(ctx, req) {
			if err != nil {
				prog.done()
				return err
			}
			if taps == 0 {
				taps = chunk.Taps
				power = make([]float64, taps)
			}
			switch e.g.format {
			case "csv":
				for k := range chunk.Links {
					for s := range chunk.Samples {
						for l := range chunk.Taps {
							g := chunk.At(k, s, l)
							re, im := float64(real(g)), float64(imag(g))
							cw.Write([]string{strconv.Itoa(k), strconv.FormatInt(chunk.SampleOffset+int64(s), 10), strconv.Itoa(l),
								strconv.FormatFloat(re, 'g', 8, 32), strconv.FormatFloat(im, 'g', 8, 32),
								strconv.FormatFloat(10*math.Log10(re*re+im*im), 'f', 3, 64)})
						}
					}
				}
			case "bin":
				buf = buf[:0]
				for s := range chunk.Samples {
					for k := range chunk.Links {
						for l := range chunk.Taps {
							g := chunk.At(k, s, l)
							buf = binary.LittleEndian.AppendUint32(buf, math.Float32bits(real(g)))
							buf = binary.LittleEndian.AppendUint32(buf, math.Float32bits(imag(g)))
						}
					}
				}
				if _, err := w.Write(buf); err != nil {
					return err
				}
			default:
				for k := range chunk.Links {
					for s := range chunk.Samples {
						for l := range chunk.Taps {
							g := chunk.At(k, s, l)
							power[l] += float64(real(g))*float64(real(g)) + float64(imag(g))*float64(imag(g))
						}
					}
				}
				count += int64(chunk.Links * chunk.Samples)
			}
			got += int64(chunk.Samples)
			el := prog.now().Sub(prog.start).Seconds()
			prog.update(float64(got)/target, float64(got)*float64(*links)/math.Max(el, 1e-9))
		}
		prog.done()
		if cw != nil {
			cw.Flush()
			if err := cw.Error(); err != nil {
				return err
			}
		}
		if e.g.format == "table" {
			render.TraceSummary(w, spec, *links, got, power, count)
		}
		return out.commit()
	}
}

func runCheck(e *env, fs *flag.FlagSet) action {
	var ch channelFlags
	ch.register(fs)
	links := fs.Int("links", 0, "independent links (realisations) per statistic, `N` in [8, 4096] (0: the server's default, 128)")
	periods := fs.Float64("doppler-periods", 0, "record length of each link in Doppler periods 1/f_D, `N` in [20, 20000] (0: the default, 250)")
	sigmas := fs.Float64("sigmas", 0, "tolerance of each line in standard errors, `N` in [1, 10] (0: the default, 4)")
	return func(ctx context.Context, args []string) error {
		if err := noArgs(args); err != nil {
			return err
		}
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		spec, err := ch.spec(e)
		if err != nil {
			return err
		}
		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		resp, err := cl.CheckChannel(ctx, &pb.CheckChannelRequest{Channel: spec, Links: int32(*links),
			DopplerPeriods: *periods, Seed: ch.seed, Sigmas: *sigmas})
		if err != nil {
			return err
		}
		err = e.emit(out, resp, func(w io.Writer) error { return render.CheckCSV(w, resp) },
			func(w io.Writer) { render.CheckTable(w, spec, ch.generator, resp) })
		if err != nil {
			return err
		}
		if !resp.GetPass() {
			return errors.New("channel self-check failed")
		}
		return nil
	}
}
