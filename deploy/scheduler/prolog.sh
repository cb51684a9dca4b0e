#!/bin/sh
# Example prolog: record on this node that a job started, for the Sluice
# agent. Run it on every node of the job, as root, from the batch
# scheduler's per-node prolog. Adapt the variables to your scheduler; the
# ones below are examples (SLURM_* for Slurm, PBS_* for PBS-like systems).
#
# The hook never holds up the job: it records the job locally, tries the
# broker for at most 2 seconds, and leaves the announcement to the running
# agent if the broker is away. It always exits 0.
JOB_ID="${SLURM_JOB_ID:-${PBS_JOBID:-}}"
[ -n "$JOB_ID" ] || exit 0
/usr/local/bin/sluice-agent job start \
  --id "$JOB_ID" \
  --user "${SLURM_JOB_USER:-${PBS_O_LOGNAME:-}}" \
  --account "${SLURM_JOB_ACCOUNT:-${PBS_ACCOUNT:-}}" \
  --name "${SLURM_JOB_NAME:-${PBS_JOBNAME:-}}" \
  --nodes "${SLURM_JOB_NODELIST:-}" \
  --state.dir /var/lib/sluice/agent \
  --nats.url nats://sluice-broker.example:4222 \
  --log.level error || true
exit 0
