"""Start-up time of `heatsight --version` and `heatsight --help` against the cost of loading
the numerical stack as the command line did before its parser became lazy (importing every
command module).  Prints the medians of REPEAT runs and their ratio; not run by pytest."""

import statistics
import subprocess
import sys
import time

REPEAT = 5
RUNS = {
    "--version": [sys.executable, "-m", "heatsight", "--version"],
    "--help": [sys.executable, "-m", "heatsight", "--help"],
    "fit --help": [sys.executable, "-m", "heatsight", "fit", "--help"],
    "trend --help": [sys.executable, "-m", "heatsight", "trend", "--help"],
    "before: import every command": [sys.executable, "-c", "import heatsight.data_io.api, heatsight.data_io.cli, "
                                     "heatsight.data_io.trend_command, heatsight.data_io.fit_command"],
}


def median_time(argv) -> float:
    times = []
    for _ in range(REPEAT):
        t0 = time.perf_counter()
        subprocess.run(argv, capture_output=True, check=True)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    results = {name: median_time(argv) for name, argv in RUNS.items()}
    before = results.pop("before: import every command")
    print(f"before (every command module imported): {before:.2f} s")
    for name, t in results.items():
        print(f"heatsight {name:<14} {t:.2f} s   ratio to before {t / before:.2f}")


if __name__ == "__main__":
    main()
