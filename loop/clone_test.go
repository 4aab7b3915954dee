package loop

import (
	"reflect"
	"testing"
)

// sliceAddrs collects the backing-array address of every non-empty slice
// reachable from v (reflection walk, so a slice field added later is
// checked too).
func sliceAddrs(v reflect.Value, out map[uintptr]string, path string) {
	switch v.Kind() {
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			sliceAddrs(v.Field(i), out, path+"."+v.Type().Field(i).Name)
		}
	case reflect.Slice:
		if v.Len() > 0 {
			out[v.Pointer()] = path
		}
		for i := 0; i < v.Len(); i++ {
			sliceAddrs(v.Index(i), out, path+"[]")
		}
	case reflect.Pointer, reflect.Map:
		if !v.IsNil() {
			out[v.Pointer()] = path
		}
	}
}

// TestCloneDeep: Clone equals the original and shares no slice with it;
// nil and empty slices keep their form.
func TestCloneDeep(t *testing.T) {
	sc := richScenario()
	sc.Groups[0].CustomTaps = []Tap{{DelayNs: 0}, {DelayNs: 50, PowerDB: -3}}
	sc.Groups[1].DistancesM = []float64{150, 250, 350}
	sc.Link.Table = []LinkPoint{{}, {}}
	sc.InnerLoop.ThresholdsDB = []float64{}
	c := sc.Clone()
	if !reflect.DeepEqual(c, sc) {
		t.Fatalf("clone differs from the original")
	}
	if c.InnerLoop.ThresholdsDB == nil || c.Groups[1].CustomTaps != nil {
		t.Errorf("nil/empty form not kept")
	}
	a, b := map[uintptr]string{}, map[uintptr]string{}
	sliceAddrs(reflect.ValueOf(sc), a, "sc")
	sliceAddrs(reflect.ValueOf(c), b, "sc")
	if len(a) < 7 { // groups, 2 speeds, 1 taps, 1 distances, levels, table
		t.Fatalf("walk found only %d slices", len(a))
	}
	for p, path := range b {
		if q, ok := a[p]; ok {
			t.Errorf("clone shares %s with the original's %s", path, q)
		}
	}
	c.Groups[0].Speeds[0].SpeedKmh = 999
	if sc.Groups[0].Speeds[0].SpeedKmh == 999 {
		t.Errorf("changing the clone changed the original")
	}
}
