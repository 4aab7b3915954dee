package jobs

import (
	"encoding/json"
	"math"
	"reflect"
)

// NonFinite records a NaN or ±Inf of a stored report (JSON has no such
// numbers): Ord is the float's place among the report's float fields in
// declaration order (slices element by element), Value "NaN", "+Inf" or
// "-Inf". The stored report holds 0 there; decoding puts the value back.
type NonFinite struct {
	Ord   int    `json:"ord"`
	Value string `json:"value"`
}

// walkFloats calls fn for every float field reachable from v, in order.
func walkFloats(v reflect.Value, fn func(reflect.Value)) {
	switch v.Kind() {
	case reflect.Float32, reflect.Float64:
		fn(v)
	case reflect.Struct:
		for i := 0; i < v.NumField(); i++ {
			walkFloats(v.Field(i), fn)
		}
	case reflect.Slice, reflect.Array:
		for i := 0; i < v.Len(); i++ {
			walkFloats(v.Index(i), fn)
		}
	case reflect.Pointer:
		if !v.IsNil() {
			walkFloats(v.Elem(), fn)
		}
	}
}

// EncodeResult is the stored JSON form of r: the report's non-finite
// numbers are written as 0 and listed in "non_finite" (r's report is left
// as it was). DecodeResult reverses it exactly.
func EncodeResult(r Result) ([]byte, error) {
	r.NonFinite = nil
	if r.Report == nil {
		return json.Marshal(r)
	}
	type saved struct {
		v reflect.Value
		f float64
	}
	var keep []saved
	ord := 0
	walkFloats(reflect.ValueOf(r.Report).Elem(), func(v reflect.Value) {
		f := v.Float()
		switch {
		case math.IsNaN(f):
			r.NonFinite = append(r.NonFinite, NonFinite{ord, "NaN"})
		case math.IsInf(f, 1):
			r.NonFinite = append(r.NonFinite, NonFinite{ord, "+Inf"})
		case math.IsInf(f, -1):
			r.NonFinite = append(r.NonFinite, NonFinite{ord, "-Inf"})
		default:
			ord++
			return
		}
		keep = append(keep, saved{v, f})
		v.SetFloat(0)
		ord++
	})
	b, err := json.Marshal(r)
	for _, k := range keep {
		k.v.SetFloat(k.f)
	}
	return b, err
}

// DecodeResult decodes the JSON of EncodeResult, putting the non-finite
// numbers back.
func DecodeResult(b []byte) (Result, error) {
	var r Result
	if err := json.Unmarshal(b, &r); err != nil {
		return r, err
	}
	if len(r.NonFinite) == 0 || r.Report == nil {
		r.NonFinite = nil
		return r, nil
	}
	at := make(map[int]float64, len(r.NonFinite))
	for _, n := range r.NonFinite {
		switch n.Value {
		case "+Inf":
			at[n.Ord] = math.Inf(1)
		case "-Inf":
			at[n.Ord] = math.Inf(-1)
		default:
			at[n.Ord] = math.NaN()
		}
	}
	ord := 0
	walkFloats(reflect.ValueOf(r.Report).Elem(), func(v reflect.Value) {
		if f, ok := at[ord]; ok {
			v.SetFloat(f)
		}
		ord++
	})
	r.NonFinite = nil
	return r, nil
}
