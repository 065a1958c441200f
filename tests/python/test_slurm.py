"""The README's Slurm recipe on a real scheduler: a single-node Slurm
(Debian's slurm-wlm and munge, started here as root in a folder of their
own, on free ports the kernel picks), the README's job array submitted with sbatch,
waited for, the final index pass run, and the fleet compared byte for byte
with an unsharded run. Skipped only where the packages are not installed
(tests/run_all.sh installs them where it can)."""
import os
import re
import shutil
import socket
import subprocess
import time

import pytest

from conftest import BIN, ROOT
from test_fleet import same_tree

DAEMONS = ["sbatch", "sinfo", "scancel", "slurmctld", "slurmd", "munged"]
README = (ROOT / "README.md").read_text()
POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"


def recipe():
    """The README's two blocks between the slurm-recipe markers: the batch
    script and the commands that submit it and write the index."""
    part = README.split("<!-- slurm-recipe:begin -->")[1].split("<!-- slurm-recipe:end -->")[0]
    blocks = re.findall(r"```sh\n(.*?)```", part, re.S)
    assert len(blocks) == 2, "the recipe: a batch script, then the commands"
    return blocks


def free_ports(n):
    """`n` TCP ports nothing listens on now, chosen by the kernel, so two runs
    of this test on one machine (two checkouts' suites at once) do not both
    bind the same ports."""
    socks = [socket.socket() for _ in range(n)]
    try:
        for s in socks:
            s.bind(("", 0))
        return [s.getsockname()[1] for s in socks]
    finally:
        for s in socks:
            s.close()


def conf(d, cpus):
    """slurm.conf for one node, this machine; everything in `d`. The settings
    a single-node cluster needs without cgroups: processes tracked through
    /proc, no task plugin, no accounting; the daemons' ports free ones."""
    host = socket.gethostname()
    ctld_port, slurmd_port = free_ports(2)
    return f"""ClusterName=loadloom-test
SlurmctldHost={host}
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket={d}/munge.sock
CredType=cred/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
ReturnToService=2
SchedulerType=sched/builtin
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SlurmctldPort={ctld_port}
SlurmdPort={slurmd_port}
StateSaveLocation={d}/state
SlurmdSpoolDir={d}/spool
SlurmctldPidFile={d}/slurmctld.pid
SlurmdPidFile={d}/slurmd.pid
SlurmctldLogFile={d}/slurmctld.log
SlurmdLogFile={d}/slurmd.log
NodeName={host} CPUs={cpus} State=UNKNOWN
PartitionName=test Nodes=ALL Default=YES MaxTime=10 State=UP
"""


@pytest.fixture
def slurm(tmp_path):
    """A running single-node Slurm; its environment (SLURM_CONF). The three
    daemons run in the foreground as this test's children and are stopped
    (by their own process ids) afterwards."""
    missing = [d for d in DAEMONS if shutil.which(d) is None]
    if missing:
        pytest.skip(f"Slurm is not installed here ({', '.join(missing)} missing): "
                    "`apt-get install slurm-wlm munge` (tests/run_all.sh does it where it can)")
    if os.geteuid() != 0:
        pytest.skip("the single-node Slurm of this test runs its daemons as root")
    d = tmp_path / "slurm"
    for sub in ["state", "spool"]:
        (d / sub).mkdir(parents=True)
    d.chmod(0o700)
    (d / "munge.key").write_bytes(os.urandom(1024))
    (d / "munge.key").chmod(0o600)
    cpus = os.cpu_count() or 1
    (d / "slurm.conf").write_text(conf(d, cpus))
    env = dict(os.environ, SLURM_CONF=str(d / "slurm.conf"), PATH=f"{os.path.dirname(BIN)}:{os.environ['PATH']}")
    env = {k: v for k, v in env.items() if not k.startswith(("SLURM_ARRAY", "JOB_COMPLETION"))}
    log = open(d / "daemons.log", "w")
    started = []
    try:
        munge = [f"--socket={d}/munge.sock", f"--key-file={d}/munge.key", f"--log-file={d}/munged.log",
                 f"--pid-file={d}/munged.pid", f"--seed-file={d}/munged.seed"]
        started.append(subprocess.Popen(["munged", "-F", "--force", *munge], stdout=log, stderr=log))
        until(lambda: (d / "munge.sock").exists(), 10, "munged did not create its socket", d)
        started.append(subprocess.Popen(["slurmctld", "-D", "-c"], env=env, stdout=log, stderr=log))
        started.append(subprocess.Popen(["slurmd", "-D"], env=env, stdout=log, stderr=log))
        idle = lambda: "idle" in subprocess.run(["sinfo", "-h", "-o", "%t"], env=env, capture_output=True, text=True).stdout
        until(idle, 30, "the node did not become idle", d)
        yield env
    finally:
        for p in reversed(started):
            p.terminate()
            try:
                p.wait(timeout=10)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        log.close()


def until(ready, seconds, message, d):
    t = time.time()
    while not ready():
        if time.time() - t > seconds:
            logs = "\n".join(f"--- {f.name}\n{f.read_text()[-1500:]}" for f in sorted(d.glob("*.log")))
            raise AssertionError(f"{message} within {seconds} s\n{logs}")
        time.sleep(0.1)


def test_the_readme_slurm_recipe_on_a_real_scheduler(slurm, tmp_path):
    script, commands = recipe()
    homes, tasks = 8, 4
    work = tmp_path / "work"
    work.mkdir()
    (work / "street.toml").write_text(POP.read_text().replace('length = "1 d"', 'length = "2 h"'))
    # The README's script and commands with a smaller fleet and array, the
    # shared folder inside this test's own.
    small = lambda text: text.replace("--homes 10000", f"--homes {homes}").replace("/shared/street", str(work / "street"))
    script = small(script).replace("--array=0-15", f"--array=0-{tasks - 1}")
    if (os.cpu_count() or 1) < 2:
        script = script.replace("--cpus-per-task=2", "--cpus-per-task=1")
    (work / "street.sbatch").write_text(script)
    t = time.time()
    try:
        p = subprocess.run(["sh", "-c", small(commands)], cwd=work, env=slurm, capture_output=True, text=True, timeout=180)
    except subprocess.TimeoutExpired:
        subprocess.run(["scancel", "--name", "street.sbatch"], env=slurm)
        raise
    assert p.returncode == 0, p.stdout + p.stderr
    print(f"sbatch --wait and the index pass: {time.time() - t:.1f} s")
    # Each array task made its shard, and said so in its own output file.
    logs = sorted(work.glob("slurm-*_*.out"))
    assert len(logs) == tasks
    said = sorted(re.search(r"shard (\d+)/(\d+)", f.read_text()).groups() for f in logs)
    assert said == [(str(i), str(tasks)) for i in range(tasks)], said
    assert not any("\x1b" in f.read_text() or "\r" in f.read_text() for f in logs), "no progress lines in a scheduler's output"
    assert "made 0 homes, 8 already complete" in p.stdout, p.stdout
    # The same population path as the recipe's (fleet.json records it).
    whole = subprocess.run([BIN, "fleet", "street.toml", "--homes", str(homes), "--out", tmp_path / "whole"], cwd=work, capture_output=True, text=True)
    assert whole.returncode == 0, whole.stderr
    files = same_tree(tmp_path / "whole", work / "street")
    assert "homes.parquet" in files and f"meters/home=h{homes - 1:05}/meters.parquet" in files
