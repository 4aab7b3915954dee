package main

import (
	"fmt"
	"strconv"
	"strings"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// axisList is the repeatable --axis flag of sweep and tune: listed values
// (numbers, or enum names such as COMMAND_ADAPTIVE), or a range (first, last, count, optionally log) that the server expands
// and checks against its limits.
type axisList []*pb.SweepAxis

// String is "" for no axes, so that --help shows no default.
func (a *axisList) String() string {
	if a == nil || len(*a) == 0 {
		return ""
	}
	return fmt.Sprint(len(*a), " axes")
}

func (a *axisList) Set(v string) error {
	path, vals, ok := strings.Cut(v, "=")
	path = strings.TrimSpace(path)
	if !ok || path == "" || strings.TrimSpace(vals) == "" {
		return fmt.Errorf("want PATH=V1,V2,..., PATH=FROM:TO:COUNT or PATH=FROM:TO:COUNT:log")
	}
	ax := &pb.SweepAxis{Path: path}
	if parts := strings.Split(vals, ":"); len(parts) == 3 || len(parts) == 4 {
		from, e1 := strconv.ParseFloat(strings.TrimSpace(parts[0]), 64)
		to, e2 := strconv.ParseFloat(strings.TrimSpace(parts[1]), 64)
		n, e3 := strconv.Atoi(strings.TrimSpace(parts[2]))
		if e1 != nil || e2 != nil || e3 != nil || n < 1 {
			return fmt.Errorf("range %q: want FROM:TO:COUNT[:log] with numbers and COUNT >= 1", vals)
		}
		if len(parts) == 4 {
			if strings.TrimSpace(parts[3]) != "log" {
				return fmt.Errorf("range %q: the fourth part may only be \"log\"", vals)
			}
			ax.Log = true
		}
		ax.First, ax.Last, ax.Count = from, to, int32(n)
	} else {
		// Numbers, or names for an enum field (e.g.
		// inner_loop.command=COMMAND_FIXED_STEP,COMMAND_ADAPTIVE); the
		// server checks the names against the field's enum.
		var names []string
		for _, f := range strings.Split(vals, ",") {
			f = strings.TrimSpace(f)
			x, err := strconv.ParseFloat(f, 64)
			if err != nil {
				if f == "" || strings.ContainsAny(f, " =:") {
					return fmt.Errorf("value %q is neither a number nor an enum name", f)
				}
				names = append(names, f)
				continue
			}
			ax.Values = append(ax.Values, x)
		}
		if len(names) > 0 && len(ax.Values) > 0 {
			return fmt.Errorf("values %q mix numbers and names; an axis takes either", vals)
		}
		ax.Names = names
	}
	*a = append(*a, ax)
	return nil
}

// conditionList is the repeatable --condition flag.
type conditionList []*pb.Condition

// String is "" for no conditions, so that --help shows no default.
func (c *conditionList) String() string {
	if c == nil || len(*c) == 0 {
		return ""
	}
	return fmt.Sprint(len(*c), " conditions")
}

func (c *conditionList) Set(v string) error {
	head, body, ok := strings.Cut(v, ":")
	if !ok || strings.TrimSpace(head) == "" || strings.TrimSpace(body) == "" {
		return fmt.Errorf("want NAME[@WEIGHT]:PATH=VALUE[,PATH=VALUE...]")
	}
	cd := &pb.Condition{Name: strings.TrimSpace(head), Weight: 1}
	if name, w, ok := strings.Cut(head, "@"); ok {
		x, err := strconv.ParseFloat(strings.TrimSpace(w), 64)
		if err != nil {
			return fmt.Errorf("weight %q is not a number", w)
		}
		cd.Name, cd.Weight = strings.TrimSpace(name), x
	}
	for _, kv := range strings.Split(body, ",") {
		p, val, ok := strings.Cut(kv, "=")
		p, val = strings.TrimSpace(p), strings.TrimSpace(val)
		if !ok || p == "" || val == "" {
			return fmt.Errorf("override %q: want PATH=VALUE", kv)
		}
		o := &pb.Override{Path: p}
		if x, err := strconv.ParseFloat(val, 64); err == nil {
			o.Value = &pb.Override_Number{Number: x}
		} else {
			o.Value = &pb.Override_Text{Text: val}
		}
		cd.Overrides = append(cd.Overrides, o)
	}
	*c = append(*c, cd)
	return nil
}
