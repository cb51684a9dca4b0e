package sim

// Labelled scenarios: a deterministic population of jobs at the invented
// Brackwater Research Computing Centre, each labelled with the problem
// pattern injected into it (or none), for measuring how well the pattern
// library tells problems from ordinary work. Package eval runs them through
// the tracker; this file only makes the numbers.
//
// The population is drawn from classes. Every job, whatever its class,
// starts from an ordinary job's background I/O (see drawBase); a class
// then overlays or replaces part of it for a span of the job's life:
//
//   - ordinary (label ""): the centre's everyday mix, every width, with
//     log-normal rates per metric, correlated through a job-wide activity
//     factor, ops consistent with each job's transfer sizes, window-to-
//     window, node-to-node and minute-to-minute variation, and periodic
//     checkpoints. The baseline the cut points are learned from is made of
//     these jobs only (Ordinary).
//   - burst (label ""): an ordinary job with one short burst (1 to 4
//     minutes, under half a window) of file creates (unpacking an input archive: creates,
//     opens, closes, small writes, setattrs) or of syncs (a checkpoint
//     flushing each file), at 1.5 to 8 times the critical cut; half of
//     them at job start (staging), half at a random minute later on.
//   - noisy_start (label ""): an ordinary job whose first 2 to 8 minutes
//     (inside its first window) are noisy: every rank imports its libraries and reads its input, so
//     stats run at 0.5 to 5 times and opens at 0.3 to 3 times their
//     critical cuts, with large input reads.
//
// Why the hard negatives are that short: the patterns speak in windows, and
// two windows at a critical rate is what a 2-of-3 rule calls a storm, so a
// burst or a start-up long enough to make two windows critical (about half
// a window and more, at these intensities) is a storm at window
// resolution and is flagged by design; the negatives test that anything
// shorter is not.
//   - streaming (label heavy_streaming): healthy heavy streaming, read,
//     write or both (reads at the rate, writes at 20% to 100% of it) at
//     1.5 to 8 times the critical byte cut (capped at 6 GB/s per node) in
//     transfers of 1 to 16 MiB (a third of them exactly 1 MiB, the usual
//     RPC size) from a random onset; its metadata stays the ordinary
//     background. It is a positive for
//     heavy_streaming and a hard negative for every problem pattern.
//   - one class per problem pattern (label = its name), injected from a
//     random onset (any minute, not only window starts) for at least an
//     hour (80 minutes for stat polling) or until the job ends, at a
//     random intensity of 1.5 to 8 times what the pattern needs:
//     metadata_storm (a create or unlink storm, with the opens,
//     stats and small writes each brings), stat_storm (a tree scanned
//     again and again: stats, and a few opens of directories),
//     small_write_flood (the job's
//     writes become 64 B to 16 KiB calls), open_close_churn (an open,
//     small read, close loop), fsync_storm (a sync after about every
//     write of 512 B to 32 KiB), imbalanced_io (4 or more nodes; one node
//     does 87% or more of the job's data bytes, the per-node mean above
//     the p90 cut; the node capped at 5 GB/s), stat_polling (the job
//     waits: its other I/O falls to a trickle, at most 50 kB/s of data
//     per node, and every node stats at 1.5 to 8 times the elevated cut,
//     kept below the critical one).
//
// "What the pattern needs" is read from the cut points in force
// (Reference), which the caller learns from Ordinary jobs first, as the
// aggregator learns them from the centre's own windows.

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"sluice/pkg/coding"
	"sluice/pkg/metric"
)

// The classes of labelled jobs besides the problem patterns, whose class is
// the pattern's name.
const (
	ClassOrdinary   = "ordinary"
	ClassBurst      = "burst"
	ClassNoisyStart = "noisy_start"
	ClassStreaming  = "streaming"
)

// The labels: the built-in pattern each class injects.
const (
	LabelMetadataStorm   = "metadata_storm"
	LabelSmallWriteFlood = "small_write_flood"
	LabelOpenCloseChurn  = "open_close_churn"
	LabelFsyncStorm      = "fsync_storm"
	LabelImbalancedIO    = "imbalanced_io"
	LabelStatPolling     = "stat_polling"
	LabelStatStorm       = "stat_storm"
	LabelHeavyStreaming  = "heavy_streaming"
)

// Reference is what an injection is scaled by: the cut points and grade
// cuts in force. Grades[m][2] is the p90 cut of metric m.
type Reference struct {
	Cuts   coding.Cuts
	Grades [metric.Count]coding.GradeCuts
}

// critical returns metric id's critical cut.
func (r *Reference) critical(id metric.ID) float64 { return r.Cuts[id].Critical }

// p90 returns metric id's p90 grade cut (grade 3 up to it, 4 above).
func (r *Reference) p90(id metric.ID) float64 { return r.Grades[id][2] }

// LabelledOptions configures Labelled and Ordinary.
type LabelledOptions struct {
	// Jobs is the number of jobs; zero means 1000.
	Jobs int
	// Seed makes the population; the same seed gives the same jobs.
	Seed uint64
	// Step is the sample interval; zero means 1 minute.
	Step time.Duration
	// Window is the window length the lengths are counted in; zero means
	// 10 minutes.
	Window time.Duration
	// Reference scales the injections (Labelled only).
	Reference Reference
}

func (o LabelledOptions) withDefaults() LabelledOptions {
	if o.Jobs == 0 {
		o.Jobs = 1000
	}
	if o.Step == 0 {
		o.Step = time.Minute
	}
	if o.Window == 0 {
		o.Window = 10 * time.Minute
	}
	return o
}

// LabelledJob is one generated job: who and what it is, its label, and
// everything needed to replay its samples (Stream).
type LabelledJob struct {
	ID, User, Account, Name string
	// Class is the generator class (see the file comment).
	Class string
	// Label is the pattern injected, "" for a benign job.
	Label string
	// Variant says which form of the class was drawn ("create", "sync",
	// "read", ...), empty where a class has one form.
	Variant string
	// Nodes is the job's width; NodeNames lists them.
	Nodes     int
	NodeNames []string
	// Length is the job's run time, a whole number of steps.
	Length time.Duration
	// Onset and Until bound the injected behaviour, as offsets from the
	// job's start (zero for an ordinary job). OnsetWindow is the window
	// Onset falls in.
	Onset, Until time.Duration
	OnsetWindow  int
	// Intensity is the injection's strength as a multiple of what its
	// pattern needs (the critical cut, or the p90 cut for imbalanced_io
	// and stat_polling); for a burst or a noisy start, of the critical
	// cut of its main metric.
	Intensity float64

	step, window time.Duration
	seed         [2]uint64
	base         profile
	inj          injection
}

// Windows is the number of windows the job spans (the last may be
// partial).
func (j *LabelledJob) Windows() int { return int((j.Length + j.window - 1) / j.window) }

// Steps is the number of sample intervals.
func (j *LabelledJob) Steps() int { return int(j.Length / j.step) }

// Step is the sample interval.
func (j *LabelledJob) Step() time.Duration { return j.step }

// Window is the window length the job was drawn for.
func (j *LabelledJob) Window() time.Duration { return j.window }

// Metric groups: metrics that vary together (ops with their bytes).
const (
	gRead = iota
	gWrite
	gOpen
	gCreate
	gStat
	gMeta
	gSync
	gOther
	groups
)

// profile is an ordinary job's background per node per second, before the
// window, node and minute factors.
type profile struct {
	rates     metric.Rates
	winFactor [][groups]float64 // per window
	nodeFac   [][groups]float64 // per node
	ckpt      checkpoint
}

// checkpoint is a periodic burst of large writes.
type checkpoint struct {
	every, offset, minutes int // in windows, minutes into the window, minutes long
	rate, size             float64
}

// injection is what a class adds or replaces from Onset to Until.
type injection struct {
	add     metric.Rates // added per node per second
	replace metric.Set   // metrics whose background is replaced by add
	scale   float64      // background scale while active (stat polling); 0 means 1
	dataCap float64      // with scale: the most data bytes/s left per node
	// node0 is added to the first node only, replacing its data
	// background (imbalanced_io); others' data becomes othersShare of it
	// spread evenly.
	node0       metric.Rates
	othersShare float64
	nodeSigma   float64 // per-node spread of the injection
}

// classMix is the share of each class, in percent.
var classMix = []struct {
	class string
	pct   int
}{
	{ClassOrdinary, 23}, {ClassBurst, 12}, {ClassNoisyStart, 9}, {ClassStreaming, 7},
	{LabelMetadataStorm, 7}, {LabelStatStorm, 7}, {LabelSmallWriteFlood, 7}, {LabelOpenCloseChurn, 7},
	{LabelFsyncStorm, 7}, {LabelImbalancedIO, 7}, {LabelStatPolling, 7},
}

// Labelled returns o.Jobs jobs drawn from every class in the shares of
// classMix (rounded so that the counts add up), in a shuffled order.
func Labelled(o LabelledOptions) []LabelledJob {
	o = o.withDefaults()
	rng := rand.New(rand.NewPCG(o.Seed, 0x6c6162656c6c6564)) // "labelled"
	classes := make([]string, 0, o.Jobs)
	for i, c := range classMix {
		n := o.Jobs * c.pct / 100
		if i == 0 { // ordinary takes the rounding remainder
			rest := o.Jobs
			for _, d := range classMix {
				rest -= o.Jobs * d.pct / 100
			}
			n += rest
		}
		for range n {
			classes = append(classes, c.class)
		}
	}
	rng.Shuffle(len(classes), func(a, b int) { classes[a], classes[b] = classes[b], classes[a] })
	g := newGen(o, rng)
	out := make([]LabelledJob, len(classes))
	for i, c := range classes {
		out[i] = g.job(i, c)
	}
	return out
}

// Ordinary returns o.Jobs ordinary jobs (label ""), the centre's everyday
// mix the baseline is learned from; the reference is not used.
func Ordinary(o LabelledOptions) []LabelledJob {
	o = o.withDefaults()
	rng := rand.New(rand.NewPCG(o.Seed, 0x6f7264696e617279)) // "ordinary"
	g := newGen(o, rng)
	out := make([]LabelledJob, o.Jobs)
	for i := range out {
		out[i] = g.job(i, ClassOrdinary)
	}
	return out
}

type gen struct {
	o        LabelledOptions
	rng      *rand.Rand
	nextNode int
	idBase   int
}

func newGen(o LabelledOptions, rng *rand.Rand) *gen {
	return &gen{o: o, rng: rng, idBase: 90000 + int(o.Seed%1000)*1000}
}

// Invented Brackwater users, accounts and job name parts.
var (
	users    = []string{"ambrel", "keswin", "lyset", "dorvane", "halvick", "moraine", "tessaly", "corwen", "ibbot", "pellam", "renfrew", "sabine", "thorley", "varga", "wynmere", "yarrow", "oskell", "bramley"}
	accounts = []string{"coastal", "geomech", "spectra", "textmine", "hydro", "genomics", "climate", "plasma", "materials", "astro"}
	nameA    = []string{"tidepool", "granite", "fernwave", "quill", "saltmarsh", "ember", "kestrel", "bracken", "lodestone", "mirefield", "heron", "slate", "cinder", "gorse", "tarn", "weir", "shingle"}
	nameB    = []string{"assim", "mesh", "post", "index", "sweep", "train", "relax", "ensemble", "reduce", "spin", "fold", "merge", "scan", "stage", "solve"}
)

// widths are the job widths in nodes and their weights (percent): most
// jobs are small, a few are wide, as at most centres.
var widths = []struct{ nodes, pct int }{
	{1, 30}, {2, 18}, {3, 3}, {4, 16}, {6, 2}, {8, 12}, {12, 1}, {16, 9}, {32, 6}, {64, 3},
}

func (g *gen) width(min int) int {
	for {
		r := g.rng.IntN(100)
		for _, w := range widths {
			if r < w.pct {
				if w.nodes >= min {
					return w.nodes
				}
				break
			}
			r -= w.pct
		}
	}
}

func (g *gen) pick(s []string) string { return s[g.rng.IntN(len(s))] }

// uniform returns a number in [a, b); logUniform one whose logarithm is
// uniform in [log a, log b).
func (g *gen) uniform(a, b float64) float64    { return a + (b-a)*g.rng.Float64() }
func (g *gen) logUniform(a, b float64) float64 { return a * math.Pow(b/a, g.rng.Float64()) }

// logNormal returns median·exp(sigma·z) for the given standard normal z.
func logNormal(median, sigma, z float64) float64 { return median * math.Exp(sigma*z) }

func (g *gen) job(i int, class string) LabelledJob {
	o := g.o
	j := LabelledJob{
		ID:      fmt.Sprint(g.idBase + i),
		User:    g.pick(users),
		Account: g.pick(accounts),
		Name:    g.pick(nameA) + "-" + g.pick(nameB),
		Class:   class,
		step:    o.Step, window: o.Window,
		seed: [2]uint64{g.rng.Uint64(), g.rng.Uint64()},
	}
	minNodes, minWindows, minProblem := 1, 6, 0
	switch class {
	case ClassOrdinary, ClassBurst, ClassNoisyStart:
	case LabelImbalancedIO:
		minNodes = 4
		minProblem = 6
	case LabelStatPolling:
		minProblem = 8
	default:
		minProblem = 6
	}
	minWindows = max(minWindows, minProblem+1)
	j.Nodes = g.width(minNodes)
	steps := int(o.Window / o.Step)
	j.Length = time.Duration(g.rng.IntN((36-minWindows)*steps+1)+minWindows*steps) * o.Step
	j.base = g.drawBase(&j)
	if class != ClassOrdinary {
		g.inject(&j, minProblem)
	}
	if j.Label == "" && class == ClassStreaming {
		j.Label = LabelHeavyStreaming
	}
	j.OnsetWindow = int(j.Onset / o.Window)
	j.NodeNames = make([]string, j.Nodes)
	for k := range j.NodeNames {
		g.nextNode++
		j.NodeNames[k] = fmt.Sprintf("bw%05d", g.nextNode)
	}
	return j
}

// drawBase draws an ordinary job's background. Medians and spreads are
// per node per second; every value is a plausible Lustre client rate, not
// a measurement. A job-wide activity factor correlates the metrics (a busy
// job is busy on most of them, correlation 0.5 in log space); transfer
// sizes are drawn per job (4 KiB to 4 MiB reads, 4 KiB to 8 MiB writes)
// and ops follow from bytes.
func (g *gen) drawBase(j *LabelledJob) profile {
	r := g.rng
	a := r.NormFloat64()
	z := func() float64 { return 0.5*a + math.Sqrt(0.75)*r.NormFloat64() }
	var p profile
	rt := &p.rates
	if r.Float64() >= 0.15 {
		rt[metric.ReadBytes] = logNormal(2e6, 1.8, z())
		size := math.Exp2(g.uniform(12, 22))
		rt[metric.ReadOps] = min(rt[metric.ReadBytes]/size, 50000)
	} else {
		rt[metric.ReadOps] = logNormal(0.2, 1, z()) // a few tiny reads
		rt[metric.ReadBytes] = rt[metric.ReadOps] * 512
	}
	if r.Float64() >= 0.2 {
		rt[metric.WriteBytes] = logNormal(1e6, 1.8, z())
		size := math.Exp2(g.uniform(12, 23))
		rt[metric.WriteOps] = min(rt[metric.WriteBytes]/size, 30000)
	}
	rt[metric.Opens] = logNormal(0.5, 1.4, z())
	rt[metric.Closes] = rt[metric.Opens] * g.uniform(0.97, 1)
	if r.Float64() < 0.6 {
		rt[metric.Creates] = logNormal(0.1, 1.5, z())
		if r.Float64() < 0.5 {
			rt[metric.Removes] = rt[metric.Creates] * g.uniform(0.3, 1)
		}
	}
	rt[metric.StatOps] = logNormal(3, 1.3, z())
	if r.Float64() < 0.5 {
		rt[metric.MetaUpdates] = logNormal(0.1, 1.4, z())
	}
	if r.Float64() < 0.4 {
		rt[metric.Syncs] = min(logNormal(0.08, 1.5, z()), 0.5*rt[metric.WriteOps])
	}
	rt[metric.OtherOps] = logNormal(1, 1.4, z())

	windows := j.Windows()
	p.winFactor = make([][groups]float64, windows)
	for w := range p.winFactor {
		common := r.NormFloat64()
		for k := range groups {
			p.winFactor[w][k] = math.Exp(0.25*common + 0.45*r.NormFloat64())
		}
	}
	p.nodeFac = make([][groups]float64, j.Nodes)
	rank0 := 1.0
	if j.Nodes > 1 && r.Float64() < 0.3 {
		rank0 = g.uniform(1.5, 4) // rank 0 a little busier: common, and mild
	}
	for n := range p.nodeFac {
		for k := range groups {
			p.nodeFac[n][k] = math.Exp(0.25 * r.NormFloat64())
		}
		if n == 0 {
			p.nodeFac[n][gRead] *= rank0
			p.nodeFac[n][gWrite] *= rank0
		}
	}
	if r.Float64() < 0.3 {
		p.ckpt = checkpoint{
			every:   3 + r.IntN(6),
			offset:  r.IntN(10),
			minutes: 1 + r.IntN(5),
			rate:    min(max(rt[metric.WriteBytes], 1e6)*g.logUniform(10, 200), 3e9),
			size:    math.Exp2(float64(20 + r.IntN(4))),
		}
	}
	return p
}

// inject sets the class's label, span, intensity and overlay. The intensity
// is drawn first, then the span, then the class's form: a seed makes the
// same population only while the draws keep that order.
func (g *gen) inject(j *LabelledJob, minProblem int) {
	j.inj.nodeSigma = 0.2
	j.Intensity = g.logUniform(1.5, 8)
	switch j.Class {
	case ClassBurst:
		g.injectBurst(j)
	case ClassNoisyStart:
		g.injectNoisyStart(j)
	case ClassStreaming:
		g.span(j, minProblem)
		g.injectStreaming(j)
	case LabelMetadataStorm:
		g.startProblem(j, minProblem)
		g.injectMetadataStorm(j)
	case LabelStatStorm:
		g.startProblem(j, minProblem)
		g.injectStatStorm(j)
	case LabelSmallWriteFlood:
		g.startProblem(j, minProblem)
		g.injectSmallWriteFlood(j)
	case LabelOpenCloseChurn:
		g.startProblem(j, minProblem)
		g.injectOpenCloseChurn(j)
	case LabelFsyncStorm:
		g.startProblem(j, minProblem)
		g.injectFsyncStorm(j)
	case LabelImbalancedIO:
		g.startProblem(j, minProblem)
		g.injectImbalancedIO(j)
	case LabelStatPolling:
		g.startProblem(j, minProblem)
		g.injectStatPolling(j)
	}
}

// stepsPerWindow is the number of sample intervals in a window.
func (j *LabelledJob) stepsPerWindow() int { return int(j.window / j.step) }

// setSpan bounds the injection to steps [on, until).
func (j *LabelledJob) setSpan(on, until int) {
	j.Onset, j.Until = time.Duration(on)*j.step, time.Duration(until)*j.step
}

// span sets the injection from a random minute leaving at least
// minProblem windows, lasting to the end or at least minProblem windows.
func (g *gen) span(j *LabelledJob, minProblem int) {
	r := g.rng
	steps, shortest := j.Steps(), minProblem*j.stepsPerWindow()
	on := r.IntN(steps - shortest + 1)
	until := steps
	if r.Float64() < 0.35 {
		until = on + shortest + r.IntN(steps-on-shortest+1)
	}
	j.setSpan(on, until)
}

// startProblem gives a problem class its span and its label, the pattern
// of the same name.
func (g *gen) startProblem(j *LabelledJob, minProblem int) {
	g.span(j, minProblem)
	j.Label = j.Class
}

// addRate adds v per node per second to metric id while the injection is
// active.
func (in *injection) addRate(id metric.ID, v float64) { in.add[id] += v }

// replaceBackground drops the background of ids while the injection is
// active, leaving only what it adds.
func (in *injection) replaceBackground(ids ...metric.ID) {
	for _, id := range ids {
		in.replace.Add(id)
	}
}

// addOpenClose adds n opens and as many closes per second: every file
// opened is closed again.
func (in *injection) addOpenClose(n float64) {
	in.addRate(metric.Opens, n)
	in.addRate(metric.Closes, n)
}

// addTransfers adds rate bytes per second to bytes in transfers of size
// bytes, counted in ops.
func (in *injection) addTransfers(bytes, ops metric.ID, rate, size float64) {
	in.addRate(bytes, rate)
	in.addRate(ops, rate/size)
}

// addWrites adds calls writes per second, each of a size drawn
// log-uniformly in [lo, hi) bytes for the whole span.
func (g *gen) addWrites(in *injection, calls, lo, hi float64) {
	in.addRate(metric.WriteOps, calls)
	in.addRate(metric.WriteBytes, calls*g.logUniform(lo, hi))
}

// addReads is addWrites for reads.
func (g *gen) addReads(in *injection, calls, lo, hi float64) {
	in.addRate(metric.ReadOps, calls)
	in.addRate(metric.ReadBytes, calls*g.logUniform(lo, hi))
}

// injectBurst places a burst of 1 to 4 minutes, of creates or of syncs,
// at the job's start (staging) or at a random minute after its first
// window.
func (g *gen) injectBurst(j *LabelledJob) {
	r := g.rng
	steps, perWindow := j.Steps(), j.stepsPerWindow()
	d := 1 + r.IntN(4)
	on := 0
	if r.Float64() < 0.5 {
		on = perWindow + r.IntN(max(steps-perWindow-d, 1))
	}
	j.setSpan(on, min(on+d, steps))
	if r.Float64() < 0.5 {
		g.burstOfCreates(j)
	} else {
		g.burstOfSyncs(j)
	}
}

// burstOfCreates unpacks an input archive: files created, opened, written
// in small pieces and closed, their times and modes set.
func (g *gen) burstOfCreates(j *LabelledJob) {
	in := &j.inj
	j.Variant = "create"
	c := j.Intensity * g.o.Reference.critical(metric.Creates)
	in.addRate(metric.Creates, c)
	in.addOpenClose(c)
	in.addRate(metric.MetaUpdates, c*g.uniform(0.5, 1))
	g.addWrites(in, c*g.uniform(1, 3), 1<<10, 64<<10)
}

// burstOfSyncs is a checkpoint flushing each file it writes.
func (g *gen) burstOfSyncs(j *LabelledJob) {
	in := &j.inj
	j.Variant = "sync"
	s := j.Intensity * g.o.Reference.critical(metric.Syncs)
	in.addRate(metric.Syncs, s)
	g.addWrites(in, s*g.uniform(1, 4), 64<<10, 4<<20)
	in.addOpenClose(s)
}

// injectNoisyStart makes the first 2 to 8 minutes noisy: every rank
// imports its libraries and reads its input. Its intensity, of the
// critical stat cut, is drawn again: 0.5 to 5.
func (g *gen) injectNoisyStart(j *LabelledJob) {
	r, ref, in := g.rng, &g.o.Reference, &j.inj
	j.Variant = "start"
	d := 2 + r.IntN(7)
	j.setSpan(0, min(d, j.Steps()))
	j.Intensity = g.logUniform(0.5, 5)
	in.addRate(metric.StatOps, j.Intensity*ref.critical(metric.StatOps))
	in.addOpenClose(g.logUniform(0.3, 3) * max(ref.critical(metric.Opens), ref.critical(metric.Closes)))
	rb := g.logUniform(50e6, 1e9)
	in.addRate(metric.ReadBytes, rb)
	in.addRate(metric.ReadOps, rb/math.Exp2(float64(20+r.IntN(3))))
}

// injectStreaming replaces the job's data with healthy streaming. The
// main direction (reads for "both") runs at the intensity times its
// critical cut, capped at 6 GB/s per node; the other direction of "both"
// at 20% to 100% of it.
func (g *gen) injectStreaming(j *LabelledJob) {
	r, ref, in := g.rng, &g.o.Reference, &j.inj
	dir := []string{"read", "write", "both"}[r.IntN(3)]
	main := metric.ReadBytes
	if dir == "write" {
		main = metric.WriteBytes
	}
	rate := min(j.Intensity*ref.critical(main), 6e9)
	j.Intensity = rate / ref.critical(main)
	mib := []int{1, 1, 1, 2, 4, 4, 4, 8, 16}[r.IntN(9)]
	size := float64(mib << 20)
	j.Variant = dir + fmt.Sprintf(" %dMiB", mib)
	in.replaceBackground(metric.ReadBytes, metric.ReadOps, metric.WriteBytes, metric.WriteOps)
	switch dir {
	case "read":
		in.addTransfers(metric.ReadBytes, metric.ReadOps, rate, size)
	case "write":
		in.addTransfers(metric.WriteBytes, metric.WriteOps, rate, size)
	default:
		w := rate * g.uniform(0.2, 1)
		in.addTransfers(metric.ReadBytes, metric.ReadOps, rate, size)
		in.addTransfers(metric.WriteBytes, metric.WriteOps, w, size)
	}
}

// injectMetadataStorm is a create storm or an unlink storm, half each.
func (g *gen) injectMetadataStorm(j *LabelledJob) {
	if g.rng.IntN(2) == 0 {
		g.createStorm(j)
	} else {
		g.unlinkStorm(j)
	}
}

// createStorm is one file per task or step, often removed again, with the
// opens, small writes and stats each brings.
func (g *gen) createStorm(j *LabelledJob) {
	in := &j.inj
	j.Variant = "create"
	c := j.Intensity * g.o.Reference.critical(metric.Creates)
	in.addRate(metric.Creates, c)
	if g.rng.Float64() < 0.6 {
		in.addRate(metric.Removes, c*g.uniform(0.5, 1))
	}
	in.addOpenClose(c)
	g.addWrites(in, c*g.uniform(1, 3), 256, 8<<10)
	in.addRate(metric.StatOps, c*g.uniform(0.5, 2))
	in.addRate(metric.MetaUpdates, c*g.uniform(0, 0.5))
}

// unlinkStorm is a huge tree being removed: each file stated, each
// directory opened.
func (g *gen) unlinkStorm(j *LabelledJob) {
	in := &j.inj
	j.Variant = "unlink"
	u := j.Intensity * g.o.Reference.critical(metric.Removes)
	in.addRate(metric.Removes, u)
	in.addRate(metric.StatOps, u*g.uniform(1, 2))
	in.addOpenClose(u * g.uniform(0, 0.02))
}

// injectStatStorm is a huge tree scanned again and again: stats, and a
// few opens of directories.
func (g *gen) injectStatStorm(j *LabelledJob) {
	in := &j.inj
	st := j.Intensity * g.o.Reference.critical(metric.StatOps)
	in.addRate(metric.StatOps, st)
	in.addOpenClose(st * g.uniform(0, 0.02))
}

// injectSmallWriteFlood turns the job's writes into calls of 64 B to
// 16 KiB.
func (g *gen) injectSmallWriteFlood(j *LabelledJob) {
	in := &j.inj
	w := j.Intensity * g.o.Reference.critical(metric.WriteOps)
	in.replaceBackground(metric.WriteBytes, metric.WriteOps)
	g.addWrites(in, w, 64, 16<<10)
}

// injectOpenCloseChurn is an open, small read, close loop, with some
// stats.
func (g *gen) injectOpenCloseChurn(j *LabelledJob) {
	ref, in := &g.o.Reference, &j.inj
	o := j.Intensity * max(ref.critical(metric.Opens), ref.critical(metric.Closes))
	in.addOpenClose(o)
	g.addReads(in, o*g.uniform(1, 3), 512, 16<<10)
	in.addRate(metric.StatOps, o*g.uniform(0, 1))
}

// injectFsyncStorm replaces the job's writes with a sync after about
// every write of 512 B to 32 KiB.
func (g *gen) injectFsyncStorm(j *LabelledJob) {
	in := &j.inj
	s := j.Intensity * g.o.Reference.critical(metric.Syncs)
	in.replaceBackground(metric.WriteBytes, metric.WriteOps, metric.Syncs)
	in.addRate(metric.Syncs, s)
	g.addWrites(in, s*g.uniform(0.8, 1.3), 512, 32<<10)
}

// injectImbalancedIO puts the job's data, reads or writes, on its first
// node; the others share 0% to 15% of it.
func (g *gen) injectImbalancedIO(j *LabelledJob) {
	r, in := g.rng, &j.inj
	id, ops := metric.WriteBytes, metric.WriteOps
	j.Variant = "write"
	if r.Float64() < 0.4 {
		id, ops, j.Variant = metric.ReadBytes, metric.ReadOps, "read"
	}
	need := g.o.Reference.p90(id)
	// One client moves at most about 5 GB/s: a wide job's intensity
	// is capped by it, and a job too wide for 1.5 times the need is
	// made narrower.
	const clientMax = 5e9
	for j.Nodes > 4 && 1.5*need*float64(j.Nodes) > clientMax {
		j.Nodes /= 2
		j.base.nodeFac = j.base.nodeFac[:j.Nodes]
	}
	j.Intensity = min(j.Intensity, clientMax/(need*float64(j.Nodes)))
	total := j.Intensity * need * float64(j.Nodes) // the job's data rate, all on node 0
	size := math.Exp2(float64(17 + r.IntN(6)))
	in.node0[id] = total
	in.node0[ops] = total / size
	in.othersShare = g.uniform(0, 0.15)
	in.replaceBackground(metric.ReadBytes, metric.ReadOps, metric.WriteBytes, metric.WriteOps)
}

// injectStatPolling makes the job wait: its other I/O falls to a trickle,
// and its data to a line of log now and then (at most 50 kB/s per node),
// while every node stats above the elevated cut and below the critical
// one.
func (g *gen) injectStatPolling(j *LabelledJob) {
	ref, in := &g.o.Reference, &j.inj
	need := ref.Cuts[metric.StatOps].Elevated
	j.Intensity = min(j.Intensity, 0.6*ref.critical(metric.StatOps)/need)
	in.scale = g.uniform(0, 0.02)
	in.dataCap = 50e3
	in.nodeSigma = 0.05
	in.addRate(metric.StatOps, j.Intensity*need)
	in.replaceBackground(metric.StatOps)
}

// Stream replays a job's samples, one step at a time.
type Stream struct {
	j     *LabelledJob
	rng   *rand.Rand
	i     int
	out   []metric.Values
	carry []metric.Rates // per node: fractional counts carried to the next step
	injF  []float64      // per node: the injection's spread
}

// Stream returns a fresh replay of the job's samples; two streams of one
// job give the same values.
func (j *LabelledJob) Stream() *Stream {
	s := &Stream{
		j:     j,
		rng:   rand.New(rand.NewPCG(j.seed[0], j.seed[1])),
		out:   make([]metric.Values, j.Nodes),
		carry: make([]metric.Rates, j.Nodes),
		injF:  make([]float64, j.Nodes),
	}
	for n := range s.injF {
		s.injF[n] = math.Exp(j.inj.nodeSigma * s.rng.NormFloat64())
	}
	return s
}

// Minute-to-minute noise is log-normal, drawn from tables of its quantiles
// (exp(σz) at z = Φ⁻¹((k+½)/noiseSize), mean 1 to within 0.2%): exact
// enough, and much cheaper than an exp per metric group per node per step.
const (
	noiseBits = 10
	noiseSize = 1 << noiseBits
)

var minuteNoise, injNoise = noiseTable(0.2), noiseTable(0.1)

func noiseTable(sigma float64) *[noiseSize]float64 {
	var t [noiseSize]float64
	for k := range t {
		z := math.Sqrt2 * math.Erfinv(2*(float64(k)+0.5)/noiseSize-1)
		t[k] = math.Exp(sigma*z - sigma*sigma/2)
	}
	return &t
}

// groupOf is each metric's group.
var groupOf = [metric.Count]int{
	metric.ReadBytes: gRead, metric.ReadOps: gRead,
	metric.WriteBytes: gWrite, metric.WriteOps: gWrite,
	metric.Opens: gOpen, metric.Closes: gOpen,
	metric.Creates: gCreate, metric.Removes: gCreate,
	metric.StatOps: gStat, metric.MetaUpdates: gMeta,
	metric.Syncs: gSync, metric.OtherOps: gOther,
}

// Next returns each node's deltas over the next step, in NodeNames order
// (the slice is reused), and false after the last step.
func (s *Stream) Next() ([]metric.Values, bool) {
	j := s.j
	if s.i >= j.Steps() {
		return nil, false
	}
	i := s.i
	s.i++
	perWindow := j.stepsPerWindow()
	w := i / perWindow
	t := time.Duration(i) * j.step
	active := j.Class != ClassOrdinary && t >= j.Onset && t < j.Until
	inCkpt := j.base.ckpt.writing(w, i%perWindow)
	var others metric.Rates // imbalanced_io: the other nodes' share, per node
	if active && j.Nodes > 1 {
		others = j.inj.othersRates(j.Nodes)
	}
	// Locals filled in place, and each node's carry copied in and out
	// once: the loop below is the evaluation's hot path (and the race
	// detector's).
	base := j.base.windowRates(w)
	secs := j.step.Seconds()
	for n := range s.out {
		var noise [groups]float64
		s.drawNoise(&noise)
		var r metric.Rates
		j.base.nodeRates(&r, &base, n, &noise)
		if inCkpt {
			j.base.ckpt.addMinute(&r, noise[gWrite])
		}
		if active {
			s.addInjection(&r, n, &others)
		}
		s.out[n] = s.count(n, &r, secs)
	}
	return s.out, true
}

// writing says whether minute m of window w is one of the checkpoint's.
func (c *checkpoint) writing(w, m int) bool {
	return c.every > 0 && w%c.every == c.every-1 && m >= c.offset && m < c.offset+c.minutes
}

// addMinute adds one checkpoint minute to r: its large writes, varying with
// the minute's write noise, and a file created, opened, synced and closed.
func (c *checkpoint) addMinute(r *metric.Rates, writeNoise float64) {
	r[metric.WriteBytes] += c.rate * writeNoise
	r[metric.WriteOps] += c.rate / c.size * writeNoise
	r[metric.Opens] += 1.0 / 60
	r[metric.Closes] += 1.0 / 60
	r[metric.Creates] += 1.0 / 60
	r[metric.Syncs] += 1.0 / 60
}

// othersRates is what each of a job's other nodes moves while node 0
// carries an imbalanced job's data: othersShare of it, spread evenly.
func (in *injection) othersRates(nodes int) metric.Rates {
	var others metric.Rates
	for k, v := range in.node0 {
		others[k] = v * in.othersShare / float64(nodes-1)
	}
	return others
}

// windowRates is the background in window w, before the node and minute
// factors.
func (p *profile) windowRates(w int) metric.Rates {
	var base metric.Rates
	wf := &p.winFactor[w]
	for id, x := range p.rates {
		base[id] = x * wf[groupOf[id]]
	}
	return base
}

// nodeRates sets r to node n's background this step: the window's rates
// base times the node's and the minute's factors of each metric's group.
func (p *profile) nodeRates(r, base *metric.Rates, n int, noise *[groups]float64) {
	nf := &p.nodeFac[n]
	for id := range metric.Count {
		g := groupOf[id]
		r[id] = base[id] * nf[g] * noise[g]
	}
}

// drawNoise draws one node's minute-to-minute factor per metric group into
// noise, ten bits of a random word each (a word holds six).
func (s *Stream) drawNoise(noise *[groups]float64) {
	bits := s.rng.Uint64()
	for k := range noise {
		if k == 6 {
			bits = s.rng.Uint64()
		}
		noise[k] = minuteNoise[bits&(noiseSize-1)]
		bits >>= noiseBits
	}
}

// addInjection applies the active injection to node n's rates r; others
// is what an imbalanced job's other nodes each move.
func (s *Stream) addInjection(r *metric.Rates, n int, others *metric.Rates) {
	in := &s.j.inj
	if in.scale > 0 {
		in.quieten(r)
	}
	f := s.injF[n] * injNoise[s.rng.Uint64()&(noiseSize-1)]
	for id := range metric.Count {
		if in.replace.Has(id) {
			r[id] = 0
		}
		r[id] += in.add[id] * f
	}
	if in.node0 != (metric.Rates{}) {
		share := others
		if n == 0 {
			share = &in.node0
		}
		for id := range metric.Count {
			r[id] += share[id] * f
		}
	}
}

// quieten scales the background down while the job waits and caps its
// data at dataCap bytes per second, keeping each transfer's size.
func (in *injection) quieten(r *metric.Rates) {
	for id := range r {
		r[id] *= in.scale
	}
	for _, b := range [][2]metric.ID{{metric.ReadBytes, metric.ReadOps}, {metric.WriteBytes, metric.WriteOps}} {
		if x := r[b[0]]; x > in.dataCap {
			r[b[0]], r[b[1]] = in.dataCap, r[b[1]]*in.dataCap/x
		}
	}
}

// count turns node n's rates over secs seconds into whole counts, carrying
// each fraction to the next step so that rounding loses nothing.
func (s *Stream) count(n int, r *metric.Rates, secs float64) metric.Values {
	carry := s.carry[n]
	var v metric.Values
	for id := range metric.Count {
		x := r[id]*secs + carry[id]
		c := math.Floor(x)
		carry[id] = x - c
		v[id] = uint64(c)
	}
	s.carry[n] = carry
	return v
}

// Classes lists the generator's classes in their mix order.
func Classes() []string {
	out := make([]string, len(classMix))
	for i, c := range classMix {
		out[i] = c.class
	}
	return out
}

// Labels lists the labels the generator injects, sorted.
func Labels() []string {
	l := []string{LabelMetadataStorm, LabelStatStorm, LabelSmallWriteFlood, LabelOpenCloseChurn, LabelFsyncStorm, LabelImbalancedIO, LabelStatPolling, LabelHeavyStreaming}
	slices.Sort(l)
	return l
}
