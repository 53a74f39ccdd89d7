"""Driver for the fault tests of ``tests/cli/test_run_faults.py`` (run as a child process).

``python _fault_driver.py FOLDER N OUT SECONDS WORKERS [--force]`` writes a campaign of N
crystals (one tiny traverse each) into FOLDER and runs it into OUT with a per-crystal
function that sleeps SECONDS and returns a plain record, so a test can kill the run
at a known point. Each worker appends its pid to FOLDER/pids.txt when it starts a crystal.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))


def slow_process(task):
    from zoneprofile.campaign._pipeline import _base_record

    with open(os.environ["FAULT_PIDS"], "a") as fh:
        fh.write(f"{os.getpid()}\n")
    time.sleep(float(os.environ["FAULT_SECONDS"]))
    return _base_record(task)


def write_campaign(folder: Path, n: int) -> Path:
    (folder / "t.csv").write_text("Point,distance_um,SiO2,Al2O3,CaO,Na2O,K2O\n1,0,50,31,14,3.2,0.1\n")
    lines = ['seed = 1', '[defaults]', 'temperature_c = 1000', 'mineral = "plagioclase"', '[samples.A]']
    for i in range(n):
        lines += ['[[crystals]]', 'sample = "A"', f'id = "c{i:04d}"', 'traverse = "t.csv"']
    path = folder / "campaign.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def main(argv):
    folder, n, out, seconds, workers = Path(argv[0]), int(argv[1]), argv[2], argv[3], int(argv[4])
    os.environ["FAULT_SECONDS"] = seconds
    os.environ["FAULT_PIDS"] = str(folder / "pids.txt")
    path = folder / "campaign.toml"
    if not path.exists():
        write_campaign(folder, n)
    from _fault_driver import slow_process as process  # importable by name in the workers
    from zoneprofile._validation import InputError
    from zoneprofile.campaign import run_campaign

    try:
        summary = run_campaign(path, out, workers=workers, force="--force" in argv,
                               progress=bool(os.environ.get("FAULT_PROGRESS")),
                               process=process)
    except InputError as exc:
        sys.stderr.write(f"refused: {exc}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("interrupted\n")
        return 130
    sys.stderr.write(summary.line() + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
