#!/usr/bin/env bash
# A real one-node Slurm cluster on this machine, and the README's job-array scripts run on it.
#
# Installs Slurm and MUNGE from Debian's packages when they are missing, starts munged, slurmctld and
# slurmd, drafts a small job from the demo grids with `dunereel new`, submits the README's array
# script (three parts) and its dependent `assemble` job exactly as the README shows them, waits, and
# compares the assembled bag with a one-machine run of the same job: every file must be identical but
# bag-info.txt and the tag manifest, which carry the bagging date.
#
# Needs root (it writes /etc/slurm/slurm.conf and the MUNGE key) and takes about a minute. When the
# cluster cannot start, it says why and exits non-zero: it never passes without a cluster.
#
# Usage: tests/slurm/one-node-cluster.sh [path/to/dunereel]   (default: target/debug/dunereel)
set -euo pipefail
cd "$(dirname "$0")/../.."
top=$(pwd)
bin=${1:-$top/target/debug/dunereel}
fail() { echo "one-node-cluster: FAILED: $*" >&2; exit 1; }
# The array tasks run in the work folder and find dunereel on PATH: a relative path would not
# resolve there, and every task would exit 127 ("command not found").
[ -e "$bin" ] && bin=$(realpath "$bin")

[ "$(id -u)" = 0 ] || fail "must run as root (it configures Slurm and MUNGE)"
[ -x "$bin" ] || fail "no dunereel binary at $bin; build it first (cargo build)"
if ! command -v sbatch >/dev/null || ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  echo "installing slurm-wlm and munge from Debian's packages"
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq || fail "apt-get update failed"
  apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null || fail "cannot install slurm-wlm munge"
fi

host=$(hostname -s)
cpus=$(nproc)

# MUNGE: a key only munge can read, then the daemon as the munge user.
mkdir -p /etc/munge /run/munge /var/lib/munge /var/log/munge
if [ ! -s /etc/munge/munge.key ]; then
  dd if=/dev/urandom of=/etc/munge/munge.key bs=1024 count=1 status=none
fi
chown -R munge:munge /etc/munge /run/munge /var/lib/munge /var/log/munge
chmod 0400 /etc/munge/munge.key
chmod 0755 /run/munge
if ! pgrep -x munged >/dev/null; then
  runuser -u munge -- /usr/sbin/munged || fail "munged did not start"
fi
munge -n | unmunge >/dev/null || fail "MUNGE does not work (munge -n | unmunge)"

# Slurm: one node, one partition, root as the Slurm user, no accounting.
mkdir -p /etc/slurm /var/spool/slurmctld /var/spool/slurmd /var/log/slurm
cat > /etc/slurm/slurm.conf <<CONF
# Written by dunereel's tests/slurm/one-node-cluster.sh: a one-node test cluster.
ClusterName=dunereel-test
SlurmctldHost=$host
SlurmUser=root
AuthType=auth/munge
MpiDefault=none
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
JobAcctGatherType=jobacct_gather/none
ReturnToService=2
StateSaveLocation=/var/spool/slurmctld
SlurmdSpoolDir=/var/spool/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
MinJobAge=600
NodeName=$host CPUs=$cpus RealMemory=2000 State=UNKNOWN
PartitionName=main Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
pgrep -x slurmctld >/dev/null || slurmctld || fail "slurmctld did not start (see /var/log/slurm/slurmctld.log)"
pgrep -x slurmd >/dev/null || slurmd || fail "slurmd did not start (see /var/log/slurm/slurmd.log)"
for _ in $(seq 60); do
  state=$(sinfo -h -o %T 2>/dev/null | head -n1 || true)
  case "$state" in idle*|mixed*|allocated*) break ;; esac
  sleep 1
done
case "${state:-}" in
  idle*|mixed*|allocated*) echo "cluster up: node $host ($cpus CPUs) is $state" ;;
  *) tail -n 20 /var/log/slurm/slurmctld.log /var/log/slurm/slurmd.log >&2 || true
     fail "the node did not become idle within 60 s (state: ${state:-none})" ;;
esac

# A small job for a new site, drafted from the demo grids.
work=$(mktemp -d /tmp/dunereel-slurm.XXXXXX)
trap 'scancel --quiet --user=root >/dev/null 2>&1 || true' EXIT
"$bin" new "$top"/demo-data/quellan-*.tif -o "$work/site.yaml" -q
printf 'timeline: { frames_per_year: 3 }\nview: { width: 320, height: 180 }\n' >> "$work/site.yaml"

# The README's scripts, taken from the README itself so that they stay true.
awk '/<!-- slurm-array-script -->/{f=1;next} /<!-- end -->/{f=0} f' "$top/README.md" | sed '/^```/d' > "$work/render-parts.sh"
awk '/<!-- slurm-submit -->/{f=1;next} /<!-- end -->/{f=0} f' "$top/README.md" | sed '/^```/d' > "$work/submit.sh"
[ -s "$work/render-parts.sh" ] && [ -s "$work/submit.sh" ] || fail "the README's Slurm scripts were not found"

cd "$work"
export PATH="$(dirname "$bin"):$PATH" JOB=site.yaml PARTS=3
ids=$(bash submit.sh) || fail "submitting the README's scripts failed"
assemble_id=$(echo "$ids" | tail -n1)
echo "submitted: $(echo "$ids" | tr '\n' ' ')"
# Wait for the assemble job, but not for ever: when an array task fails, Slurm leaves the
# `afterok` job pending with the reason DependencyNeverSatisfied, and it would never start.
state=
for _ in $(seq 300); do
  info=$(scontrol show job "$assemble_id" 2>/dev/null || true)
  state=$(echo "$info" | sed -n 's/.*JobState=\([A-Z_]*\).*/\1/p')
  case "$state" in COMPLETED|FAILED|CANCELLED|TIMEOUT|NODE_FAIL|OUT_OF_MEMORY) break ;; esac
  if echo "$info" | grep -q 'Reason=DependencyNeverSatisfied'; then
    state="never started: a part failed (DependencyNeverSatisfied)"
    break
  fi
  sleep 1
done
[ "$state" = COMPLETED ] || { tail -n 20 ./*.log >&2 || true; fail "the assemble job ended ${state:-unknown, still waiting after 300 s}"; }

"$bin" render site.yaml --output "$work/one-machine" -q
folder=$(sed -n 's/^  folder: //p' site.yaml)
"$bin" verify "$folder" >/dev/null || fail "the assembled bag does not verify"
diff -r -x bag-info.txt -x tagmanifest-sha256.txt "$folder" one-machine >/dev/null \
  || fail "the assembled bag differs from a one-machine run"
[ ! -e "$folder.parts" ] || fail "the parts were not removed after assembling"
echo "one-node-cluster: ok — 3 array tasks and an assemble job on Slurm gave the one-machine bag ($(ls "$folder/data/frames" | wc -l) frame files)"
