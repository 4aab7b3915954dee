package multicell

import (
	"fmt"
	"math"
)

// Layout is a hexagonal layout of sites on the lattice spanned by
// a1 = D·(1, 0) and a2 = D·(1/2, √3/2), D the inter-site distance: the
// central site and its first ring (7 sites) or first two rings (19 sites).
// Each site's coverage is the regular hexagon of apothem D/2 around it
// (corners at 30°, 90°, …, at distance D/√3). A site is omni (one cell) or
// has three sectors with boresights at 30°, 150° and 270°.
//
// With WrapAround, the layout is repeated on the lattice of the cluster
// (shift vector i·a1 + j·a2 with (i, j) = (2, 1) for 7 sites and (3, 2) for
// 19, |shift| = √N·D, and its rotations by multiples of 60°) and every
// distance is taken to the nearest image of the site, so that every cell
// sees full rings of neighbours (common practice in system-level studies,
// e.g. 3GPP TR 36.942 (memory)).
type Layout struct {
	Sites              int     // 1, 7 or 19
	SectorsPerSite     int     // 1 (omni) or 3
	InterSiteDistanceM float64 // D in m, [50, 100000]
	WrapAround         bool    // distances to the nearest image of a site (7 or 19 sites)
}

// Sector antenna pattern A(θ) = −min(12 (θ/θ3dB)², A_m) dB with θ3dB = 70° and
// A_m = 20 dB (3GPP TR 36.942 (memory)).
const (
	SectorBeamwidthDeg  = 70.0
	SectorFrontToBackDB = 20.0
	sqrt3               = 1.7320508075688772
)

// SectorGainDB is the sector antenna gain in dB at an angle offBoresightRad
// from the boresight (any real angle; wrapped to (−π, π]).
func SectorGainDB(offBoresightRad float64) float64 {
	th := math.Remainder(offBoresightRad, 2*math.Pi) * 180 / math.Pi
	return -math.Min(12*(th/SectorBeamwidthDeg)*(th/SectorBeamwidthDeg), SectorFrontToBackDB)
}

// site is one site's position in m.
type site struct{ x, y float64 }

// cell is one cell (a sector of a site, or an omni site).
type cell struct {
	site      int
	boresight float64 // rad; NaN for omni
}

// ringAxial lists the axial lattice coordinates (i, j) of the sites in
// ring order: the centre, then ring 1, then ring 2, each ring starting on
// the positive x axis and going anticlockwise.
func ringAxial(rings int) [][2]int {
	out := [][2]int{{0, 0}}
	// Unit steps around a hexagonal ring in axial coordinates.
	dirs := [6][2]int{{-1, 1}, {-1, 0}, {0, -1}, {1, -1}, {1, 0}, {0, 1}}
	for r := 1; r <= rings; r++ {
		i, j := r, 0
		for _, d := range dirs {
			for s := 0; s < r; s++ {
				out = append(out, [2]int{i, j})
				i += d[0]
				j += d[1]
			}
		}
	}
	return out
}

// validate checks the layout; field paths are API paths under prefix.
func (l Layout) validate(add func(field, rule string, args ...any), prefix string) {
	switch l.Sites {
	case 1, 7, 19:
	default:
		add(prefix+"sites", "must be one of 1, 7, 19, got %d", l.Sites)
	}
	switch l.SectorsPerSite {
	case 1, 3:
	default:
		add(prefix+"sectors_per_site", "must be 1 or 3, got %d", l.SectorsPerSite)
	}
	if !(l.InterSiteDistanceM >= 50 && l.InterSiteDistanceM <= 1e5) {
		add(prefix+"inter_site_distance_m", "must be in [50, 100000] m, got %g", l.InterSiteDistanceM)
	}
	if l.WrapAround && l.Sites == 1 {
		add(prefix+"wrap_around", "needs 7 or 19 sites, got %d", l.Sites)
	}
}

// geometry is a prepared layout.
type geometry struct {
	l      Layout
	sites  []site
	cells  []cell
	images [][2]float64 // translation vectors of the wrap-around images, incl. (0, 0)
}

func newGeometry(l Layout) *geometry {
	rings := map[int]int{1: 0, 7: 1, 19: 2}[l.Sites]
	d := l.InterSiteDistanceM
	g := &geometry{l: l}
	for _, a := range ringAxial(rings) {
		g.sites = append(g.sites, site{x: d * (float64(a[0]) + 0.5*float64(a[1])), y: d * sqrt3 / 2 * float64(a[1])})
	}
	// Cells are site-major: cell c is sector c mod S of site c / S
	// (gainsRange relies on it; TestCellsSiteMajor).
	for s := range g.sites {
		if l.SectorsPerSite == 3 {
			for k := 0; k < 3; k++ {
				g.cells = append(g.cells, cell{site: s, boresight: (30 + 120*float64(k)) * math.Pi / 180})
			}
		} else {
			g.cells = append(g.cells, cell{site: s, boresight: math.NaN()})
		}
	}
	g.images = [][2]float64{{0, 0}}
	if l.WrapAround {
		i, j := 2.0, 1.0
		if l.Sites == 19 {
			i, j = 3, 2
		}
		tx, ty := d*(i+0.5*j), d*sqrt3/2*j
		for k := 0; k < 6; k++ {
			a := float64(k) * math.Pi / 3
			g.images = append(g.images, [2]float64{tx*math.Cos(a) - ty*math.Sin(a), tx*math.Sin(a) + ty*math.Cos(a)})
		}
	}
	return g
}

// offset returns the vector from site s (its nearest image) to point (x, y)
// and its length in m.
func (g *geometry) offset(s int, x, y float64) (dx, dy, dist float64) {
	best := math.Inf(1)
	for _, im := range g.images {
		ex, ey := x-(g.sites[s].x+im[0]), y-(g.sites[s].y+im[1])
		if r := ex*ex + ey*ey; r < best {
			best, dx, dy = r, ex, ey
		}
	}
	return dx, dy, math.Sqrt(best)
}

// antennaDB is cell c's antenna gain toward a point at offset (dx, dy) from
// its site: 0 dB for omni cells.
func (g *geometry) antennaDB(c int, dx, dy float64) float64 {
	b := g.cells[c].boresight
	if math.IsNaN(b) {
		return 0
	}
	return SectorGainDB(math.Atan2(dy, dx) - b)
}

// inHexagon reports whether the offset (dx, dy) from a site lies in its
// hexagon of apothem D/2 (flat sides facing the six neighbours).
func inHexagon(dx, dy, d float64) bool {
	h := d / 2
	return math.Abs(dx) <= h &&
		math.Abs(0.5*dx+sqrt3/2*dy) <= h &&
		math.Abs(-0.5*dx+sqrt3/2*dy) <= h
}

// CellName is the name of cell c of a layout, "S3" (omni) or "S3/2" (site 3,
// sector 2).
func (l Layout) CellName(c int) string {
	if l.SectorsPerSite == 3 {
		return fmt.Sprintf("S%d/%d", c/3, c%3)
	}
	return fmt.Sprintf("S%d", c)
}

// Cells is the number of cells of the layout.
func (l Layout) Cells() int { return l.Sites * l.SectorsPerSite }

// maxSites is the largest layout (Sites is 1, 7 or 19).
const maxSites = 19
