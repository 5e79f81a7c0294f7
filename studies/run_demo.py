"""`make demo`: generate the invented demo data, run its study file through the tunelab CLI, see what it
decided, ship the model, write the report.

Each step is a plain `tunelab` command, printed before it runs, so the demo doubles as a tour.
"""

from __future__ import annotations

import json
import shlex
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
BIN = Path(sys.executable).parent


def tunelab(*args: str) -> int:
    command = [str(BIN / "tunelab"), *args]
    print(f"\n$ tunelab {' '.join(shlex.quote(a) for a in args)}", flush=True)
    return subprocess.call(command, cwd=HERE)


def main() -> int:
    spec = json.loads((HERE / "tool_library.study.json").read_text())
    subprocess.check_call([sys.executable, str(HERE / "make_demo.py"), "--out", str(HERE / spec["data"]),
                           "--seed", str(spec["seed"])])
    store = HERE / spec["store"]
    for suffix in ("", "-wal", "-shm"):
        Path(str(store) + suffix).unlink(missing_ok=True)
    code = tunelab("run", spec["data"], "--target", spec["target"], "--metric", spec["metric"],
                   "--budget", spec["budget"], "--seed", str(spec["seed"]), "--study", spec["study"],
                   "--store", spec["store"])
    if code != 0:
        return code
    for args in (("status", spec["study"]), ("importance", spec["study"]),
                 ("export", spec["study"], "--out", "demo-model.zip"),
                 ("predict", "demo-model.zip", spec["data"], "--out", "demo-predictions.csv"),
                 ("report", spec["study"], "--out", "demo-report.html")):
        needs_store = args[0] in ("status", "importance", "export", "report")
        code = tunelab(*args, "--store", spec["store"]) if needs_store else tunelab(*args)
        if code != 0:
            return code
    print("\nThe demo study lives in studies/demo.db; try `tunelab status --store studies/demo.db`,"
          " or open studies/demo-report.html in a browser.")
    return 0


if __name__ == "__main__":
    sys.exit(main())
