package loop

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"reflect"
	"strings"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"
)

func TestCanonicalScenarioValid(t *testing.T) {
	sc := CanonicalScenario()
	if v := sc.Validate(); len(v) != 0 {
		t.Fatalf("canonical scenario invalid: %v", v)
	}
	n := sc.Clone()
	n.Normalise()
	if !reflect.DeepEqual(n, sc) {
		t.Errorf("canonical scenario is not normalised:\n got %+v\nwant %+v", n, sc)
	}
	if got, want := sc.Cost(), int64(64*90000*3); got != want {
		t.Errorf("Cost = %d, want users×slots×taps×replications = %d", got, want)
	}
	// The processing gain and noise of peer_numba.py.
	if g := sc.Receiver.ProcessingGain(); math.Abs(g-314.754) > 1e-3 {
		t.Errorf("processing gain %g, want 3.84e6/12.2e3", g)
	}
	// Path loss of the peer at 50 m and 1000 m: 128.1 + 37.6·log10(d/1 km) plus
	// the peer's 3.01 dB tap normalisation.
	us, err := placeUsers(sc)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		i int
		d float64
	}{{0, 50}, {63, 1000}, {21, 50 + 950*21.0/63}} {
		want := 128.1 + 37.6*math.Log10(c.d/1000) + 3.0103
		if math.Abs(us[c.i].distanceM-c.d) > 1e-9 || math.Abs(us[c.i].pathLossDB-want) > 1e-9 {
			t.Errorf("user %d at %g m loss %g dB, want %g m and %g dB", c.i, us[c.i].distanceM, us[c.i].pathLossDB, c.d, want)
		}
	}
}

// TestCanonicalTestdata keeps loop/testdata/canonical.json equal to
// CanonicalScenario (it is the scenario file of the benchmark).
func TestCanonicalTestdata(t *testing.T) {
	b, err := os.ReadFile("testdata/canonical.json")
	if err != nil {
		t.Fatal(err)
	}
	var sc Scenario
	if err := json.Unmarshal(b, &sc); err != nil {
		t.Fatal(err)
	}
	sc.Normalise()
	if !reflect.DeepEqual(sc, CanonicalScenario()) {
		t.Errorf("testdata/canonical.json differs from CanonicalScenario()")
	}
}

func TestScenarioJSONRoundTrip(t *testing.T) {
	sc := CanonicalScenario()
	b, err := json.Marshal(sc)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), `"mode":"INNER_MODE_CLOSED_LOOP"`) || !strings.Contains(string(b), `"model":"PATH_LOSS_MODEL_LOG_DISTANCE"`) {
		t.Errorf("enums are not in their proto names: %s", b)
	}
	var back Scenario
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, sc) {
		t.Errorf("round trip changed the scenario")
	}
	if err := json.Unmarshal([]byte(`{"inner_loop":{"mode":"INNER_MODE_NOPE"}}`), &back); err == nil {
		t.Errorf("unknown enum name accepted")
	}
}

func TestNormaliseDefaults(t *testing.T) {
	sc := Scenario{
		Groups: []UserGroup{{Count: 2, MinDistanceM: 100, MaxDistanceM: 500, Speeds: []SpeedShare{{SpeedKmh: 3}}}},
		Run:    RunSettings{Slots: 1000},
	}
	sc.Normalise()
	if v := sc.Validate(); len(v) != 0 {
		t.Fatalf("defaults do not validate: %v", v)
	}
	g := sc.Groups[0]
	if g.Placement != PlacementUniformArea || g.Profile != "FLAT" || g.Speeds[0].Weight != 1 || g.Generator != GeneratorDefault ||
		g.CarrierFrequencyHz != DefaultCarrierHz || g.PathLoss.Model != PathLossLogDistance || g.ActivityFactor != 1 {
		t.Errorf("group defaults not filled: %+v", g)
	}
	il := sc.InnerLoop
	if il.Mode != InnerModeClosedLoop || il.Command != CommandFixedStep || il.UpdateRateHz != 1500 || il.StepDB != 1 ||
		il.MinPowerDBm != -50 || il.MaxPowerDBm != 24 || il.InitialPower != InitialPowerOpenLoop {
		t.Errorf("inner-loop defaults not filled: %+v", il)
	}
	if sc.Run.Replications != 1 || sc.Run.Batches != 20 || sc.Run.OutageMarginDB != 3 || sc.Run.DistanceBins != 4 {
		t.Errorf("run defaults not filled: %+v", sc.Run)
	}
}

// TestValidateListsEveryViolation breaks one rule of each kind at a time and
// then all of them at once: every violation is reported with its field path.
func TestValidateListsEveryViolation(t *testing.T) {
	// Cases whose mutations interact with others (they change which rules
	// apply) are checked alone only.
	alone := map[string]bool{"mode": true, "levels not ascending": true, "threshold count": true, "power limits": true,
		"link slope": true, "neither slots nor duration": true, "slots and duration": true}
	cases := []struct {
		name  string
		mut   func(*Scenario)
		field string
	}{
		{"chip rate", func(s *Scenario) { s.Receiver.ChipRateHz = -1 }, "receiver.chip_rate_hz"},
		{"bit rate above chip rate", func(s *Scenario) { s.Receiver.BitRateBps = 5e6 }, "receiver.bit_rate_bps"},
		{"noise figure NaN", func(s *Scenario) { s.Receiver.NoiseFigureDB = math.NaN() }, "receiver.noise_figure_db"},
		{"averaging", func(s *Scenario) { s.Receiver.SIRAveragingSlots = 0 }, "receiver.sir_averaging_slots"},
		{"RAKE finger model", func(s *Scenario) { s.Receiver.RakeFingers = 7 }, "receiver.rake_fingers"},
		{"max fingers", func(s *Scenario) { s.Receiver.MaxFingers = 65 }, "receiver.max_fingers"},
		{"count", func(s *Scenario) { s.Groups[0].Count = 0 }, "groups[0].count"},
		{"placement", func(s *Scenario) { s.Groups[0].Placement = 0 }, "groups[0].placement"},
		{"min > max distance", func(s *Scenario) { s.Groups[0].MinDistanceM = 2000 }, "groups[0].max_distance_m"},
		{"distances with uniform", func(s *Scenario) { s.Groups[0].DistancesM = []float64{1} }, "groups[0].distances_m"},
		{"explicit count mismatch", func(s *Scenario) {
			s.Groups[0].Placement, s.Groups[0].MinDistanceM, s.Groups[0].MaxDistanceM = PlacementExplicit, 0, 0
			s.Groups[0].DistancesM = []float64{100, 200}
		}, "groups[0].distances_m"},
		{"Doppler above half the update rate", func(s *Scenario) { s.Groups[0].Speeds[0].SpeedKmh = 500 }, "groups[0].speeds[0].speed_kmh"},
		{"weight", func(s *Scenario) { s.Groups[0].Speeds[0].Weight = -1 }, "groups[0].speeds[0].weight"},
		{"both profile and taps", func(s *Scenario) { s.Groups[0].Profile = "EPA" }, "groups[0].profile"},
		{"unknown profile", func(s *Scenario) { s.Groups[0].CustomTaps = nil; s.Groups[0].Profile = "NOPE" }, "groups[0].profile"},
		{"taps not sorted", func(s *Scenario) { s.Groups[0].CustomTaps[2].DelayNs = 50 }, "groups[0].custom_taps[2].delay_ns"},
		{"Rician K", func(s *Scenario) { s.Groups[0].LOS = true; s.Groups[0].RicianKDB = 80 }, "groups[0].rician_k_db"},
		{"generator", func(s *Scenario) { s.Groups[0].Generator = 9 }, "groups[0].generator"},
		{"shadowing", func(s *Scenario) { s.Groups[0].ShadowingSigmaDB = 8 }, "groups[0].shadowing_decorrelation_m"},
		{"path loss below reference distance", func(s *Scenario) { s.Groups[0].PathLoss.RefDistanceM = 100 }, "groups[0].path_loss.model"},
		{"Hata out of range", func(s *Scenario) {
			s.Groups[0].PathLoss = PathLoss{Model: PathLossHataUrban, BaseHeightM: 30, MobileHeightM: 1.5}
		}, "groups[0].path_loss.model"},
		{"activity", func(s *Scenario) { s.Groups[0].ActivityFactor = 1.5 }, "groups[0].activity_factor"},
		{"burst", func(s *Scenario) { s.Groups[0].ActivityFactor = 0.5; s.Groups[0].MeanBurstSlots = 0.5 }, "groups[0].mean_burst_slots"},
		{"mode", func(s *Scenario) { s.InnerLoop.Mode = 0 }, "inner_loop.mode"},
		{"step", func(s *Scenario) { s.InnerLoop.StepDB = 20 }, "inner_loop.step_db"},
		{"levels not ascending", func(s *Scenario) {
			s.InnerLoop.Command = CommandMultiLevel
			s.InnerLoop.LevelsDB = []float64{1, 0}
			s.InnerLoop.ThresholdsDB = []float64{0}
		}, "inner_loop.levels_db[1]"},
		{"threshold count", func(s *Scenario) {
			s.InnerLoop.Command = CommandMultiLevel
			s.InnerLoop.LevelsDB = []float64{-1, 0, 1}
			s.InnerLoop.ThresholdsDB = []float64{0}
		}, "inner_loop.thresholds_db"},
		{"delay", func(s *Scenario) { s.InnerLoop.FeedbackDelaySlots = -1 }, "inner_loop.feedback_delay_slots"},
		{"command error probability", func(s *Scenario) { s.InnerLoop.CommandErrorProb = 0.7 }, "inner_loop.command_error_prob"},
		{"power limits", func(s *Scenario) { s.InnerLoop.MinPowerDBm = 30 }, "inner_loop.max_power_dbm"},
		{"initial power outside limits", func(s *Scenario) { s.InnerLoop.InitialPowerDBm = 40 }, "inner_loop.initial_power_dbm"},
		{"BLER target", func(s *Scenario) { s.OuterLoop.BLERTarget = 1 }, "outer_loop.bler_target"},
		{"block slots", func(s *Scenario) { s.OuterLoop.BlockSlots = 0 }, "outer_loop.block_slots"},
		{"target limits", func(s *Scenario) { s.OuterLoop.MinTargetDB = 40 }, "outer_loop.max_target_db"},
		{"link slope", func(s *Scenario) { s.Link.SlopeDB = 0 }, "link.slope_db"},
		{"link table", func(s *Scenario) {
			s.Link.Kind = LinkTable
			s.Link.Table = []LinkPoint{{0, 0.5}, {1, 0.6}}
		}, "link.table[1].bler"},
		{"EESM beta", func(s *Scenario) { s.Link.EESMBeta = -1 }, "link.eesm_beta"},
		{"slots and duration", func(s *Scenario) { s.Run.DurationS = 10 }, "run.slots"},
		{"neither slots nor duration", func(s *Scenario) { s.Run.Slots = 0 }, "run.slots"},
		{"warm-up", func(s *Scenario) { s.Run.WarmupSlots = 90000 }, "run.warmup_slots"},
		{"replications", func(s *Scenario) { s.Run.Replications = 0 }, "run.replications"},
		{"batches", func(s *Scenario) { s.Run.Batches = 5 }, "run.batches"},
		{"no groups", func(s *Scenario) { s.Groups = nil }, "groups"},
	}
	all := CanonicalScenario()
	var want []string
	for _, c := range cases {
		sc := CanonicalScenario()
		c.mut(&sc)
		v := sc.Validate()
		if !hasField(v, c.field) {
			t.Errorf("%s: no violation at %s; got %v", c.name, c.field, v)
		}
		for _, x := range v {
			if x.Rule == "" {
				t.Errorf("%s: empty rule at %s", c.name, x.Field)
			}
		}
		if !alone[c.name] && c.field != "groups" && !strings.HasPrefix(c.field, "groups[0].") {
			c.mut(&all)
			want = append(want, c.field)
		}
	}
	v := all.Validate()
	for _, f := range want {
		if !hasField(v, f) {
			t.Errorf("all at once: %s missing from %v", f, v)
		}
	}
	if err := v.Err(); err == nil || !strings.Contains(err.Error(), "inner_loop.step_db: ") {
		t.Errorf("Violations.Error() = %v", err)
	}
}

func hasField(v Violations, f string) bool {
	for _, x := range v {
		if x.Field == f {
			return true
		}
	}
	return false
}

func TestSetPath(t *testing.T) {
	sc := CanonicalScenario()
	ok := []struct {
		path string
		v    float64
		get  func(Scenario) float64
	}{
		{"inner_loop.step_db", 0.5, func(s Scenario) float64 { return s.InnerLoop.StepDB }},
		{"groups[0].speeds[0].speed_kmh", 120, func(s Scenario) float64 { return s.Groups[0].Speeds[0].SpeedKmh }},
		{"groups[0].count", 8, func(s Scenario) float64 { return float64(s.Groups[0].Count) }},
		{"inner_loop.feedback_delay_slots", 3, func(s Scenario) float64 { return float64(s.InnerLoop.FeedbackDelaySlots) }},
		{"run.seed", 42, func(s Scenario) float64 { return float64(s.Run.Seed) }},
		{"groups[0].custom_taps[1].power_db", -3, func(s Scenario) float64 { return s.Groups[0].CustomTaps[1].PowerDB }},
		{"groups[0].path_loss.exponent", 3.5, func(s Scenario) float64 { return s.Groups[0].PathLoss.Exponent }},
	}
	for _, c := range ok {
		if err := SetPath(&sc, c.path, c.v); err != nil {
			t.Errorf("SetPath(%q): %v", c.path, err)
		} else if got := c.get(sc); got != c.v {
			t.Errorf("SetPath(%q, %g) set %g", c.path, c.v, got)
		}
	}
	bad := []struct{ path, want string }{
		{"inner_loop.nope", "unknown field \"nope\""},
		{"groups[3].count", "out of range"},
		{"groups.count", "not a message"},
		{"run[0].seed", "not a list"},
		{"name", "not numeric"},
		{"inner_loop.mode", "enum"},
		{"outer_loop.enabled", "not numeric"},
		{"groups[0].count", "integral"},
		{"groups[x].count", "non-negative integer"},
		{"", "empty"},
		{"inner_loop.", "trailing"},
		{"inner_loop.step_db.x", "not a message"},
		{"groups[0].speeds", "not numeric"},
	}
	before := CanonicalScenario()
	for _, c := range bad {
		s := CanonicalScenario()
		v := 1.5
		err := SetPath(&s, c.path, v)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("SetPath(%q) error %v, want it to mention %q", c.path, err, c.want)
		}
		if !reflect.DeepEqual(s, before) {
			t.Errorf("SetPath(%q) changed the scenario on error", c.path)
		}
	}
	if err := SetPath(&sc, "run.seed", -1); err == nil {
		t.Errorf("negative seed accepted")
	}
}

// FuzzValidate decodes arbitrary JSON into a Scenario, normalises, validates,
// costs it and applies a path: nothing may panic, and a scenario Validate
// accepts must place its users.
func FuzzValidate(f *testing.F) {
	b, _ := json.Marshal(CanonicalScenario())
	f.Add(b, "inner_loop.step_db", 2.0)
	f.Add([]byte(`{"groups":[{"count":3,"placement":"PLACEMENT_EXPLICIT","distances_m":[1,2]}],"run":{"slots":-5}}`), "groups[0].count", -1.0)
	f.Add([]byte(`{"groups":[{"count":1e9,"speeds":[{"speed_kmh":1e308}]}],"inner_loop":{"update_rate_hz":-0}}`), "groups[9].x", math.Inf(1))
	f.Add([]byte(`{"link":{"kind":"LINK_KIND_TABLE","table":[{"sir_db":1,"bler":2}]},"run":{"duration_s":1e300}}`), "run.duration_s", math.NaN())
	f.Fuzz(func(t *testing.T, data []byte, path string, x float64) {
		var sc Scenario
		if json.Unmarshal(data, &sc) != nil {
			return
		}
		_ = SetPath(&sc, path, x)
		sc.Normalise()
		v := sc.Validate()
		_ = sc.Cost()
		_ = v.Error()
		if len(v) == 0 {
			if _, err := placeUsers(sc); err != nil {
				t.Fatalf("valid scenario cannot be placed: %v", err)
			}
		}
	})
}

// FuzzRun runs small fuzzed scenarios that validate: the engine must not
// panic and must return a report that marshals.
func FuzzRun(f *testing.F) {
	sc := CanonicalScenario()
	sc.Groups[0].Count = 4
	sc.Run.Slots, sc.Run.WarmupSlots = 400, 20
	b, _ := json.Marshal(sc)
	f.Add(b)
	rs := richScenario()
	rs.Run.Slots, rs.Run.Replications = 300, 2
	b, _ = json.Marshal(rs)
	f.Add(b)
	f.Fuzz(func(t *testing.T, data []byte) {
		var sc Scenario
		if json.Unmarshal(data, &sc) != nil {
			return
		}
		sc.Normalise()
		if len(sc.Validate()) > 0 || sc.Cost() > 200000 {
			return
		}
		type result struct {
			rep *Report
			err error
		}
		done := make(chan result, 1)
		go func() {
			r, err := Run(context.Background(), sc, RunOptions{Trace: TraceOptions{Users: []int{0}}})
			done <- result{r, err}
		}()
		var res result
		select {
		case res = <-done:
		case <-time.After(20 * time.Second):
			b, _ := json.Marshal(sc)
			t.Fatalf("run of cost %d did not finish in 20 s: %s", sc.Cost(), b)
		}
		rep, err := res.rep, res.err
		if err != nil {
			t.Fatalf("valid scenario failed: %v", err)
		}
		if _, err := json.Marshal(rep); err != nil {
			t.Fatalf("report does not marshal: %v", err)
		}
	})
}

// loadYAMLScenario reads a scenario file of testdata/scenarios (YAML mapped
// to the JSON form, whose field names are the json tags).
func loadYAMLScenario(t *testing.T, path string) Scenario {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := yaml.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	j, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	var sc Scenario
	dec := json.NewDecoder(strings.NewReader(string(j)))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&sc); err != nil {
		t.Fatal(err)
	}
	return sc
}

// TestMinimalScenarioRuns runs testdata/scenarios/minimal.yaml (chip and bit
// rates, one group with count, distance and speed) end to end and checks
// that the report's normalised scenario shows every default.
func TestMinimalScenarioRuns(t *testing.T) {
	sc := loadYAMLScenario(t, "../testdata/scenarios/minimal.yaml")
	sc.Normalise()
	if v := sc.Validate(); len(v) != 0 {
		t.Fatalf("minimal scenario rejected: %v", v)
	}
	if testing.Short() {
		sc.Run.DurationS = 1 // 1500 slots: the defaults, not the figures, are under test
	}
	rep, err := Run(context.Background(), sc, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	n := rep.NormalisedScenario
	g := n.Groups[0]
	checks := []struct {
		field     string
		got, want any
	}{
		{"receiver.rake_fingers", n.Receiver.RakeFingers, RakeFingersChipResolved},
		{"receiver.max_fingers", n.Receiver.MaxFingers, DefaultMaxFingers},
		{"receiver.sir_averaging_slots", n.Receiver.SIRAveragingSlots, 1},
		{"groups[0].placement", g.Placement, PlacementUniformArea},
		{"groups[0].min_distance_m", g.MinDistanceM, float64(DefaultMinDistanceM)},
		{"groups[0].speeds[0].weight", g.Speeds[0].Weight, 1.0},
		{"groups[0].carrier_frequency_hz", g.CarrierFrequencyHz, DefaultCarrierHz},
		{"groups[0].profile", g.Profile, "FLAT"},
		{"groups[0].generator", g.Generator, GeneratorDefault},
		{"groups[0].path_loss.model", g.PathLoss.Model, PathLossLogDistance},
		{"groups[0].path_loss.ref_loss_db", g.PathLoss.RefLossDB, DefaultLogDistRefLossDB},
		{"groups[0].activity_factor", g.ActivityFactor, 1.0},
		{"inner_loop.mode", n.InnerLoop.Mode, InnerModeClosedLoop},
		{"inner_loop.command", n.InnerLoop.Command, CommandFixedStep},
		{"inner_loop.update_rate_hz", n.InnerLoop.UpdateRateHz, float64(DefaultUpdateRateHz)},
		{"inner_loop.step_db", n.InnerLoop.StepDB, float64(DefaultStepDB)},
		{"inner_loop.initial_power", n.InnerLoop.InitialPower, InitialPowerOpenLoop},
		{"outer_loop.bler_target", n.OuterLoop.BLERTarget, DefaultBLERTarget},
		{"link.kind", n.Link.Kind, LinkLogistic},
		{"link.effective_sir", n.Link.EffectiveSIR, EffectiveSIRLinearMean},
		{"run.replications", n.Run.Replications, 1},
		{"run.batches", n.Run.Batches, DefaultBatches},
	}
	for _, c := range checks {
		if !reflect.DeepEqual(c.got, c.want) {
			t.Errorf("%s = %v in the report's normalised scenario, want the default %v", c.field, c.got, c.want)
		}
	}
	if rep.Aggregate.Users != 8 || rep.Aggregate.UserSlots == 0 {
		t.Errorf("report covers %d users and %d user-slots, want 8 users", rep.Aggregate.Users, rep.Aggregate.UserSlots)
	}
	if len(rep.GroupFingers) != 1 || rep.GroupFingers[0].Fingers != 1 || rep.GroupFingers[0].Taps != 1 {
		t.Errorf("group fingers %+v, want one FLAT group with one finger", rep.GroupFingers)
	}
	// Without either run length, Normalise sets the documented 10 s.
	full := loadYAMLScenario(t, "../testdata/scenarios/minimal.yaml")
	full.Normalise()
	if full.Run.DurationS != DefaultDurationS || full.TotalSlots() != 15000 {
		t.Errorf("default run length %g s, %d slots; want 10 s, 15000 slots", full.Run.DurationS, full.TotalSlots())
	}
}

// TestNormaliseKeepsSetValues checks that Normalise fills only unset values
// and the path-loss and placement rules around the defaults.
func TestNormaliseKeepsSetValues(t *testing.T) {
	sc := Scenario{
		Receiver: Receiver{RakeFingers: RakeFingersIdealEveryTap, MaxFingers: 2},
		Groups: []UserGroup{
			{Count: 1, MaxDistanceM: 20, Speeds: []SpeedShare{{SpeedKmh: 3}}, PathLoss: PathLoss{Exponent: 3}},
			{Count: 1, Placement: PlacementUniformDistance, MinDistanceM: 5, MaxDistanceM: 20, Speeds: []SpeedShare{{SpeedKmh: 3}},
				PathLoss: PathLoss{Model: PathLossFreeSpace}},
		},
		Run: RunSettings{Slots: 100},
	}
	sc.Normalise()
	if sc.Receiver.RakeFingers != RakeFingersIdealEveryTap || sc.Receiver.MaxFingers != 2 {
		t.Errorf("receiver settings overwritten: %+v", sc.Receiver)
	}
	if g := sc.Groups[0]; g.MinDistanceM != 20 {
		t.Errorf("default min distance with max 20 m: %g, want min(35, 20) = 20", g.MinDistanceM)
	}
	if pl := sc.Groups[0].PathLoss; pl.Model != PathLossLogDistance || pl.Exponent != 3 || pl.RefDistanceM != 0 {
		t.Errorf("partly given log-distance parameters: %+v, want the model set and the rest left for Validate", pl)
	}
	if g := sc.Groups[1]; g.MinDistanceM != 5 || g.PathLoss.Model != PathLossFreeSpace || g.PathLoss.RefDistanceM != 0 {
		t.Errorf("set values changed: %+v", g)
	}
	if sc.Run.DurationS != 0 || sc.Run.Slots != 100 {
		t.Errorf("run length changed: %+v", sc.Run)
	}
	v := sc.Validate()
	if !strings.Contains(v.Error(), "groups[0].path_loss.ref_distance_m") {
		t.Errorf("missing log-distance parameters not reported: %v", v)
	}
}

// TestEnumErrorsNameAllowedValues: an enum error names every allowed value,
// in loop.Validate and when a scenario file holds an unknown name.
func TestEnumErrorsNameAllowedValues(t *testing.T) {
	sc := CanonicalScenario()
	sc.Groups[0].Generator = 9
	sc.InnerLoop.Command = 5
	sc.Receiver.RakeFingers = 3
	got := sc.Validate().Error()
	for _, want := range []string{
		"groups[0].generator: must be one of GENERATOR_DEFAULT, GENERATOR_SUM_OF_SINUSOIDS or GENERATOR_SPECTRAL, got 9",
		"inner_loop.command: must be one of COMMAND_FIXED_STEP, COMMAND_MULTI_LEVEL or COMMAND_ADAPTIVE, got 5",
		"receiver.rake_fingers: must be one of RAKE_FINGERS_CHIP_RESOLVED or RAKE_FINGERS_IDEAL_EVERY_TAP, got 3",
	} {
		if !strings.Contains(got, want) {
			t.Errorf("violations %q lack %q", got, want)
		}
	}
	var g Generator
	err := json.Unmarshal([]byte(`"GENERATOR_FAST"`), &g)
	if err == nil || !strings.Contains(err.Error(), "GENERATOR_DEFAULT, GENERATOR_SUM_OF_SINUSOIDS or GENERATOR_SPECTRAL") {
		t.Errorf("unknown generator name: %v", err)
	}
	// Unset enums that have no default (a placement with neither distances
	// nor a radius) say so.
	sc = CanonicalScenario()
	sc.Groups[0].Placement, sc.Groups[0].MinDistanceM, sc.Groups[0].MaxDistanceM = 0, 0, 0
	sc.Normalise()
	if got := sc.Validate().Error(); !strings.Contains(got, "groups[0].placement: must be one of PLACEMENT_EXPLICIT, PLACEMENT_UNIFORM_DISTANCE or PLACEMENT_UNIFORM_AREA") ||
		!strings.Contains(got, "got unset") {
		t.Errorf("unset placement: %q", got)
	}
}
