package store

import (
	"fmt"
	"maps"
	"slices"
	"strings"

	"sluice/pkg/coding"
	"sluice/pkg/model"
)

// recordVersion leads every record of schema 2. A record layout that
// changes takes the next number, and the decoders read every number they
// know.
const recordVersion byte = 1

// encodeJob writes a job record; its id is the key, its last window and
// signature are kept apart.
func encodeJob(j *model.JobRecord) []byte {
	e := enc{b: make([]byte, 0, 256)}
	e.byte(recordVersion)
	encodeMeta(&e, &j.Meta)
	e.int(j.Closed)
	e.uvarint(j.ClosedAt)
	e.time(j.LastSample)
	e.values(&j.Totals)
	e.rates(&j.LiveRates)
	e.levels(&j.LiveLevels)
	e.grades(&j.LiveGrades)
	e.int(j.LiveNodes)
	e.bool(j.Evaluated)
	e.int(j.FlagsRaised)
	e.bool(j.Finished)
	e.bool(j.Unevaluated)
	e.count(len(j.Streaks))
	for _, r := range sortedReasons(j.Streaks) {
		encodeReason(&e, r)
		encodeStreak(&e, j.Streaks[r])
	}
	return e.b
}

func decodeJob(id string, v []byte) (model.JobRecord, error) {
	d := dec{b: v}
	d.version("job", recordVersion)
	var j model.JobRecord
	j.Meta = decodeMeta(&d, id)
	j.Closed = d.int("closed")
	j.ClosedAt = d.uvarint("closed at")
	j.LastSample = d.time("last sample")
	d.values("totals", &j.Totals)
	d.rates("live rates", &j.LiveRates)
	d.levels("live levels", &j.LiveLevels)
	d.grades("live grades", &j.LiveGrades)
	j.LiveNodes = d.int("live nodes")
	j.Evaluated = d.bool("evaluated")
	j.FlagsRaised = d.int("flags raised")
	j.Finished = d.bool("finished")
	j.Unevaluated = d.bool("unevaluated")
	if n := d.count("streaks", 14); n > 0 {
		j.Streaks = make(map[model.Reason]model.StreakRecord, n)
		for range n {
			r := decodeReason(&d)
			j.Streaks[r] = decodeStreak(&d)
		}
	}
	if err := d.end(); err != nil {
		return model.JobRecord{}, fmt.Errorf("job %q: %w", id, err)
	}
	return j, nil
}

// sortedReasons orders a job's reasons, so that the same state is always
// written as the same bytes.
func sortedReasons(m map[model.Reason]model.StreakRecord) []model.Reason {
	rs := slices.Collect(maps.Keys(m))
	slices.SortFunc(rs, func(a, b model.Reason) int { return strings.Compare(a.String(), b.String()) })
	return rs
}

func encodeMeta(e *enc, m *model.JobMeta) {
	e.str(m.User)
	e.str(m.Account)
	e.str(m.Name)
	e.count(len(m.Nodes))
	for _, n := range m.Nodes {
		e.str(n)
	}
	e.time(m.Start)
	e.time(m.End)
	e.varint(int64(m.Exit))
	e.bool(m.Announced)
}

func decodeMeta(d *dec, id string) model.JobMeta {
	m := model.JobMeta{ID: id, User: d.str("user"), Account: d.str("account"), Name: d.str("name")}
	if n := d.count("nodes", 1); n > 0 {
		m.Nodes = make([]string, n)
		for i := range m.Nodes {
			m.Nodes[i] = d.str("node")
		}
	}
	m.Start = d.time("start")
	m.End = d.time("end")
	m.Exit = int32(d.int("exit code"))
	m.Announced = d.bool("announced")
	return m
}

func encodeReason(e *enc, r model.Reason) {
	e.byte(byte(r.Kind))
	switch r.Kind {
	case model.HighRate:
		e.byte(byte(r.Metric))
	default:
		e.str(r.Pattern)
	}
}

func decodeReason(d *dec) model.Reason {
	switch k := model.ReasonKind(d.byte("reason")); k {
	case model.HighRate:
		return model.HighRateOf(d.metric("reason metric"))
	case model.PatternMatch:
		return model.PatternOf(d.str("reason pattern"))
	default:
		d.fail("reason", fmt.Sprintf("kind %d", k))
		return model.Reason{}
	}
}

func encodeStreak(e *enc, s model.StreakRecord) {
	e.int(s.Above)
	e.int(s.Below)
	e.time(s.Since)
	e.float(s.Score)
	e.bool(s.Flag != nil)
	if s.Flag != nil {
		encodeFlag(e, s.Flag)
	}
}

func decodeStreak(d *dec) model.StreakRecord {
	s := model.StreakRecord{Above: d.int("above"), Below: d.int("below"), Since: d.time("since"), Score: d.float("score")}
	if d.bool("has flag") {
		f := decodeFlag(d)
		s.Flag = &f
	}
	return s
}

// encodeFlag writes everything of a flag but its state and
// acknowledgement, which are decided when it is listed.
func encodeFlag(e *enc, f *model.Flag) {
	e.str(f.ID)
	e.str(f.Job)
	encodeReason(e, f.Reason)
	e.byte(byte(f.Metric))
	e.byte(byte(f.Level))
	e.str(f.Pattern)
	e.str(f.Title)
	e.float(f.Score)
	e.byte(byte(f.Severity))
	e.str(f.Advice)
	e.count(len(f.Drivers))
	for _, dr := range f.Drivers {
		e.byte(byte(dr.Metric))
		e.float(dr.Rate)
		e.byte(byte(dr.Level))
		e.byte(byte(dr.Grade))
		e.float(dr.Elevated)
		e.float(dr.Critical)
	}
	e.str(f.Summary)
	e.float(f.Value)
	e.float(f.Peak)
	e.float(f.Cut)
	e.int(f.Nodes)
	e.time(f.Since)
	e.time(f.Raised)
	e.time(f.Cleared)
}

func decodeFlag(d *dec) model.Flag {
	f := model.Flag{ID: d.str("flag id"), Job: d.str("flag job"), Reason: decodeReason(d), Metric: d.metric("flag metric")}
	f.Level = decodeLevel(d, "flag level")
	f.Pattern, f.Title, f.Score = d.str("pattern"), d.str("title"), d.float("score")
	if f.Severity = model.Severity(d.byte("severity")); f.Severity > model.SeverityCritical {
		d.fail("severity", fmt.Sprint(f.Severity))
	}
	f.Advice = d.str("advice")
	if n := d.count("drivers", 27); n > 0 {
		f.Drivers = make([]model.Driver, n)
		for i := range f.Drivers {
			f.Drivers[i] = model.Driver{Metric: d.metric("driver metric"), Rate: d.float("driver rate"), Level: decodeLevel(d, "driver level")}
			if f.Drivers[i].Grade = coding.Grade(d.byte("driver grade")); f.Drivers[i].Grade >= coding.GradeCount {
				d.fail("driver grade", fmt.Sprint(f.Drivers[i].Grade))
			}
			f.Drivers[i].Elevated, f.Drivers[i].Critical = d.float("elevated cut"), d.float("critical cut")
		}
	}
	f.Summary = d.str("summary")
	f.Value, f.Peak, f.Cut = d.float("value"), d.float("peak"), d.float("cut")
	f.Nodes = d.int("nodes")
	f.Since, f.Raised, f.Cleared = d.time("since"), d.time("raised"), d.time("cleared")
	return f
}

func decodeLevel(d *dec, field string) coding.Level {
	l := coding.Level(d.byte(field))
	if l > coding.Critical {
		d.fail(field, fmt.Sprint(l))
	}
	return l
}

func encodeFlagRecord(f *model.Flag) []byte {
	e := enc{b: make([]byte, 0, 256)}
	e.byte(recordVersion)
	encodeFlag(&e, f)
	return e.b
}

func decodeFlagRecord(key, v []byte) (model.Flag, error) {
	d := dec{b: v}
	d.version("flag", recordVersion)
	f := decodeFlag(&d)
	if err := d.end(); err != nil {
		return model.Flag{}, fmt.Errorf("flag %q: %w", key, err)
	}
	return f, nil
}

// encodeWindow writes a closed window; the job and index are the key.
func encodeWindow(w *model.Window) []byte {
	e := enc{b: make([]byte, 0, 160)}
	e.byte(recordVersion)
	e.time(w.Start)
	e.time(w.End)
	e.int(w.Nodes)
	e.rates(&w.Rates)
	e.levels(&w.Levels)
	e.grades(&w.Grades)
	e.float(w.BusiestShare)
	e.float(w.NodeSpread)
	return e.b
}

func decodeWindow(job string, idx int, v []byte) (model.Window, error) {
	d := dec{b: v}
	d.version("window", recordVersion)
	w := model.Window{Job: job, Index: idx, Start: d.time("start"), End: d.time("end"), Nodes: d.int("nodes")}
	d.rates("rates", &w.Rates)
	d.levels("levels", &w.Levels)
	d.grades("grades", &w.Grades)
	w.BusiestShare, w.NodeSpread = d.float("busiest share"), d.float("node spread")
	if err := d.end(); err != nil {
		return model.Window{}, fmt.Errorf("window %d of job %q: %w", idx, job, err)
	}
	return w, nil
}

func encodeSilence(s *model.Silence) []byte {
	e := enc{}
	e.byte(recordVersion)
	e.str(s.ID)
	e.str(s.Job)
	e.str(s.Pattern)
	e.str(s.By)
	e.str(s.Why)
	e.time(s.Until)
	e.time(s.Created)
	return e.b
}

func decodeSilence(key, v []byte) (model.Silence, error) {
	d := dec{b: v}
	d.version("silence", recordVersion)
	s := model.Silence{ID: d.str("id"), Job: d.str("job"), Pattern: d.str("pattern"), By: d.str("by"), Why: d.str("why")}
	s.Until, s.Created = d.time("until"), d.time("created")
	if err := d.end(); err != nil {
		return model.Silence{}, fmt.Errorf("silence %q: %w", key, err)
	}
	return s, nil
}

func encodeAck(a *model.Ack) []byte {
	e := enc{}
	e.byte(recordVersion)
	e.str(a.Flag)
	e.str(a.By)
	e.str(a.Why)
	e.time(a.At)
	return e.b
}

func decodeAck(key, v []byte) (model.Ack, error) {
	d := dec{b: v}
	d.version("acknowledgement", recordVersion)
	a := model.Ack{Flag: d.str("flag"), By: d.str("by"), Why: d.str("why"), At: d.time("at")}
	if err := d.end(); err != nil {
		return model.Ack{}, fmt.Errorf("acknowledgement %q: %w", key, err)
	}
	return a, nil
}
