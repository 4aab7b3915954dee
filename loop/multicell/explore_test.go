package multicell

import (
	"context"
	"encoding/json"
	"os"
	"strconv"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/loop"
)

func TestExplore(t *testing.T) {
	if os.Getenv("MC_EXPLORE") == "" {
		t.Skip()
	}
	cfg := Config{
		Layout:    Layout{Sites: 19, SectorsPerSite: 1, InterSiteDistanceM: 1000, WrapAround: true},
		Groups:    []Group{{CountPerCell: 20, SpeedKmh: 3}},
		Channel:   Channel{PathLossExponent: 4, ShadowingDB: 8, SiteCorrelation: 0.5, FastFading: FastFading(envInt("MC_FF", 0))},
		Handover:  Handover{WindowDB: float64(envInt("MC_WIN", 6)), HysteresisDB: 0, MaxActive: envInt("MC_MAXA", 3)},
		OuterLoop: loop.OuterLoop{InitialTargetDB: 5},
		Run:       RunSettings{Slots: 3000, WarmupSlots: 1000, Seed: 1},
	}
	start := time.Now()
	rep, err := Run(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := json.MarshalIndent(rep.Overall, "", " ")
	t.Logf("%s", b)
	t.Logf("wall %v, %.2f M user-slots/s", time.Since(start), float64(rep.SimulatedUserSlots)/time.Since(start).Seconds()/1e6)
}

func envInt(k string, d int) int {
	if v, err := strconv.Atoi(os.Getenv(k)); err == nil {
		return v
	}
	return d
}
