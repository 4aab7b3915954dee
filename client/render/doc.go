// Package render turns fadeloop.v1 API messages into what the command-line
// tool prints and draws: aligned tables for people, CSV and JSON files, and
// the inputs of the plots in package client/plots.
//
// Each figure has one column stem, the proto field name (e.g.
// outage_probability), used in every CSV header; tables show the same
// figure under its label with unit (labels.go: Figures, FigureByKey, the
// client's one home of figure labels, used by client/report too; tune
// outputs prefer the API's FigureLabel where a message carries it). Probabilities
// are fractions in CSV and JSON, per cent in tables; powers in dBm, SIR and
// noise rise in dB.
//
// The package does no I/O beyond the io.Writer it is handed and holds no
// domain facts: every number comes from the messages.
package render
