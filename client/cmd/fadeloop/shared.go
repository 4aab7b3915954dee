package main

import (
	"context"
	"io"
	"os"
	"strings"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// This file holds the steps that several commands share.

// emit writes a command's result in the chosen --format (json: msg in
// protojson; csv: writeCSV; table: writeTable) and commits the output.
func (e *env) emit(out *output, msg proto.Message, writeCSV func(io.Writer) error, writeTable func(io.Writer)) error {
	w := out.Writer()
	switch e.g.format {
	case "json":
		b, err := render.MarshalJSON(msg)
		if err != nil {
			return err
		}
		w.Write(b)
	case "csv":
		if err := writeCSV(w); err != nil {
			return err
		}
	default:
		writeTable(w)
	}
	return out.commit()
}

// loadRequest reads the request file at path (protojson, JSON or YAML),
// if given, into req; then, when a scenario file is named in args or the
// request has no base scenario, that file (or the built-in default) into
// *base; finally it applies the run-setting flags to *base. sf and rf are
// for mapping the server's violations back to file lines.
func loadRequest(path string, req proto.Message, base **pb.Scenario, args []string, ov *scenarioOverrides) (sf *client.ScenarioFile, rf *client.SourceFile, err error) {
	if path != "" {
		data, err := os.ReadFile(path)
		if err != nil {
			return nil, nil, badInput{err}
		}
		if rf, err = client.ParseMessage(path, data, req); err != nil {
			return nil, nil, err
		}
	}
	if len(args) > 0 || *base == nil {
		if sf, err = loadScenario(args); err != nil {
			return nil, nil, err
		}
		*base = proto.Clone(sf.Scenario).(*pb.Scenario)
	}
	if err := ov.apply(*base); err != nil {
		return nil, nil, err
	}
	return sf, rf, nil
}

// searchError maps a Tune or Capacity call's field violations to the files
// they came from (see searchLocate); other errors pass unchanged.
func searchError(sf *client.ScenarioFile, rf *client.SourceFile, err error) error {
	if inv, ok := client.AsInvalidInput(err); ok {
		return searchLocate(sf, rf, inv)
	}
	return err
}

// noArgs rejects positional arguments of a command that takes none.
func noArgs(args []string) error {
	if len(args) > 0 {
		return badInputf("unexpected arguments: %s", strings.Join(args, " "))
	}
	return nil
}

// infoSession opens a session (see env.session) and asks the server for
// its versions, limits and profiles.
func (e *env) infoSession(ctx context.Context) (out *output, cl *client.Client, release func(), info *pb.GetServerInfoResponse, err error) {
	out, cl, release, err = e.session()
	if err != nil {
		return nil, nil, nil, nil, err
	}
	if info, err = cl.ServerInfo(ctx); err != nil {
		release()
		return nil, nil, nil, nil, err
	}
	return out, cl, release, info, nil
}
