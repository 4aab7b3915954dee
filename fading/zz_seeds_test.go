package fading

import (
	"context"
	"fmt"
	"testing"
)

func TestZZSeeds(t *testing.T) {
	for _, g := range []Generator{GeneratorDefault, GeneratorSumOfSinusoids, GeneratorSpectral} {
		for _, fdT := range []float64{0.037, 0.0037} {
			fails := 0
			for seed := uint64(100); seed < 110; seed++ {
				cfg := suiteConfig(g, fdT)
				cfg.Seed = seed
				rep, err := Check(context.Background(), cfg)
				if err != nil {
					t.Fatal(err)
				}
				for _, l := range rep.Lines {
					if !l.Pass {
						fails++
						fmt.Printf("   seed %d %v %g: %s %.4g vs %.4g ± %.3g\n", seed, g, fdT, l.Name, l.Measured, l.Theory, l.Tolerance)
					}
				}
			}
			fmt.Printf("%v %g: %d failing lines over 10 seeds\n", g, fdT, fails)
		}
	}
}
