// Package api is the aggregator's HTTP API, version 1: the request and
// response types, the handlers over a [Backend], and the [Client] every
// operator command uses. The CLI prints what these types carry; it decides
// nothing of its own.
//
// # Basics
//
// [Handler] serves /api/v1/... (and, given one, /metrics) for a Backend,
// which the aggregator service implements. Errors are plain text with a
// status: 404 for [ErrNotFound], 400 for [ErrBadRequest], 500 otherwise.
// Every JSON answer is an object, so fields can be added without breaking
// clients.
//
// # Caveats
//
// The types are the API's wire form: renaming a JSON field breaks clients.
package api

import (
	"errors"
	"time"

	"sluice/pkg/baseline"
	"sluice/pkg/coding"
	"sluice/pkg/matcher"
	"sluice/pkg/model"
)

// Errors a Backend wraps so that the handler answers with the right
// status.
var (
	ErrNotFound   = errors.New("not found")
	ErrBadRequest = errors.New("bad request")
)

// JobList is what GET /api/v1/jobs answers.
type JobList struct {
	Jobs []model.Summary `json:"jobs"`
}

// JobDetail is a job's summary with its closed windows, as
// GET /api/v1/jobs/{id} answers. For a job the aggregator no longer
// tracks but whose windows it keeps, the summary holds only the id, the
// state "ended" and the window count.
type JobDetail struct {
	model.Summary
	ClosedWindows []model.Window `json:"closed_windows"`
}

// JobExplanation is what GET /api/v1/jobs/{id}/explain answers: every
// pattern's latest verdict for the job as the matcher decided it, most
// relevant first (active flag, then matched, then by score).
type JobExplanation struct {
	Job           model.Summary        `json:"job"`
	ClosedWindows int                  `json:"closed_windows"`
	Patterns      []PatternExplanation `json:"patterns"`
}

// PatternExplanation is one pattern's verdict, the flag it feeds if one
// is active, and the pattern's advice.
type PatternExplanation struct {
	matcher.Explanation
	Advice string      `json:"advice"`
	Flag   *model.Flag `json:"flag,omitempty"`
}

// FlagFilter selects flags; a zero field selects every flag.
type FlagFilter struct {
	Job string
	// Pattern is a pattern name or a reason ("high_rate:creates").
	Pattern  string
	State    *model.FlagState
	Severity *model.Severity
}

// FlagList is what GET /api/v1/flags answers: most recently raised first.
type FlagList struct {
	Flags []model.Flag `json:"flags"`
}

// SilenceRequest is the body of POST /api/v1/silences.
type SilenceRequest struct {
	Job     string `json:"job"`
	Pattern string `json:"pattern"` // a pattern name or a reason such as "high_rate:creates"
	For     string `json:"for"`     // a duration: 90m, 2h, 3d, 1d12h
	By      string `json:"by"`
	Why     string `json:"why"`
}

// AckRequest is the body of POST /api/v1/flags/{id}/ack.
type AckRequest struct {
	By  string `json:"by"`
	Why string `json:"why"`
}

// SilenceList is what GET /api/v1/silences answers: the silences in force.
type SilenceList struct {
	Silences []model.Silence `json:"silences"`
}

// AgentList is what GET /api/v1/agents answers, by node name.
type AgentList struct {
	Agents []model.AgentStatus `json:"agents"`
}

// PatternFile is one pattern in force, as GET /api/v1/patterns lists it; File
// is its file text (schema 1).
type PatternFile struct {
	Name     string         `json:"name"`
	Title    string         `json:"title"`
	Severity model.Severity `json:"severity"`
	Kind     string         `json:"kind"`
	Source   string         `json:"source"`
	File     string         `json:"file"`
}

// PatternList is what GET /api/v1/patterns answers, in library order.
type PatternList struct {
	Patterns []PatternFile `json:"patterns"`
}

// BaselineReport is what GET /api/v1/baseline answers: the coding in force and
// the windows behind it.
type BaselineReport struct {
	Recomputed  time.Time        `json:"recomputed"`
	HorizonDays int              `json:"horizon_days"`
	MinWindows  uint64           `json:"min_windows"`
	Quantiles   [5]float64       `json:"grade_quantiles"`
	Days        []BaselineDay    `json:"days"`
	Metrics     []BaselineMetric `json:"metrics"`
	Rejected    uint64           `json:"rejected_values"`
	Newest      baseline.DayKey  `json:"newest_day,omitzero"`
}

// BaselineDay is one stored day and where it came from.
type BaselineDay struct {
	Day     baseline.DayKey   `json:"day"`
	Origins []baseline.Origin `json:"origins"`
}

// BaselineMetric is one metric's cuts in force and the counts behind them.
type BaselineMetric struct {
	Metric   string           `json:"metric"`
	Unit     string           `json:"unit"`
	Bytes    bool             `json:"bytes"`
	Basis    coding.Basis     `json:"basis"` // "learned" or "seed"
	Elevated float64          `json:"elevated"`
	Critical float64          `json:"critical"`
	Grades   coding.GradeCuts `json:"grade_cuts"`
	Windows  uint64           `json:"windows"`
	Idle     uint64           `json:"idle_windows"`
}

// ImportResult is what POST /api/v1/baseline/import answers.
type ImportResult struct {
	Lines     int               `json:"lines"`
	Rows      int               `json:"rows"`
	Windows   uint64            `json:"windows"`
	Malformed int               `json:"malformed"`
	Errors    []string          `json:"errors"` // the first windowcsv.MaxErrors, with line numbers
	Days      []baseline.DayKey `json:"days"`   // days replaced, ascending
	Rejected  uint64            `json:"rejected_values"`
}
