package main

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"sluice/pkg/source"
	"sluice/pkg/source/block"
	"sluice/pkg/source/jobio"
	"sluice/pkg/source/lustre"
	"sluice/pkg/source/nfs"
)

// sourceOptions select and configure the counter sources.
type sourceOptions struct {
	list         string
	lustreRoot   string
	nfsProc      string
	jobio        jobio.Options
	blockProc    string
	blockInclude string
	blockExclude string
}

// knownSources are the source kinds --sources may name, in reading order.
var knownSources = []string{"lustre", "nfs", "block", "jobio"}

func (f *sourceOptions) register(fs *flag.FlagSet) {
	fs.StringVar(&f.list, "sources", strings.Join(knownSources, ","), "comma-separated counter sources to read: "+strings.Join(knownSources, ", "))
	fs.StringVar(&f.lustreRoot, "source.lustre.root", "/sys/kernel/debug/lustre/llite", "directory holding one <instance>/stats file per Lustre client mount (Lustre before 2.12: /proc/fs/lustre/llite)")
	fs.StringVar(&f.nfsProc, "source.nfs.procfs", "/proc", "procfs mount point holding self/mountstats (the agent's mount namespace)")
	fs.StringVar(&f.jobio.CgroupRoot, "source.jobio.cgroupfs", jobio.DefaultCgroupRoot, "cgroup v2 mount point (on hybrid systems its unified mount) where job cgroups are found")
	fs.StringVar(&f.jobio.ProcRoot, "source.jobio.procfs", jobio.DefaultProcRoot, "procfs mount point holding the jobs' /proc/<pid>/io")
	fs.StringVar(&f.jobio.JobPattern, "source.jobio.job-pattern", jobio.DefaultJobPattern, "regular expression on cgroup paths (relative to the cgroup mount) whose first group is the job id; the default matches job_<id> layouts")
	fs.IntVar(&f.jobio.MaxDepth, "source.jobio.max-depth", jobio.DefaultMaxDepth, "directory levels searched for job cgroups, and below each job cgroup for its processes")
	fs.StringVar(&f.blockProc, "source.block.procfs", "/proc", "procfs mount point holding diskstats")
	fs.StringVar(&f.blockInclude, "source.block.include", block.DefaultInclude, "regular expression of block device names to read (whole disks by default: partitions would count twice)")
	fs.StringVar(&f.blockExclude, "source.block.exclude", block.DefaultExclude, "regular expression of block device names to leave out, applied after the include pattern")
}

// build makes the selected sources. A selected source whose directory does
// not exist is an error naming the path and the option that sets it.
func (f *sourceOptions) build() ([]source.Source, error) {
	var out []source.Source
	for _, name := range strings.Split(f.list, ",") {
		name = strings.TrimSpace(name)
		if name == "" {
			continue
		}
		if !slices.Contains(knownSources, name) {
			return nil, fmt.Errorf("--sources: unknown source %q (known: %s)", name, strings.Join(knownSources, ", "))
		}
		switch name {
		case "lustre":
			if err := mustExist(f.lustreRoot, "Lustre stats tree", "--source.lustre.root", "the llite directory"); err != nil {
				return nil, err
			}
			out = append(out, lustre.NewSource(f.lustreRoot, nil))
		case "nfs":
			if err := mustExist(filepath.Join(f.nfsProc, "self", "mountstats"), "NFS client statistics", "--source.nfs.procfs", "the procfs mount point"); err != nil {
				return nil, err
			}
			out = append(out, nfs.NewSource(f.nfsProc, nil))
		case "jobio":
			if err := mustExist(f.jobio.CgroupRoot, "cgroup v2 mount", "--source.jobio.cgroupfs", "the cgroup v2 mount point"); err != nil {
				return nil, err
			}
			src, err := jobio.NewSource(f.jobio, nil)
			if err != nil {
				return nil, fmt.Errorf("--source.jobio.*: %w", err)
			}
			out = append(out, src)
		case "block":
			if err := mustExist(filepath.Join(f.blockProc, "diskstats"), "block device statistics", "--source.block.procfs", "the procfs mount point"); err != nil {
				return nil, err
			}
			src, err := block.NewSource(f.blockProc, block.Options{Include: f.blockInclude, Exclude: f.blockExclude}, nil)
			if err != nil {
				return nil, fmt.Errorf("--source.block.*: %w", err)
			}
			out = append(out, src)
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("--sources: no source selected")
	}
	return out, nil
}

func mustExist(path, what, flagName, hint string) error {
	if _, err := os.Stat(path); err != nil {
		return fmt.Errorf("%s %s: %w (set %s to %s, or leave the source out of --sources)", what, path, err, flagName, hint)
	}
	return nil
}
