package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"time"

	"sluice/pkg/aggregate"
	"sluice/pkg/api"
	"sluice/pkg/coding"
	"sluice/pkg/model"
	"sluice/pkg/sim"
	"sluice/pkg/tracker"
)

// demo runs the real system on this machine: the aggregator in this
// process (embedded broker, temporary state file), one real agent process
// per simulated node, and the simulator writing the nodes' Lustre stats
// files, in compressed time.
func demo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	c := newCommand("demo", "", "Run the whole system on this machine: the aggregator, one real agent per simulated node of an invented centre, the scheduler hooks, in compressed time.", stdout)
	agentBin := c.fs.String("agent.bin", "", "path of the agent binary (default: 'agent' beside this binary)")
	listen := c.fs.String("web.listen", "127.0.0.1:9713", "HTTP address of the demo aggregator")
	duration := c.fs.Duration("duration", 75*time.Second, "how long the demo runs")
	keep := c.fs.Bool("keep", false, "keep the temporary directory (counter files, state file) afterwards")
	if _, err := c.parse(args, 0); err != nil {
		return err
	}
	bin, err := findAgent(*agentBin)
	if err != nil {
		return err
	}
	dir, err := os.MkdirTemp("", "sluice-demo-")
	if err != nil {
		return err
	}
	if !*keep {
		defer os.RemoveAll(dir)
	}
	ctx, cancel := context.WithTimeout(ctx, *duration)
	defer cancel()
	d := &demoRun{out: stdout, dir: dir, bin: bin, start: time.Now()}
	return d.run(ctx, *listen, &lockedWriter{w: stderr})
}

// lockedWriter lets the agent processes' output copiers share one writer.
type lockedWriter struct {
	mu sync.Mutex
	w  io.Writer
}

func (l *lockedWriter) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.w.Write(p)
}

func findAgent(path string) (string, error) {
	if path == "" {
		self, err := os.Executable()
		if err != nil {
			return "", fmt.Errorf("find the agent binary: %w (set --agent.bin)", err)
		}
		path = filepath.Join(filepath.Dir(self), "agent")
	}
	if _, err := os.Stat(path); err != nil {
		return "", fmt.Errorf("agent binary: %w (build it with 'make build' or set --agent.bin)", err)
	}
	return path, nil
}

type demoRun struct {
	out   io.Writer
	dir   string
	bin   string
	start time.Time
	url   string
	nats  string
	mu    sync.Mutex // serialises output
}

func (d *demoRun) printf(format string, a ...any) {
	d.mu.Lock()
	defer d.mu.Unlock()
	fmt.Fprintf(d.out, "[%5.1fs] "+format+"\n", append([]any{time.Since(d.start).Seconds()}, a...)...)
}

func (d *demoRun) run(ctx context.Context, listen string, stderr io.Writer) error {
	sc := sim.Demo()
	s, err := sim.New(sc, filepath.Join(d.dir, "nodes"), d.start)
	if err != nil {
		return err
	}
	lib, err := loadLibrary("", true)
	if err != nil {
		return err
	}
	svc, err := aggregate.New(aggregate.Options{
		EmbeddedListen: "127.0.0.1:0", Listen: listen, Cluster: "brackwater",
		StorePath: filepath.Join(d.dir, "aggregator.db"), TickEvery: time.Second,
		Tracker: tracker.Options{Window: 30 * time.Second, Live: 10 * time.Second, Grace: 3 * time.Second, RaiseAfter: 3, ClearAfter: 3, Patterns: lib},
		OnEvent: d.report,
	})
	if err != nil {
		return err
	}
	stopSvc, err := svc.Start()
	if err != nil {
		return err
	}
	d.url, d.nats = "http://"+svc.HTTPAddr(), svc.NATSURL()
	d.intro(sc)

	agents := d.startAgents(ctx, sc.Nodes, s, stderr)
	d.simulate(ctx, s, sc)

	for _, a := range agents {
		_ = a.Process.Signal(syscall.SIGTERM)
	}
	for _, a := range agents {
		_ = a.Wait()
	}
	svc.Tick()
	d.table()
	err = stopSvc()
	d.printf("demo over; state file was %s", filepath.Join(d.dir, "aggregator.db"))
	return err
}

func (d *demoRun) intro(sc sim.Scenario) {
	fmt.Fprintf(d.out, "Sluice demo: %s, %d simulated nodes, Lustre client counters, time compressed\n", sc.Centre, len(sc.Nodes))
	fmt.Fprintf(d.out, "  metrics:  %s/metrics\n  jobs API: %s/api/v1/jobs\n  broker:   %s\n", d.url, d.url, d.nats)
	fmt.Fprintf(d.out, "  windows 30s, live window 10s, one real agent process per node sampling every 1s\n")
	for _, j := range sc.Jobs {
		fmt.Fprintf(d.out, "  job %s %-15s %-9s %d nodes  (%s)\n", j.ID, j.Name, j.User, len(j.Nodes), j.Kind)
	}
	fmt.Fprintln(d.out)
}

func (d *demoRun) startAgents(ctx context.Context, nodes []string, s *sim.Sim, stderr io.Writer) []*exec.Cmd {
	var cmds []*exec.Cmd
	for _, n := range nodes {
		cmd := exec.Command(d.bin, "run", "--node", n, "--interval", "1s",
			"--sources", "lustre", "--source.lustre.root", s.LliteRoot(n), "--state.dir", d.stateDir(n),
			"--nats.url", d.nats, "--nats.cluster", "brackwater", "--log.level", "warn")
		cmd.Stderr = stderr
		if err := cmd.Start(); err != nil {
			d.printf("agent for %s did not start: %v", n, err)
			continue
		}
		cmds = append(cmds, cmd)
	}
	d.printf("%d agents started", len(cmds))
	return cmds
}

func (d *demoRun) stateDir(node string) string { return filepath.Join(d.dir, "state", node) }

// simulate advances the simulated counters and fires the jobs' prolog
// and epilog hooks on each of their nodes, as a batch scheduler would.
func (d *demoRun) simulate(ctx context.Context, s *sim.Sim, sc sim.Scenario) {
	started, ended := map[string]bool{}, map[string]bool{}
	tick := time.NewTicker(50 * time.Millisecond) // fine steps keep the agents' rates close to the scenario's
	defer tick.Stop()
	shown := false
	for {
		now := time.Now()
		off := now.Sub(d.start)
		for _, j := range sc.Jobs {
			if !started[j.ID] && off >= j.Start {
				started[j.ID] = true
				d.hooks(ctx, j, "start")
			}
			if !ended[j.ID] && off >= j.End {
				ended[j.ID] = true
				d.hooks(ctx, j, "end")
			}
		}
		if err := s.Step(now); err != nil {
			d.printf("simulator: %v", err)
		}
		if !shown && off > 48*time.Second {
			shown = true
			d.showMetrics(ctx)
		}
		select {
		case <-ctx.Done():
			return
		case <-tick.C:
		}
	}
}

func (d *demoRun) hooks(ctx context.Context, j sim.Job, what string) {
	for _, n := range j.Nodes {
		args := []string{"job", what, "--id", j.ID, "--node", n, "--state.dir", d.stateDir(n),
			"--nats.url", d.nats, "--nats.cluster", "brackwater", "--log.level", "error"}
		if what == "start" {
			args = append(args, "--user", j.User, "--account", j.Account, "--name", j.Name, "--nodes", strings.Join(j.Nodes, ","))
		}
		if out, err := exec.CommandContext(ctx, d.bin, args...).CombinedOutput(); err != nil {
			d.printf("hook 'agent job %s' for %s on %s failed: %v %s", what, j.ID, n, err, out)
		}
	}
	d.printf("job %s %s (%s, %d nodes): hooks ran", j.ID, map[string]string{"start": "started", "end": "ended"}[what], j.Name, len(j.Nodes))
}

// firstSentence is advice up to its first full stop, on one line.
func firstSentence(s string) string {
	s = strings.Join(strings.Fields(s), " ")
	if i := strings.Index(s, ". "); i > 0 {
		return s[:i+1]
	}
	return s
}

// report prints flags as they are raised and cleared.
func (d *demoRun) report(e tracker.Event, j model.Summary) {
	switch e.Kind {
	case tracker.FlagRaised:
		f := e.Flag
		if f.Pattern != "" {
			d.printf("FLAG   job %s (%s, user %s, %d nodes) looks like %s (score %.2f, %s) since %s; advice: %s",
				j.ID, j.Name, j.User, f.Nodes, strings.ToLower(f.Title), f.Score, f.Severity, f.Since.Format("15:04:05"), firstSentence(f.Advice))
			return
		}
		d.printf("FLAG   job %s (%s, user %s, %d nodes): %s %s per node > critical cut %s, since %s",
			j.ID, j.Name, j.User, f.Nodes, f.Metric, human(f.Value, f.Metric.IsBytes()), human(f.Cut, f.Metric.IsBytes()), f.Since.Format("15:04:05"))
	case tracker.FlagCleared:
		if e.Flag.Pattern != "" {
			d.printf("clear  job %s: %s", j.ID, e.Flag.Reason)
			return
		}
		d.printf("clear  job %s: %s (peak %s per node)", j.ID, e.Flag.Reason, human(e.Flag.Peak, e.Flag.Metric.IsBytes()))
	case tracker.WindowClosed:
		w := e.Window
		if w.Levels.Max() > coding.Normal {
			d.printf("window job %s #%d closed: %d nodes, highest level %s", w.Job, w.Index, w.Nodes, w.Levels.Max())
		}
	}
}

func (d *demoRun) showMetrics(ctx context.Context) {
	body, err := get(ctx, d.url+"/metrics")
	if err != nil {
		d.printf("scrape: %v", err)
		return
	}
	d.printf("flag series on %s/metrics right now:", d.url)
	for _, line := range strings.Split(body, "\n") {
		if strings.HasPrefix(line, "sluice_job_flag_active{") {
			fmt.Fprintln(d.out, "         "+line)
		}
	}
	d.mu.Lock()
	fmt.Fprintln(d.out, "         running jobs (aggregator jobs):")
	d.mu.Unlock()
	if list, err := api.NewClient(d.url).Jobs(ctx, false); err == nil {
		d.indented(list)
	}
}

// indented prints the jobs table shifted right under the log lines.
func (d *demoRun) indented(list []model.Summary) {
	var buf strings.Builder
	printJobs(&buf, list, false, time.Now())
	d.mu.Lock()
	defer d.mu.Unlock()
	for _, l := range strings.SplitAfter(buf.String(), "\n") {
		if l != "" {
			fmt.Fprint(d.out, "         "+l)
		}
	}
}

func (d *demoRun) table() {
	list, err := api.NewClient(d.url).Jobs(context.Background(), false)
	if err != nil {
		d.printf("jobs: %v", err)
		return
	}
	d.printf("all jobs at the end (aggregator jobs --all):")
	d.indented(list)
}

func get(ctx context.Context, url string) (string, error) {
	ctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, url, nil)
	if err != nil {
		return "", err
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return "", err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		return "", err
	}
	if resp.StatusCode != http.StatusOK {
		return "", errors.New(resp.Status)
	}
	return string(b), nil
}
