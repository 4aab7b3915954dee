// Package multicell simulates the uplink of a hexagonal multi-cell layout in
// which every cell's receiver sees every user, so that the other-cell
// interference ratio f, the noise rise of each cell and the outage at the
// cell edge come out of the simulation instead of being assumed.
//
// Model (see Config for every parameter, its unit, range and source):
// 1, 7 or 19 sites, omni or three sectors (antenna −min(12(θ/70°)², 20) dB),
// optional wrap-around; users dropped uniformly in each site's hexagon;
// log-distance path loss and log-normal shadowing to every site, correlated
// between sites and in distance travelled (Gudmundson); an active set of
// the cells within a handover window of the best; Rayleigh fast fading on
// the links of the active set (toward the other cells the slow gain, or
// every link fading for small layouts), each leg with one tap per RAKE
// finger resolved from the group's profile exactly as in one cell
// (loop.FingerSetFor: the receiver's rake_fingers and max_fingers at its
// chip rate); one closed loop per cell of the
// active set, the user raising its power only when every cell says up; the
// jump-rule outer loop on the selection-combined block result; optional
// open-loop power setting under the closed loop.
//
// A loop.Scenario with layout.sites set is a multi-cell scenario:
// RunScenario is the one dispatch point between this engine and loop.Run
// (used by loop/tune and the service), FromScenario converts the scenario
// and ToLoopReport returns the report as a loop.Report with its Layout
// section and the common figures filled.
//
// The package imports only fading, loop, gonum and golang.org/x/sys/cpu,
// never grpc or generated code; its one assembly kernel (rows_amd64.s, the
// cell-sum row update) does gonum floats.AddScaled's operations in the same order
// (TestAddScaledAVXMatchesGo; -tags purego builds without it). Every draw
// comes from streams derived from the seed (fading.NewStream,
// fading.NewFastStream), so a report is identical whatever GOMAXPROCS is.
package multicell
