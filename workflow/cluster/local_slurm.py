"""Run the workflow through a real SLURM cluster on this machine, and check it.

Installs Debian's slurm-wlm, slurmdbd, munge and mariadb-server when missing,
starts a one-node cluster on loopback with accounting (the Snakemake SLURM
executor polls sacct), registers a cluster, an account and a user with
sacctmgr, runs the workflow on a small library through
snakemake-executor-plugin-slurm with the project's SLURM profile (account and
partition filled in), runs the same library locally, and compares the two
rankings. Needs root (it configures system services). Run from the
repository root:

    python workflow/cluster/local_slurm.py [--workdir /tmp/dienes-slurm] [--keep-running]

Every command is run from an argument list: no shell sees any string.
"""

from __future__ import annotations

import argparse
import csv
import getpass
import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import yaml

REPO = Path(__file__).resolve().parents[2]
CLUSTER, ACCOUNT, PARTITION = "dienes-local", "dienes", "local"
PACKAGES = ["slurm-wlm", "slurmdbd", "munge", "mariadb-server"]
DB_USER, DB_PASS, DB_NAME = "slurm", "dienes-local-db", "slurm_acct_db"
LIBRARY = [("S-1", "C=CC=C"), ("S-2", "C1=CCC=C1"), ("S-3", "C=CC(C)=C"), ("S-4", "c1ccoc1"),
           ("S-5", "C1=CC=C")]
REFERENCE_IDS = {"ref-01", "ref-02", "ref-03", "ref-04", "ref-05", "ref-09"}


def run(cmd, check=True, **kw):
    print("+", " ".join(map(str, cmd)), flush=True)
    return subprocess.run([str(c) for c in cmd], check=check, **kw)


def install():
    missing = [p for p in PACKAGES
               if subprocess.run(["dpkg", "-s", p], capture_output=True).returncode != 0]
    if missing:
        env = dict(os.environ, DEBIAN_FRONTEND="noninteractive")
        run(["apt-get", "update", "-qq"], env=env)
        run(["apt-get", "install", "-y", "-qq", *missing], env=env)
    try:
        import snakemake_executor_plugin_slurm  # noqa: F401
    except ImportError:
        run([sys.executable, "-m", "pip", "install", "--quiet", "snakemake-executor-plugin-slurm"])


def wait_for(cmd, what: str, timeout_s: float = 60.0):
    t0 = time.time()
    while time.time() - t0 < timeout_s:
        if subprocess.run(cmd, capture_output=True).returncode == 0:
            return
        time.sleep(1.0)
    raise RuntimeError(f"{what} did not come up within {timeout_s:.0f} s")


def start_services(state: Path):
    user = getpass.getuser()
    host = socket.gethostname().split(".")[0]
    cpus = os.cpu_count() or 1
    mem_mb = int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2 ** 20 * 0.8)
    for d in ("/etc/slurm", "/var/spool/slurmctld", "/var/spool/slurmd", "/var/log/slurm", "/run/munge",
              "/var/run/mysqld"):
        Path(d).mkdir(parents=True, exist_ok=True)
    # munge: a key, then the daemon
    key = Path("/etc/munge/munge.key")
    if not key.is_file():
        key.parent.mkdir(parents=True, exist_ok=True)
        key.write_bytes(os.urandom(1024))
    shutil.chown(key, "munge", "munge")
    key.chmod(0o400)
    for d in ("/run/munge", "/var/lib/munge", "/var/log/munge"):
        Path(d).mkdir(parents=True, exist_ok=True)
        shutil.chown(d, "munge", "munge")
    if subprocess.run(["munge", "-n"], capture_output=True).returncode != 0:
        run(["runuser", "-u", "munge", "--", "/usr/sbin/munged"])
    wait_for(["munge", "-n"], "munged")
    # mariadb for the accounting database
    shutil.chown("/var/run/mysqld", "mysql", "mysql")
    if subprocess.run(["mysqladmin", "ping"], capture_output=True).returncode != 0:
        subprocess.Popen(["/usr/bin/mysqld_safe", "--bind-address=127.0.0.1"],
                         stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    wait_for(["mysqladmin", "ping"], "mariadb")
    sql = (f"CREATE DATABASE IF NOT EXISTS {DB_NAME}; "
           f"CREATE USER IF NOT EXISTS '{DB_USER}'@'localhost' IDENTIFIED BY '{DB_PASS}'; "
           f"GRANT ALL ON {DB_NAME}.* TO '{DB_USER}'@'localhost'; FLUSH PRIVILEGES;")
    run(["mysql", "-e", sql])
    Path("/etc/slurm/slurmdbd.conf").write_text(
        f"AuthType=auth/munge\nDbdHost=localhost\nDbdAddr=127.0.0.1\nSlurmUser={user}\n"
        "LogFile=/var/log/slurm/slurmdbd.log\nPidFile=/run/slurmdbd.pid\n"
        f"StorageType=accounting_storage/mysql\nStorageHost=localhost\nStorageUser={DB_USER}\n"
        f"StoragePass={DB_PASS}\nStorageLoc={DB_NAME}\n")
    Path("/etc/slurm/slurmdbd.conf").chmod(0o600)
    Path("/etc/slurm/slurm.conf").write_text(
        f"ClusterName={CLUSTER}\nSlurmctldHost={host}(127.0.0.1)\nSlurmUser={user}\nSlurmdUser=root\n"
        "AuthType=auth/munge\nStateSaveLocation=/var/spool/slurmctld\nSlurmdSpoolDir=/var/spool/slurmd\n"
        "SlurmctldLogFile=/var/log/slurm/slurmctld.log\nSlurmdLogFile=/var/log/slurm/slurmd.log\n"
        "SlurmctldPidFile=/run/slurmctld.pid\nSlurmdPidFile=/run/slurmd.pid\n"
        "ProctrackType=proctrack/linuxproc\nTaskPlugin=task/none\nMpiDefault=none\n"
        "ReturnToService=2\nSchedulerType=sched/backfill\nSelectType=select/cons_tres\n"
        "SelectTypeParameters=CR_Core_Memory\n"
        "AccountingStorageType=accounting_storage/slurmdbd\nAccountingStorageHost=localhost\n"
        "AccountingStorageEnforce=associations\nJobAcctGatherType=jobacct_gather/linux\n"
        "JobCompType=jobcomp/none\nMinJobAge=600\n"
        f"NodeName={host} NodeAddr=127.0.0.1 CPUs={cpus} RealMemory={mem_mb} State=UNKNOWN\n"
        f"PartitionName={PARTITION} Nodes={host} Default=YES MaxTime=INFINITE State=UP\n")
    if subprocess.run(["sacctmgr", "-n", "list", "cluster"], capture_output=True).returncode != 0:
        run(["/usr/sbin/slurmdbd"])
    wait_for(["sacctmgr", "-n", "list", "cluster"], "slurmdbd")
    run(["sacctmgr", "-i", "add", "cluster", CLUSTER], check=False)
    run(["sacctmgr", "-i", "add", "account", ACCOUNT, f"Cluster={CLUSTER}", "Description=dienes",
         "Organization=dienes"], check=False)
    run(["sacctmgr", "-i", "add", "user", user, f"Account={ACCOUNT}", f"Cluster={CLUSTER}"], check=False)
    if subprocess.run(["scontrol", "ping"], capture_output=True, text=True).stdout.count("UP") == 0:
        run(["/usr/sbin/slurmctld"])
    wait_for(["scontrol", "ping"], "slurmctld")
    if subprocess.run(["pgrep", "-x", "slurmd"], capture_output=True).returncode != 0:
        run(["/usr/sbin/slurmd"])
    t0 = time.time()
    while time.time() - t0 < 60:
        out = subprocess.run(["sinfo", "-h", "-o", "%t"], capture_output=True, text=True).stdout
        if "idle" in out or "mix" in out:
            break
        run(["scontrol", "update", f"NodeName={host}", "State=RESUME"], check=False, capture_output=True)
        time.sleep(2)
    run(["sinfo"])


def stop_services():
    for name in ("slurmd", "slurmctld", "slurmdbd"):
        subprocess.run(["pkill", "-x", name])
    subprocess.run(["mysqladmin", "shutdown"], capture_output=True)
    subprocess.run(["pkill", "-x", "munged"])


def setup_workdir(workdir: Path):
    (workdir / "config").mkdir(parents=True, exist_ok=True)
    with open(REPO / "config" / "reference_rates.csv") as fh:
        rows = [r for r in csv.DictReader(fh) if r["id"] in REFERENCE_IDS]
    with open(workdir / "config" / "reference.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    with open(workdir / "library.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        w.writerows(LIBRARY)
    cfg = yaml.safe_load((REPO / "config" / "config.yaml").read_text())
    cfg.update(library="library.csv", reference="config/reference.csv")
    cfg["conformers"].update(n_conformers=4, xtb_per_family=1, planar_starts=1)
    (workdir / "config" / "config.yaml").write_text(yaml.safe_dump(cfg))


def slurm_profile(workdir: Path) -> Path:
    """The project's SLURM profile with this cluster's account and partition."""
    prof = yaml.safe_load((REPO / "workflow" / "profiles" / "slurm" / "config.yaml").read_text())
    prof["default-resources"].update(slurm_account=ACCOUNT, slurm_partition=PARTITION)
    prof["jobs"] = 4
    out = workdir / "profile"
    out.mkdir(exist_ok=True)
    (out / "config.yaml").write_text(yaml.safe_dump(prof))
    return out


def snakemake(workdir: Path, *extra) -> float:
    env = dict(os.environ, OMP_NUM_THREADS="1")
    t0 = time.time()
    run([sys.executable, "-m", "snakemake", "--snakefile", REPO / "Snakefile", "--directory", workdir, *extra],
        env=env)
    return time.time() - t0


def compare(a: Path, b: Path) -> list[str]:
    """Differences between two ranking.csv files ('' columns that legitimately differ aside)."""
    with open(a) as fa, open(b) as fb:
        ra, rb = list(csv.DictReader(fa)), list(csv.DictReader(fb))
    diffs = []
    if len(ra) != len(rb):
        return [f"row counts differ: {len(ra)} vs {len(rb)}"]
    for x, y in zip(ra, rb):
        for col in x:
            if x[col] != y.get(col):
                diffs.append(f"row {x['id']} column {col}: {x[col]!r} vs {y.get(col)!r}")
    return diffs


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--workdir", default="/tmp/dienes-slurm", help="where the two runs go")
    ap.add_argument("--keep-running", action="store_true", help="leave the cluster up afterwards")
    args = ap.parse_args()
    if os.geteuid() != 0:
        sys.exit("local_slurm.py configures system services: run it as root")
    base = Path(args.workdir)
    shutil.rmtree(base, ignore_errors=True)
    install()
    start_services(base)
    try:
        cluster_dir, local_dir = base / "cluster", base / "local"
        for d in (cluster_dir, local_dir):
            setup_workdir(d)
        t_cluster = snakemake(cluster_dir, "--workflow-profile", slurm_profile(cluster_dir))
        t_local = snakemake(local_dir, "--cores", "2")
        jobs = subprocess.run(["sacct", "-n", "-X", "-o", "JobID,JobName%30,State", "--starttime", "now-1hour"],
                              capture_output=True, text=True).stdout
        print(jobs)
        n_done = sum(1 for line in jobs.splitlines() if "COMPLETED" in line)
        diffs = compare(cluster_dir / "results" / "ranking.csv", local_dir / "results" / "ranking.csv")
        print(f"SLURM run: {t_cluster:.0f} s, {n_done} jobs COMPLETED in sacct; local run: {t_local:.0f} s")
        if diffs:
            print("rankings differ:\n  " + "\n  ".join(diffs[:20]))
            sys.exit(1)
        print("rankings identical (every cell of ranking.csv)")
    finally:
        if not args.keep_running:
            stop_services()


if __name__ == "__main__":
    main()
