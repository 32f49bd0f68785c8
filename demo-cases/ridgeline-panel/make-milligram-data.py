#!/usr/bin/env python3
"""Makes the INVENTED milligram-scale data of the Ridgeline demo (see README.md): TGA at 5, 10
and 20 K/min and MCC at 60 K/min of material-true.toml, simulated by `emberfit simulate` (the
0-D model) and given seeded Gaussian noise. Run from the repository root after
`cargo build --release`:

    python3 demo-cases/ridgeline-panel/make-milligram-data.py
"""
import csv
import os
import random
import subprocess
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
EMBERFIT = os.path.join(HERE, "..", "..", "target", "release", "emberfit")

# (file, heating rate K/min, end K, column name, unit, noise standard deviation, seed)
RUNS = [
    ("tga-5k.csv", 5.0, 800.0, "mass", "%", 0.05, 5),
    ("tga-10k.csv", 10.0, 800.0, "mass", "%", 0.05, 10),
    ("tga-20k.csv", 20.0, 800.0, "mass", "%", 0.05, 20),
    ("mcc-60k.csv", 60.0, 900.0, "HRR", "W/g", 3.0, 60),
]

for name, rate_k_min, end_k, column, unit, noise, seed in RUNS:
    with tempfile.TemporaryDirectory() as tmp:
        scenario = os.path.join(tmp, "scenario.toml")
        curves = os.path.join(tmp, "curves.csv")
        with open(scenario, "w") as f:
            f.write(
                f'title = "invented {name}"\n'
                f'material = "{os.path.join(HERE, "material-true.toml")}"\n'
                f"output_interval_s = {30.0 / rate_k_min}\n\n"
                "[programme]\nstart_k = 300.0\n\n"
                f"[[programme.step]]\nramp_k_min = {rate_k_min}\nto_k = {end_k}\n"
            )
        subprocess.run([EMBERFIT, "simulate", scenario, "--out", curves], check=True,
                       stdout=subprocess.DEVNULL)
        with open(curves) as f:
            rows = list(csv.DictReader(f))
    rng = random.Random(seed)
    with open(os.path.join(HERE, name), "w", newline="") as f:
        out = csv.writer(f)
        out.writerow(["time", "Temp", column])
        out.writerow(["[s]", "[K]", f"[{unit}]"])
        for row in rows:
            if column == "mass":
                value = 100.0 * float(row["mass_fraction"])
            else:
                value = float(row["mcc_w_g"])
            value += rng.gauss(0.0, noise)
            out.writerow([row["time_s"], row["temperature_k"], f"{value:.4f}"])
