// Package aggregate is the aggregator service: it takes the agents'
// messages from package ingest, feeds the tracker, ticks it, writes the
// store in batches, learns the baseline, and answers the API (package api)
// and the scrape (package export) from its state.
//
// # Basics
//
// [New] validates [Options]; [Service.Run] opens the store (failing fast if
// another aggregator holds it), restores the tracker from it, connects to
// the broker (or starts an embedded one), subscribes, serves HTTP, and
// runs until its context ends, then flushes and closes everything.
//
// # Caveats
//
// One mutex (Service.mu) guards the tracker, the learner, the agents'
// status and the silences and acknowledgements; the NATS callbacks, the
// tick loop and HTTP handlers all take it briefly. Decoding happens
// outside it, in package ingest.
package aggregate

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"time"

	"github.com/nats-io/nats.go"

	"sluice/pkg/api"
	"sluice/pkg/baseline"
	"sluice/pkg/bus"
	"sluice/pkg/bus/broker"
	"sluice/pkg/export"
	"sluice/pkg/flagging"
	"sluice/pkg/ingest"
	"sluice/pkg/model"
	"sluice/pkg/store"
	"sluice/pkg/tracker"
)

// Options configures the service. Zero values mean the documented defaults.
type Options struct {
	// NATSURL is the broker to use; empty starts an embedded broker.
	NATSURL string
	// EmbeddedListen is the embedded broker's host:port; empty means
	// 127.0.0.1:4222. Use "127.0.0.1:0" for a free port.
	EmbeddedListen string
	// EmbeddedStoreDir is where the embedded broker keeps the stream;
	// empty means StorePath with ".stream" appended. It is created if
	// missing.
	EmbeddedStoreDir string
	// Delivery is how samples and job events arrive; empty means
	// bus.Stream: read from the broker's stream and acknowledged only
	// once saved.
	Delivery bus.Delivery
	// Stream bounds the stream (age, bytes, de-duplication window).
	Stream bus.StreamOptions
	// Prefix and Cluster name the subjects (see package bus).
	Prefix, Cluster string
	// StorePath is the bbolt file; required.
	StorePath string
	// StoreLockTimeout bounds the wait for the store's lock; zero means 1s.
	StoreLockTimeout time.Duration
	// StoreBeforeApply is store.Options.BeforeApply: for tests of a
	// failing disk.
	StoreBeforeApply func() error
	// Listen is the HTTP address; empty means 127.0.0.1:9713. Use
	// "127.0.0.1:0" for a free port.
	Listen string
	// Tracker configures windows, seed cut points and hysteresis.
	Tracker tracker.Options
	// Baseline configures the learned cut points: horizon, quantiles and
	// the windows a metric needs before its learned cuts apply.
	Baseline baseline.Options
	// RecomputeEvery is how often the cut points are learned again from
	// the baseline; zero means 10 minutes. They are also learned at
	// start-up and after an import.
	RecomputeEvery time.Duration
	// TickEvery is how often windows are closed and live windows
	// evaluated; zero means 5 seconds.
	TickEvery time.Duration
	// FlushEvery is how often changes are written to the store; zero
	// means 1 second.
	FlushEvery time.Duration
	// KeepEnded is how long the state file keeps what it holds of an
	// ended job (windows, signature, flags, acknowledgements); zero means
	// 30 days. It must be longer than the tracker's KeepEnded.
	KeepEnded time.Duration
	// PruneEvery is how often what is older than KeepEnded is deleted;
	// zero means 1 hour (and once shortly after start-up).
	PruneEvery time.Duration
	// MaxJobSeries caps the per-job series on /metrics (jobs are taken most
	// severe first while their series fit); zero means 5000.
	MaxJobSeries int
	// Logger receives the service's logs; nil discards them.
	Logger *slog.Logger
	// OnEvent, if set, is called for every tracker event after it is
	// persisted, without the service lock held.
	OnEvent func(tracker.Event, model.Summary)
	// Now is the wall clock, for ingest lag; nil means time.Now.
	Now func() time.Time
}

func (o Options) withDefaults() Options {
	o.EmbeddedListen = cmp.Or(o.EmbeddedListen, "127.0.0.1:4222")
	o.Listen = cmp.Or(o.Listen, "127.0.0.1:9713")
	o.TickEvery = cmp.Or(o.TickEvery, 5*time.Second)
	o.FlushEvery = cmp.Or(o.FlushEvery, time.Second)
	o.RecomputeEvery = cmp.Or(o.RecomputeEvery, 10*time.Minute)
	o.MaxJobSeries = cmp.Or(o.MaxJobSeries, 5000)
	o.KeepEnded = cmp.Or(o.KeepEnded, 30*24*time.Hour)
	o.PruneEvery = cmp.Or(o.PruneEvery, time.Hour)
	o.EmbeddedStoreDir = cmp.Or(o.EmbeddedStoreDir, o.StorePath+".stream")
	if o.Logger == nil {
		o.Logger = slog.New(slog.DiscardHandler)
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	return o
}

// Service is a running aggregator.
type Service struct {
	opts Options
	subj bus.Subjects
	log  *slog.Logger

	mu          sync.Mutex
	tr          *tracker.Tracker
	learn       *learner
	agents      map[string]model.AgentStatus // latest heartbeat per node
	shares      export.ShareHistogram        // every CPU share the heartbeats gave
	att         *flagging.Attention
	flushErr    error     // the last flush's, nil once one succeeds
	storeErrors uint64    // failed flushes
	committed   time.Time // when the last flush succeeded
	// applied is the place in the stream of the latest message applied;
	// a flush saves it and then acknowledges it.
	applied ingest.Receipt
	// rebuilding is set from a restart until the stream has been read
	// again up to the place saved, to sum the open windows again; windows
	// are not closed meanwhile (see tickLocked).
	rebuilding bool
	rebuilt    chan struct{} // closed when rebuilding ends
	pruned     store.Pruned  // totals since start-up

	// pending and unreported hold what the last failed flush could not
	// write; guarded by flushMu.
	pending    store.Batch
	unreported []reported

	flushMu  sync.Mutex                // serialises flushes; taken before mu
	conn     atomic.Pointer[nats.Conn] // the broker connection, for /metrics
	sub      atomic.Pointer[ingest.Subscriber]
	st       *store.Store
	ready    chan struct{}
	httpAddr string
	natsURL  string
}

// New validates opts.
func New(opts Options) (*Service, error) {
	opts = opts.withDefaults()
	if opts.StorePath == "" {
		return nil, errors.New("a store path is required (--store.path)")
	}
	subj, err := bus.NewSubjects(opts.Prefix, opts.Cluster)
	if err != nil {
		return nil, err
	}
	if opts.Delivery, err = bus.ParseDelivery(string(opts.Delivery)); err != nil {
		return nil, err
	}
	tr, err := tracker.New(opts.Tracker)
	if err != nil {
		return nil, err
	}
	if keep := tr.Options().KeepEnded; opts.KeepEnded <= keep {
		return nil, fmt.Errorf("the state file keeps ended jobs for %s, not longer than the %s they stay listed (--store.keep-ended)", opts.KeepEnded, keep)
	}
	learn, err := newLearner(opts.Baseline, tr.Options().Cuts)
	if err != nil {
		return nil, err
	}
	return &Service{
		opts:    opts,
		subj:    subj,
		log:     opts.Logger,
		tr:      tr,
		learn:   learn,
		agents:  map[string]model.AgentStatus{},
		att:     flagging.NewAttention(nil, nil),
		ready:   make(chan struct{}),
		rebuilt: make(chan struct{}),
	}, nil
}

// brokerConnected reports whether the service is connected to its broker.
func (s *Service) brokerConnected() bool {
	nc := s.conn.Load()
	return nc != nil && nc.IsConnected()
}

// Start runs the service in the background and returns once it is ready,
// or with Run's error if it stops before. stop ends it and returns Run's
// error; it may be called more than once.
func (s *Service) Start() (stop func() error, err error) {
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx) }()
	select {
	case <-s.Ready():
	case err := <-done:
		cancel()
		return nil, err
	}
	var once sync.Once
	var runErr error
	return func() error {
		once.Do(func() { cancel(); runErr = <-done })
		return runErr
	}, nil
}

// Ready is closed once the service is subscribed and serving HTTP.
func (s *Service) Ready() <-chan struct{} { return s.ready }

// Rebuilt is closed once the open windows are summed again after a
// restart (at once when there was nothing to sum): from then on the live
// and open windows are what they were before it.
func (s *Service) Rebuilt() <-chan struct{} { return s.rebuilt }

// endRebuildLocked ends the rebuild; the caller holds mu.
func (s *Service) endRebuildLocked() {
	if s.rebuilding {
		s.tr.EndRebuild()
		s.rebuilding = false
		s.log.Info("open windows summed again from the stream")
	}
	select {
	case <-s.rebuilt:
	default:
		close(s.rebuilt)
	}
}

// HTTPAddr is the address the HTTP server listens on, once Ready.
func (s *Service) HTTPAddr() string { return s.httpAddr }

// NATSURL is the broker URL in use (the embedded one's, if started), once
// Ready.
func (s *Service) NATSURL() string { return s.natsURL }

// Run serves until ctx ends. It returns an error if start-up fails.
func (s *Service) Run(ctx context.Context) error {
	st, err := store.Open(s.opts.StorePath, store.Options{LockTimeout: s.opts.StoreLockTimeout, BeforeApply: s.opts.StoreBeforeApply})
	if err != nil {
		return err
	}
	s.st = st
	defer st.Close()
	if m := st.Migrated(); m != nil {
		s.log.Warn("state file migrated from schema 1; the running jobs' open windows start afresh",
			"backup", m.Backup, "records", m.Records, "running_jobs", m.Running)
	}
	from, err := s.restore()
	if err != nil {
		return err
	}
	nc, stopBroker, err := s.connect(ctx)
	if err != nil {
		return err
	}
	defer stopBroker()
	defer nc.Close()
	s.conn.Store(nc)
	sub, err := s.subscribe(ctx, nc, from)
	if err != nil {
		return err
	}
	s.sub.Store(sub)
	ln, err := net.Listen("tcp", s.opts.Listen)
	if err != nil {
		return fmt.Errorf("listen %s: %w (set --web.listen)", s.opts.Listen, err)
	}
	s.httpAddr = ln.Addr().String()
	srv := &http.Server{Handler: api.Handler(backend{s}, s.metricsHandler()), ReadHeaderTimeout: 5 * time.Second}
	go func() {
		if err := srv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			s.log.Error("http server stopped", "err", err)
		}
	}()
	s.log.Info("aggregator ready", "http", s.httpAddr, "nats", s.natsURL, "store", s.opts.StorePath)
	close(s.ready)

	s.loop(ctx)

	sub.Drain()
	_ = nc.Drain()
	shutCtx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	_ = srv.Shutdown(shutCtx)
	s.mu.Lock()
	s.tickLocked()
	s.mu.Unlock()
	s.flush()
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.flushErr
}

// restore loads the state file: jobs, node sequences, baseline days,
// silences and acknowledgements; then rebuilds every job's matcher from
// its stored windows and learns the cut points. It returns where to read
// the stream from: where the samples of the open windows begin, up to the
// place saved, to sum them again (see rebuilding).
func (s *Service) restore() (ingest.StreamOptions, error) {
	var from ingest.StreamOptions
	state, err := s.st.Load()
	if err != nil {
		return from, err
	}
	days, err := s.st.Days()
	if err != nil {
		return from, err
	}
	silences, err := s.st.Silences()
	if err != nil {
		return from, err
	}
	acks, err := s.st.Acks()
	if err != nil {
		return from, err
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if err := s.tr.Restore(state.Jobs, state.Nodes, state.Watermark); err != nil {
		return from, fmt.Errorf("restore from %s: %w", s.opts.StorePath, err)
	}
	if err := s.learn.load(days); err != nil {
		return from, err
	}
	s.att = flagging.NewAttention(silences, acks)
	if err := s.replayLocked(state.Jobs); err != nil {
		return from, err
	}
	s.recomputeLocked()
	s.committed = s.opts.Now()
	from = ingest.StreamOptions{Stream: s.opts.Stream, From: state.StreamSeq + 1, Saved: state.StreamSeq}
	if r := state.ReplayFrom; r > 0 && r <= state.StreamSeq {
		from.From = r
	}
	s.rebuilding = s.opts.Delivery == bus.Stream && from.From <= from.Saved
	if !s.rebuilding {
		s.endRebuildLocked()
	}
	s.log.Info("state restored", "jobs", len(state.Jobs), "nodes", len(state.Nodes), "watermark", state.Watermark,
		"baseline_days", len(days), "stream_seq", state.StreamSeq, "open_windows_from", from.From)
	return from, nil
}

// subscribe reads samples and job events from the stream from stream
// sequence from on (or from core NATS, when chosen), heartbeats from core
// NATS.
func (s *Service) subscribe(ctx context.Context, nc *nats.Conn, from ingest.StreamOptions) (*ingest.Subscriber, error) {
	if s.opts.Delivery == bus.Core {
		return ingest.Subscribe(nc, s.subj, sink{s}, s.log)
	}
	sub, err := ingest.Consume(ctx, nc, s.subj, sink{s}, from, s.log)
	if err != nil && s.opts.NATSURL == "" {
		return nil, fmt.Errorf("%w (the embedded broker keeps it in %s: set --nats.embedded.store-dir)", err, s.opts.EmbeddedStoreDir)
	}
	if err != nil {
		return nil, fmt.Errorf("%w (or set --nats.delivery core to go without it)", err)
	}
	return sub, nil
}

// replayLocked rebuilds the pattern matchers of the restored jobs from
// their stored windows (ended jobs too, so that they can still be
// explained); the caller holds mu.
func (s *Service) replayLocked(jobs []model.JobRecord) error {
	if s.opts.Tracker.Patterns == nil {
		return nil
	}
	for _, j := range jobs {
		ws, err := s.st.Windows(j.Meta.ID)
		if err != nil {
			return err
		}
		s.tr.Replay(j.Meta.ID, ws)
	}
	return nil
}

// recomputeLocked learns the cut points again and hands them to the
// tracker; the caller holds mu.
func (s *Service) recomputeLocked() {
	s.tr.SetCoding(s.learn.recompute(s.opts.Now()))
}

func (s *Service) connect(ctx context.Context) (*nats.Conn, func(), error) {
	stop := func() {}
	url := s.opts.NATSURL
	if url == "" {
		bo := broker.Options{Listen: s.opts.EmbeddedListen}
		if s.opts.Delivery == bus.Stream {
			bo.StoreDir = s.opts.EmbeddedStoreDir
		}
		emb, err := broker.Start(bo)
		if err != nil {
			return nil, nil, fmt.Errorf("%w (set --nats.url to use an external broker, --nats.embedded.listen, or --nats.embedded.store-dir)", err)
		}
		url, stop = emb.URL(), emb.Shutdown
	}
	s.natsURL = url
	nc, err := bus.Connect(ctx, url, "sluice-aggregator",
		nats.ErrorHandler(func(_ *nats.Conn, _ *nats.Subscription, err error) {
			if !errors.Is(err, nats.ErrSlowConsumer) { // counted by the subscriber
				s.log.Warn("nats error", "err", err)
			}
		}))
	if err != nil {
		stop()
		return nil, nil, err
	}
	wctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if err := bus.WaitConnected(wctx, nc); err != nil {
		nc.Close()
		stop()
		return nil, nil, err
	}
	return nc, stop, nil
}

// loop ticks the tracker and flushes the store until ctx ends.
func (s *Service) loop(ctx context.Context) {
	tick := time.NewTicker(s.opts.TickEvery)
	flush := time.NewTicker(s.opts.FlushEvery)
	learn := time.NewTicker(s.opts.RecomputeEvery)
	prune := time.NewTimer(time.Minute) // then every PruneEvery
	defer tick.Stop()
	defer flush.Stop()
	defer learn.Stop()
	defer prune.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-prune.C:
			s.prune(ctx)
			prune.Reset(s.opts.PruneEvery)
		case <-tick.C:
			s.mu.Lock()
			s.tickLocked()
			s.mu.Unlock()
		case <-flush.C:
			s.flush()
		case <-learn.C:
			s.mu.Lock()
			s.recomputeLocked()
			s.mu.Unlock()
		}
	}
}

// Tick runs one tracker tick and one flush now; tests and the demo use it
// to step the service without waiting for the timers.
func (s *Service) Tick() {
	s.mu.Lock()
	s.tickLocked()
	s.mu.Unlock()
	s.flush()
}

// tickLocked ticks the tracker, unless the open windows are still being
// summed again after a restart: a window closed now would miss samples.
// The caller holds mu.
func (s *Service) tickLocked() {
	if !s.rebuilding {
		s.tr.Tick()
	}
}
