package api

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"slices"

	"sluice/pkg/baseline"
	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

// MaxImportBytes bounds one import upload (about 25 million rows).
const MaxImportBytes = 1 << 30

// importBaseline takes a window-value file (pkg/windowcsv); each day in it
// replaces that day's import origin. Rows the layout refuses are counted
// and listed by line; the rest are kept. A file whose header is wrong, or
// that cannot be read to its end, imports nothing.
func (s *server) importBaseline(w http.ResponseWriter, r *http.Request) {
	body := http.MaxBytesReader(w, r.Body, MaxImportBytes)
	days, res, err := readDays(r.Context(), body)
	if err != nil {
		status := http.StatusBadRequest
		if !errors.Is(err, windowcsv.ErrHeader) {
			status = http.StatusUnprocessableEntity
		}
		http.Error(w, fmt.Sprintf("import: %v (nothing imported)", err), status)
		return
	}
	if err := s.b.ImportBaseline(days); err != nil {
		fail(w, fmt.Errorf("import: %w", err))
		return
	}
	writeJSON(w, res)
}

// readDays reads a window-value file into one Day per day it names.
func readDays(ctx context.Context, body io.Reader) (map[baseline.DayKey]*baseline.Day, ImportResult, error) {
	days := map[baseline.DayKey]*baseline.Day{}
	var res ImportResult
	st, err := windowcsv.Read(ctx, body, func(row windowcsv.Row) error {
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
	res.Errors = []string{}
	for _, e := range st.Errors {
		res.Errors = append(res.Errors, e.Error())
	}
	for k := range days {
		res.Days = append(res.Days, k)
	}
	slices.Sort(res.Days)
	return days, res, err
}

// exportBaseline writes every stored day in the window-value layout: per
// day and metric, each sketch bin as its value and count, and the idle
// windows as rate 0. origin=live or origin=import restricts it to one
// origin; otherwise a day's origins are merged.
func (s *server) exportBaseline(w http.ResponseWriter, r *http.Request) {
	origin := baseline.Origin(r.URL.Query().Get("origin"))
	if origin != "" && origin != baseline.Live && origin != baseline.Import {
		fail(w, fmt.Errorf("%w: origin %q: want live, import or nothing for both", ErrBadRequest, origin))
		return
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	cw := windowcsv.NewWriter(w)
	for _, dd := range s.b.BaselineDays(origin) {
		for _, id := range metric.All() {
			if err := writeDay(cw, dd, id); err != nil {
				return // the client went away; nothing to tell it
			}
		}
	}
	_ = cw.Flush()
}

func writeDay(cw *windowcsv.Writer, dd DatedDay, id metric.ID) error {
	t := dd.Day.Time()
	if n := dd.D.Idle(id); n > 0 {
		if err := cw.Write(windowcsv.Row{Day: t, Metric: id, Rate: 0, Count: n}); err != nil {
			return err
		}
	}
	for v, n := range dd.D.Bins(id) {
		if err := cw.Write(windowcsv.Row{Day: t, Metric: id, Rate: v, Count: n}); err != nil {
			return err
		}
	}
	return nil
}
