package multicell

// addScaledGo is s[i] += d·row[i] for i < len(s) (len(row) ≥ len(s)); the
// reference of the assembly version, and the code off amd64.
func addScaledGo(s []float64, d float64, row []float64) {
	row = row[:len(s)]
	for i, g := range row {
		s[i] += d * g
	}
}
