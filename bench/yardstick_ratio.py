#!/usr/bin/python3
"""Times `paritas compute` (whole process) against the yardstick pipeline
(../shared/yardstick/pipeline_ref.py) in one run, interleaved, and prints medians and ratios.

usage: yardstick_ratio.py SURVEY_DIR PARITAS [PARITAS ...] [--yardstick DIR] [--runs 3]
                           [--with-report]

SURVEY_DIR holds a survey of the yardstick's gen_survey.py (prices.csv with a heading column,
expenditure.csv, regions.csv); a config.yaml naming them is written when missing. Each PARITAS
binary is timed as given (e.g. a build before and after a change), in an order that turns from
run to run. `compute` runs with `--no-report` unless --with-report is given: then it writes every
file it writes by default, report.html too. Figures only: the machine is shared, so compare ratios measured in the same run,
not absolute times between runs.
"""
import argparse, json, os, statistics, subprocess, sys


def timed(command, cwd=None):
    """Runs command under /usr/bin/time; returns wall s, CPU s (user + sys) and peak RSS MB."""
    out = subprocess.run(["/usr/bin/time", "-f", "%e %U %S %M"] + command, cwd=cwd, check=True,
                         stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True).stderr
    wall, user, system, kb = out.strip().splitlines()[-1].split()
    return float(wall), float(user) + float(system), int(kb) / 1024


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("survey")
    parser.add_argument("paritas", nargs="+")
    parser.add_argument("--yardstick", default=os.path.join(os.path.dirname(__file__), "..", "..",
                                                            "shared", "yardstick"))
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--with-report", action="store_true",
                        help="let compute write report.html too, as it does by default")
    args = parser.parse_args()
    survey = os.path.abspath(args.survey)
    config = os.path.join(survey, "config.yaml")
    if not os.path.exists(config):
        with open(config, "w") as f:
            f.write("survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                    "  regions: regions.csv\noutput: out\n")
    size_mb = os.path.getsize(os.path.join(survey, "prices.csv")) / 1e6
    jobs = {}
    for k, binary in enumerate(args.paritas):
        out = os.path.join(survey, f"out{k}")
        jobs[f"paritas[{k}]"] = [binary, "compute", config, "--output", out]
        if not args.with_report:
            jobs[f"paritas[{k}]"].append("--no-report")
    ref_out = os.path.join(survey, "yardstick_root.csv")
    jobs["yardstick"] = [sys.executable, os.path.join(args.yardstick, "pipeline_ref.py"), survey,
                         ref_out]
    times = {name: [] for name in jobs}
    stages = {name: [] for name in jobs}
    binaries = [name for name in jobs if name != "yardstick"]
    for run in range(args.runs):
        # The binaries' order turns every run, so that each follows the yardstick as often as
        # the others (the run straight after it has been a few hundredths of a second faster).
        order = (binaries if run % 2 == 0 else binaries[::-1]) + ["yardstick"]
        for name in order:
            command = jobs[name]
            times[name].append(timed(command, cwd=args.yardstick if name == "yardstick" else None))
            if name != "yardstick":
                record = json.load(open(os.path.join(command[4], "run.json")))
                stages[name].append(record["seconds"])
    peaks = {name: statistics.median(m for _, _, m in times[name]) for name in jobs}
    ref_wall = statistics.median(w for w, _, _ in times["yardstick"])
    print(f"survey {survey}: {size_mb:.0f} MB of prices, {args.runs} interleaved runs, medians; "
          f"compute {'with' if args.with_report else 'without'} report.html; "
          f"load average {os.getloadavg()[0]:.1f} at the end")
    for name, command in jobs.items():
        wall = statistics.median(w for w, _, _ in times[name])
        cpu = statistics.median(c for _, c, _ in times[name])
        walls = [w for w, _, _ in times[name]]
        line = (f"  {name:12s} wall {wall:6.2f} s ({min(walls):.2f}-{max(walls):.2f})  "
                f"CPU {cpu:6.2f} s  peak {peaks[name]:5.0f} MB  yardstick/this {ref_wall / wall:5.1f}x")
        if stages[name]:
            s = {key: statistics.median(r[key] for r in stages[name]) for key in stages[name][0]}
            total = sum(s.values())
            line += (f"  stages sum {total:.2f} s ({100 * total / wall:.0f} % of wall): " +
                     ", ".join(f"{key} {value:.2f}" for key, value in s.items()))
            line += f"  [{command[0]}]"
        print(line)


if __name__ == "__main__":
    main()
