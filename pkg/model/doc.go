// Package model holds the aggregator's records: jobs, windows, flags,
// silences, acknowledgements, agents, and the state of a job as the state
// file keeps it. Every room above it speaks in these records; none of them
// carries behaviour beyond small helpers.
//
// # Basics
//
// Rates are per node: a job's value for a metric is the mean over its
// reporting nodes of each node's rate. Reasons, severities, job states and
// flag states are types with a text form; compare them as values, never as
// strings.
//
// # Caveats
//
// The JSON field names are part of the HTTP API (v1) and of the state
// file's schema; renaming one is a schema change. [JobRecord] is the state
// file's form of a job, kept apart from the tracker's working memory: the
// tracker converts to and from it, and the store imports nothing above
// this package.
package model
