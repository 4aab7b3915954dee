package service

import (
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"google.golang.org/protobuf/proto"
)

// domainScenario converts m to the engine's scenario, normalises it and
// returns it with the engine's semantic violations (Doppler against the
// update rate, sorted taps, path-loss validity, exactly-one-of rules, ...),
// field paths prefixed with prefix (e.g. "scenario.").
func domainScenario(m *pb.Scenario, prefix string) (loop.Scenario, []Violation) {
	sc := ScenarioFromProto(m)
	sc.Normalise()
	lvs := sc.Validate()
	if len(lvs) == 0 {
		return sc, nil
	}
	vs := make([]Violation, len(lvs))
	for i, v := range lvs {
		vs[i] = Violation{Field: prefix + v.Field, Description: v.Rule}
	}
	return sc, vs
}

// checkScenarioRequest validates a request carrying a scenario at field
// name field: the .proto rules of the whole request, then the engine's
// rules of the scenario (kept where they name a field the proto rules did
// not). It returns the normalised scenario or every violation.
func (s *Server) checkScenarioRequest(req proto.Message, m *pb.Scenario, field string) (loop.Scenario, []Violation) {
	vs := s.validator.check(req, "")
	if m == nil {
		if len(vs) == 0 {
			vs = append(vs, Violation{Field: field, Description: "value is required"})
		}
		return loop.Scenario{}, vs
	}
	sc, dvs := domainScenario(m, field+".")
	return sc, mergeViolations(vs, dvs)
}
