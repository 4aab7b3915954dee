package loop

// Caution is the one wording of the statement every output that could lead
// to setting real transmitters carries once (help texts, run, sweep, tune
// and capacity tables, HTML reports, the multi-cell engine's notes): the
// figures are simulated and do not replace the operator's planning,
// regulatory limits or licensed practice. One sentence, ending in a period.
const Caution = "Simulated settings do not replace the operator's radio planning, " +
	"the regulatory limits on transmit power and exposure, or licensed practice."
