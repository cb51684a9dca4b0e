package aggregate

import (
	"errors"
	"fmt"
	"net/http"
	"slices"

	"sluice/pkg/baseline"
	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

// MaxImportBytes bounds one import upload (about 25 million rows).
const MaxImportBytes = 1 << 30

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

// importCSV reads a window-value file into one Day per day it names. Rows
// the layout refuses are counted and listed; the rest are kept.
func importCSV(r *http.Request) (map[baseline.DayKey]*baseline.Day, ImportResult, error) {
	days := map[baseline.DayKey]*baseline.Day{}
	var res ImportResult
	st, err := windowcsv.Read(r.Context(), r.Body, func(row windowcsv.Row) error {
		k := baseline.DayOf(row.Day)
		d := days[k]
		if d == nil {
			d = baseline.NewDay()
			days[k] = d
		}
		if err := d.AddWithCount(row.Metric, row.Rate, row.Count); err != nil {
			res.Rejected++
		}
		return nil
	})
	res.Lines, res.Rows, res.Windows, res.Malformed = st.Lines, st.Rows, st.Windows, st.Malformed
	for _, e := range st.Errors {
		res.Errors = append(res.Errors, e.Error())
	}
	for k := range days {
		res.Days = append(res.Days, k)
	}
	slices.Sort(res.Days)
	return days, res, err
}

func (s *Service) handleImport(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, MaxImportBytes)
	days, res, err := importCSV(r)
	if err != nil {
		status := http.StatusBadRequest
		if !errors.Is(err, windowcsv.ErrHeader) {
			status = http.StatusUnprocessableEntity
		}
		http.Error(w, fmt.Sprintf("import: %v (nothing imported)", err), status)
		return
	}
	s.mu.Lock()
	s.learn.imported(days)
	s.recomputeLocked()
	s.mu.Unlock()
	s.flush()
	s.log.Info("baseline imported", "rows", res.Rows, "windows", res.Windows, "malformed", res.Malformed, "days", len(res.Days))
	writeJSON(w, res)
}

// handleExport writes every stored day in the window-value layout: per day
// and metric, each sketch bin as its value and count, and the idle windows
// as rate 0. origin=live or origin=import restricts it to one origin;
// otherwise a day's origins are merged.
func (s *Service) handleExport(w http.ResponseWriter, r *http.Request) {
	origin := baseline.Origin(r.URL.Query().Get("origin"))
	if origin != "" && origin != baseline.Live && origin != baseline.Import {
		http.Error(w, fmt.Sprintf("origin %q: want live, import or nothing for both", origin), http.StatusBadRequest)
		return
	}
	s.mu.Lock()
	days := s.learn.days(origin)
	s.mu.Unlock()
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	cw := windowcsv.NewWriter(w)
	for _, dd := range days {
		for _, id := range metric.All() {
			if err := writeDay(cw, dd, id); err != nil {
				s.log.Warn("baseline export stopped", "err", err)
				return
			}
		}
	}
	if err := cw.Flush(); err != nil {
		s.log.Warn("baseline export stopped", "err", err)
	}
}

func writeDay(cw *windowcsv.Writer, dd datedDay, id metric.ID) error {
	t := dd.day.Time()
	if n := dd.d.Idle(id); n > 0 {
		if err := cw.Write(windowcsv.Row{Day: t, Metric: id, Rate: 0, Count: n}); err != nil {
			return err
		}
	}
	for v, n := range dd.d.Bins(id) {
		if err := cw.Write(windowcsv.Row{Day: t, Metric: id, Rate: v, Count: n}); err != nil {
			return err
		}
	}
	return nil
}

// datedDay is a copy of one day's windows for an export.
type datedDay struct {
	day baseline.DayKey
	d   *baseline.Day
}

// days copies the stored days of one origin, or of both merged per day,
// in day order.
func (l *learner) days(origin baseline.Origin) []datedDay {
	var out []datedDay
	for _, k := range l.b.Keys() {
		if origin != "" && k.Origin != origin {
			continue
		}
		d := l.b.Get(k)
		if n := len(out); n > 0 && out[n-1].day == k.Day {
			out[n-1].d.Merge(d)
			continue
		}
		out = append(out, datedDay{k.Day, d.Clone()})
	}
	return out
}
