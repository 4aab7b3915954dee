package loop

// LegStates are the handover states reported separately in a multi-cell
// run: one, two, and three or more cells in the active set.
const LegStates = 3

// LayoutReport is the multi-cell section of a Report (layout.sites set):
// figures over the whole layout, per cell, and one point per user of
// replication 0 for maps. other_to_own is the ratio of the mean
// interference a cell receives from users served by other cells to that
// from its own users (the f of pole-capacity formulas), measured, not
// assumed; a user is served by the best cell of its active set.
//
// Intervals (95 %): with one replication, Student t over batch means in
// time, conditional on the drop; with several, Student t over the
// replications (independent drops). Proportions use the Wilson interval at
// the effective sample size implied by that spread, inside [0, 1].
type LayoutReport struct {
	Overall    LayoutOverall     `json:"overall"`
	Cells      []LayoutCell      `json:"cells"`
	UserPoints []LayoutUserPoint `json:"user_points"` // replication 0's drop
}

// LayoutOverall are the layout-wide figures of a multi-cell run.
type LayoutOverall struct {
	OtherToOwn          Estimate   `json:"other_to_own"`           // Σ other-cell / Σ own-cell interference over every cell, linear
	NoiseRiseDB         Estimate   `json:"noise_rise_db"`          // mean over cells and slots of 10 log10(I0/N0), dB
	OutageProbability   Estimate   `json:"outage_probability"`     // user-slots with combined SIR below target − margin
	OutageByLegs        []Estimate `json:"outage_by_legs"`         // outage among user-slots with 1, 2, ≥3 legs
	LegShare            []Estimate `json:"leg_share"`              // share of user-slots with 1, 2, ≥3 legs
	SoftHandoverShare   Estimate   `json:"soft_handover_share"`    // share of user-slots with ≥ 2 legs
	TimeAtMaxPower      Estimate   `json:"time_at_max_power"`      // share of user-slots at maximum power
	TimeAtMaxByLegs     []Estimate `json:"time_at_max_by_legs"`    // the same among 1, 2, ≥3 legs
	TimeAtMaxEdge       Estimate   `json:"time_at_max_edge"`       // among users farther than 0.8·D/2 from their site
	SIRErrorMeanDB      Estimate   `json:"sir_error_mean_db"`      // combined SIR − target, dB
	SIRErrorStdDB       Estimate   `json:"sir_error_std_db"`       // dB
	TxPowerMeanDBm      Estimate   `json:"tx_power_mean_dbm"`      // mean of the transmit power in dBm
	AchievedBLER        Estimate   `json:"achieved_bler"`          // selection-combined block error rate
	OtherToOwnSpreadP5  float64    `json:"other_to_own_spread_p5"` // 5th percentile over cells and slots of the per-slot ratio
	OtherToOwnSpreadP95 float64    `json:"other_to_own_spread_p95"`
}

// LayoutCell are one cell's figures of a multi-cell run.
type LayoutCell struct {
	Name           string   `json:"name"` // "S3" or "S3/2" (site 3, sector 2)
	Site           int      `json:"site"`
	OtherToOwn     Estimate `json:"other_to_own"`
	OtherToOwnP50  float64  `json:"other_to_own_p50"` // median of the per-slot ratio
	OtherToOwnP95  float64  `json:"other_to_own_p95"`
	NoiseRiseDB    Estimate `json:"noise_rise_db"`
	NoiseRiseP95DB float64  `json:"noise_rise_p95_db"`
	ServedUsers    float64  `json:"served_users"` // mean number of users whose best cell this is
	SiteXM         float64  `json:"site_x_m"`     // the cell's site position in m (central site at the origin)
	SiteYM         float64  `json:"site_y_m"`
	BoresightDeg   float64  `json:"boresight_deg"` // sector boresight, degrees anticlockwise from +x; 0 for an omni cell
}

// LayoutUserPoint is one user of replication 0 for maps: position in m
// (central site at the origin), best cell at the end, mean legs, and its
// own outage and mean power.
type LayoutUserPoint struct {
	XM                float64 `json:"x_m"`
	YM                float64 `json:"y_m"`
	Group             int     `json:"group"`
	BestCell          int     `json:"best_cell"`
	MeanLegs          float64 `json:"mean_legs"`
	OutageProbability float64 `json:"outage_probability"`
	TxPowerMeanDBm    float64 `json:"tx_power_mean_dbm"`
}
