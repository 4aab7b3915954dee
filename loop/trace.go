package loop

// MaxTracePoints is the most samples a trace keeps per user; a longer
// trace is cut there (and the report says so).
const MaxTracePoints = 1 << 22

// traceDB is 10·log10(x) as float32, floored at −400 dB (so that a zero
// gain stays finite in JSON).
func traceDB(x float64) float32 {
	if !(x > 1e-40) {
		return -400
	}
	return float32(linToDB(x))
}

// tracer records decimated traces of chosen users (replication 0).
type tracer struct {
	users     []int
	dec       int64
	out       []UserTrace
	truncated bool
}

// MaxTracedUsers is the most users one run traces (TraceOptions.Users).
const MaxTracedUsers = 64

// MaxTraceDecimation is the largest decimation TraceDecimation picks (and
// the API accepts): one sample every 10⁶ slots.
const MaxTraceDecimation = 1_000_000

// TraceDecimation is the engine's rule for a trace of about samplesPerUser
// samples per user over a replication of totalSlots slots (warm-up
// included, Scenario.TotalSlots): one sample every
// max(1, ⌊totalSlots / samplesPerUser⌋) slots, at most MaxTraceDecimation,
// so a trace holds between samplesPerUser and about 2·samplesPerUser
// samples (all slots when totalSlots < 2·samplesPerUser). samplesPerUser
// <= 0 gives 1.
func TraceDecimation(totalSlots int64, samplesPerUser int) int {
	if samplesPerUser <= 0 {
		return 1
	}
	return int(max(1, min(totalSlots/int64(samplesPerUser), MaxTraceDecimation)))
}

// DecimationFor is the decimation these options give a replication of
// totalSlots slots: Decimation when set, else TraceDecimation's by
// SamplesPerUser, else 1.
func (o TraceOptions) DecimationFor(totalSlots int64) int {
	switch {
	case o.Decimation > 0:
		return o.Decimation
	case o.SamplesPerUser > 0:
		return TraceDecimation(totalSlots, o.SamplesPerUser)
	}
	return 1
}

func newTracer(o TraceOptions, total int64) *tracer {
	d := int64(o.DecimationFor(total))
	tr := &tracer{users: o.Users, dec: d}
	capN := int(min(total/d+1, 1<<16))
	for _, u := range o.Users {
		tr.out = append(tr.out, UserTrace{User: u, Slots: make([]int64, 0, capN), SIRDB: make([]float32, 0, capN),
			TargetDB: make([]float32, 0, capN), TxPowerDBm: make([]float32, 0, capN), ChannelGainDB: make([]float32, 0, capN)})
	}
	return tr
}

// slot samples slot t of the traced users from the replication's per-user
// SIR (linear), target (dB), Tx power (mW) and channel gain (linear).
func (tr *tracer) slot(t int64, sirLin, targetDB, powerMW, gain []float64, act []uint8) {
	if t%tr.dec != 0 {
		return
	}
	for i, u := range tr.users {
		if act != nil && act[u] == 0 {
			continue // inactive: no sample
		}
		o := &tr.out[i]
		if len(o.Slots) >= MaxTracePoints {
			tr.truncated = true
			continue
		}
		o.Slots = append(o.Slots, t)
		o.SIRDB = append(o.SIRDB, traceDB(sirLin[u]))
		o.TargetDB = append(o.TargetDB, float32(targetDB[u]))
		o.TxPowerDBm = append(o.TxPowerDBm, traceDB(powerMW[u]))
		o.ChannelGainDB = append(o.ChannelGainDB, traceDB(gain[u]))
	}
}
