package model

import "time"

// AgentStatus is what the latest heartbeats of one node's agent say.
type AgentStatus struct {
	Node     string        `json:"node"`
	Version  string        `json:"version"`
	LastSeen time.Time     `json:"last_seen"` // the heartbeat's own time
	Interval time.Duration `json:"interval"`
	// CPUSeconds is the agent's CPU time since it started; CPUShare the
	// fraction of one core it used between its last two heartbeats (zero
	// until there are two).
	CPUSeconds float64       `json:"cpu_seconds"`
	CPUShare   float64       `json:"cpu_share"`
	RSSBytes   uint64        `json:"rss_bytes"`
	Queued     uint32        `json:"queued"`
	Dropped    uint64        `json:"dropped"`
	Sources    []AgentSource `json:"sources"`
}

// AgentSource is one source's cost on one node.
type AgentSource struct {
	Name          string  `json:"name"`
	Instances     uint32  `json:"instances"`
	MicrosPerRead float64 `json:"micros_per_read"`
	OK            bool    `json:"ok"`
	Malformed     uint64  `json:"malformed_lines"`
}
