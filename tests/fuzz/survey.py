"""Long fuzzing runs in survey mode: chunks of libFuzzer runs with fresh
seeds, restarted after a crash or timeout, findings collected in one file.

    .venv/bin/python tests/fuzz/survey.py TOTAL [CHUNK] [FIRST_SEED]

Prints the number of inputs run (from libFuzzer's "Done N runs" lines, plus
the inputs counted by the harness in chunks that ended early) and writes
the log of each chunk next to the findings file.
"""

import os
import re
import subprocess
import sys

here = os.path.dirname(os.path.abspath(__file__))
out_dir = os.environ.get("GYROKIT_FUZZ_DIR", "/tmp/gyrokit-fuzz")
os.makedirs(out_dir, exist_ok=True)
total = int(sys.argv[1])
chunk = int(sys.argv[2]) if len(sys.argv) > 2 else 100_000
seed = int(sys.argv[3]) if len(sys.argv) > 3 else 1
done = 0
env = dict(os.environ, GYROKIT_FUZZ_FINDINGS=os.path.join(out_dir, "findings.jsonl"))
env.setdefault("RAYON_NUM_THREADS", "1")
while done < total:
    n = min(chunk, total - done)
    count_file = os.path.join(out_dir, f"count-{seed}")
    env["GYROKIT_FUZZ_COUNT"] = count_file
    log = os.path.join(out_dir, f"log-{seed}.txt")
    with open(log, "w") as f:
        rc = subprocess.call(
            [sys.executable, os.path.join(here, "fuzz_api.py"), "--survey", f"-runs={n}", f"-seed={seed}",
             "-max_len=64", "-timeout=20", "-print_final_stats=1", f"-artifact_prefix={out_dir}/"],
            stdout=f, stderr=subprocess.STDOUT, env=env, cwd=out_dir)
    text = open(log, errors="replace").read()
    m = re.search(r"Done (\d+) runs", text)
    if m:
        ran = int(m.group(1))
    else:  # ended early (crash, timeout): the harness's own count, to the last 1000
        ran = int(open(count_file).read().split()[0]) if os.path.exists(count_file) else 0
        print(f"seed {seed}: ended early (rc {rc}) after about {ran} inputs; see {log}", flush=True)
    done += ran
    print(f"seed {seed}: {ran} inputs, total {done}", flush=True)
    seed += 1
print(f"TOTAL {done}")
