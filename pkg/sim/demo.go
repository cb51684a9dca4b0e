package sim

import (
	"fmt"
	"time"
)

// DemoCentre is the invented centre the demo is set in.
const DemoCentre = "Brackwater Research Computing Centre"

// DemoNodes returns n node names of the demo cluster: bw001, bw002, ...
func DemoNodes(n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = fmt.Sprintf("bw%03d", i+1)
	}
	return out
}

const (
	kib = 1 << 10
	mib = 1 << 20
)

// Demo returns the demo's mix of jobs on twelve nodes, its life compressed
// into seconds (rates stay per real second):
//
//   - 81230 tidepool-assim: a healthy streaming writer, 4 nodes, 600 MB/s
//     per node in 4 MiB writes;
//   - 81231 granite-mesh: a quiet compute job, 2 nodes;
//   - 81232 fernwave-post: a small-write flood, 2 nodes, 50,000 writes/s of
//     512 bytes per node from 10 s in;
//   - 81234 quill-index: a metadata storm, 4 nodes, that reads quietly for
//     15 s and then creates, stats and unlinks thousands of files per
//     second per node, until it ends at 55 s.
func Demo() Scenario {
	nodes := DemoNodes(12)
	return Scenario{
		Centre: DemoCentre,
		Nodes:  nodes,
		FSName: "brack",
		Jobs: []Job{
			{
				ID: "81230", User: "ambrel", Account: "coastal", Name: "tidepool-assim", Kind: "healthy streaming",
				Nodes: nodes[0:4], Start: 0, End: 10 * time.Minute,
				Phases: []Phase{{After: 0, Behaviour: Behaviour{WriteBytes: 600e6, WriteSize: 4 * mib, ReadBytes: 20e6, ReadSize: 1 * mib, Opens: 0.5, Stats: 2, Syncs: 0.2}}},
			},
			{
				ID: "81231", User: "keswin", Account: "geomech", Name: "granite-mesh", Kind: "quiet compute",
				Nodes: nodes[4:6], Start: 0, End: 10 * time.Minute,
				Phases: []Phase{{After: 0, Behaviour: Behaviour{ReadBytes: 40 * kib, ReadSize: 4 * kib, Stats: 1}}},
			},
			{
				ID: "81232", User: "lyset", Account: "spectra", Name: "fernwave-post", Kind: "small-write flood",
				Nodes: nodes[10:12], Start: 0, End: 10 * time.Minute,
				Phases: []Phase{
					{After: 0, Behaviour: Behaviour{ReadBytes: 200e6, ReadSize: 4 * mib, Opens: 1}},
					{After: 10 * time.Second, Behaviour: Behaviour{WriteBytes: 50000 * 512, WriteSize: 512, Opens: 2, Stats: 20}},
				},
			},
			{
				ID: "81234", User: "dorvane", Account: "textmine", Name: "quill-index", Kind: "metadata storm",
				Nodes: nodes[6:10], Start: 0, End: 55 * time.Second,
				Phases: []Phase{
					{After: 0, Behaviour: Behaviour{ReadBytes: 50e6, ReadSize: 1 * mib, Opens: 5, Stats: 20}},
					{After: 15 * time.Second, Behaviour: Behaviour{Creates: 2500, Removes: 2400, Stats: 15000, Opens: 2500, WriteBytes: 2500 * 2 * kib, WriteSize: 2 * kib, MetaUpdates: 300}},
				},
			},
		},
	}
}
