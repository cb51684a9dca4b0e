#!/bin/sh
# Example epilog: record on this node that a job ended. See prolog.sh.
JOB_ID="${SLURM_JOB_ID:-${PBS_JOBID:-}}"
[ -n "$JOB_ID" ] || exit 0
/usr/local/bin/sluice-agent job end \
  --id "$JOB_ID" \
  --state.dir /var/lib/sluice/agent \
  --nats.url nats://sluice-broker.example:4222 \
  --log.level error || true
exit 0
