"""Load a season of soil-moisture probe readings (CSV exported from the logger, invented)."""
import csv

import torch


def load_season(path):
    days, temp, probe, reading = [], [], [], []
    with open(path) as fh:
        for row in csv.DictReader(fh):
            days.append(float(row["day"]))
            temp.append(float(row["soil_temp_c"]))
            probe.append(int(row["probe_id"]))
            reading.append(float(row["vwc"]))
    return (torch.tensor(days), torch.tensor(temp),
            torch.tensor(probe), torch.tensor(reading))
