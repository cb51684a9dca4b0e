package windowcsv_test

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strings"
	"time"

	"sluice/pkg/metric"
	"sluice/pkg/windowcsv"
)

func ExampleRead() {
	const file = `# sluice window values v1
day,metric,rate,count
2024-03-01,read_bytes,1.5e9,3
2024-03-01,creates,abc,1
2024-03-02,creates,120.25,1
`
	st, err := windowcsv.Read(context.Background(), strings.NewReader(file), func(r windowcsv.Row) error {
		fmt.Println(r.Day.Format("2006-01-02"), r.Metric, r.Rate, r.Metric.Unit(), r.Count)
		return nil
	})
	if err != nil {
		fmt.Println("fatal:", err)
		return
	}
	fmt.Println(st.Rows, "rows,", st.Windows, "windows,", st.Malformed, "malformed")
	for _, e := range st.Errors {
		fmt.Println(e)
	}
	// Output:
	// 2024-03-01 read_bytes 1.5e+09 bytes/s 3
	// 2024-03-02 creates 120.25 ops/s 1
	// 2 rows, 4 windows, 1 malformed
	// line 4: rate "abc": not a number
}

func ExampleReader_Next() {
	rd := windowcsv.NewReader(strings.NewReader("day,metric,rate\n2024-02-30,opens,1\n2024-02-29,opens,2\n"))
	for {
		row, err := rd.Next()
		if errors.Is(err, windowcsv.ErrMalformed) {
			fmt.Println("skipped:", err)
			continue
		}
		if err != nil { // io.EOF, or a fatal error
			break
		}
		fmt.Println(row.Day.Format("2006-01-02"), row.Metric, row.Rate, row.Count, "offset", rd.Offset())
	}
	// Output:
	// skipped: line 2: day "2024-02-30": no such day
	// 2024-02-29 opens 2 1 offset 54
}

func ExampleWriter() {
	w := windowcsv.NewWriter(os.Stdout)
	day := time.Date(2024, time.March, 1, 0, 0, 0, 0, time.UTC)
	_ = w.Write(windowcsv.Row{Day: day, Metric: metric.ReadBytes, Rate: 1.5e9, Count: 3})
	_ = w.Write(windowcsv.Row{Day: day, Metric: metric.Syncs, Rate: 1.0 / 3, Count: 1})
	if err := w.Flush(); err != nil {
		fmt.Println(err)
	}
	// Output:
	// # sluice window values v1
	// # day: UTC day the 10-minute window closed; metric: sluice metric name;
	// # rate: one job's per-node rate in that window, bytes/s for read_bytes and
	// # write_bytes, ops/s for the others; count: how many windows had that rate.
	// day,metric,rate,count
	// 2024-03-01,read_bytes,1.5e+09,3
	// 2024-03-01,syncs,0.3333333333333333,1
}
