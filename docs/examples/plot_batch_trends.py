#!/usr/bin/env python3
"""Trends of a streakwright batch as a PDF for papers and logbooks.

Loads the results of a batch output folder -- its summary.csv (written by `streakwright batch`
and `streakwright summarize`), or, when there is none, every result.json below it -- and plots
per scan, with 1-sigma error bars where the run gave an uncertainty (--bootstrap > 0):

  * the XUV pulse duration (FWHM, as) of the streaking retrievals,
  * the group-delay dispersion (GDD, as^2) of the streaking retrievals,
  * the RABBITT attochirp (as/eV) of the RABBITT analyses.

Scans are placed by acquisition time when every plotted scan has one (the sidecars'
`acquired`), else in summary order with their names as labels. Results whose quality checks
failed (trusted = false) are drawn as open markers; failed scans are left out.

Usage:
  python3 plot_batch_trends.py BATCH_DIR [--out trends.pdf] [--title TEXT]

Needs matplotlib (Debian: apt-get install python3-matplotlib; run it with /usr/bin/python3).
"""

import argparse
import csv
import json
import math
import os
import sys
from datetime import datetime

import matplotlib

matplotlib.use("Agg")  # files only, no display needed
import matplotlib.pyplot as plt  # noqa: E402

# (summary column, sigma column, axis label, result.json section and key)
QUANTITIES = [
    ("fwhm_as", "fwhm_as_sigma", "XUV FWHM (as)", ("xuv", "fwhm_as")),
    ("gdd_as2", "gdd_as2_sigma", "GDD (as$^2$)", ("xuv", "gdd_as2")),
    ("attochirp_as_per_eV", "attochirp_as_per_eV_sigma", "attochirp (as/eV)",
     ("rabbitt", "attochirp_as_per_eV")),
]


def number(text):
    """A CSV cell as a float; None for an empty cell or a non-finite value."""
    if text is None or text == "":
        return None
    try:
        v = float(text)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


def rows_from_summary(path):
    with open(path, newline="", encoding="utf-8") as f:
        return [r for r in csv.DictReader(f)]


def rows_from_results(folder):
    """One row per result.json below `folder`, named after its folder (as summarize does)."""
    rows = []
    for root, _dirs, files in sorted(os.walk(folder)):
        if "result.json" not in files:
            continue
        with open(os.path.join(root, "result.json"), encoding="utf-8") as f:
            res = json.load(f)
        row = {"scan": os.path.relpath(root, folder), "status": "ok"}
        for col, sig, _label, (section, key) in QUANTITIES:
            sec = res.get(section) or {}
            row[col] = sec.get(key)
            row[sig] = sec.get(key + "_sigma")
        quality = res.get("quality") or {}
        row["trusted"] = "false" if quality.get("trusted") is False else "true"
        batch = res.get("batch")
        row["acquired"] = batch.get("acquired", "") if isinstance(batch, dict) else ""
        rows.append(row)
    return rows


def load_rows(folder):
    summary = os.path.join(folder, "summary.csv")
    if os.path.isfile(summary):
        return rows_from_summary(summary), summary
    rows = rows_from_results(folder)
    if not rows:
        sys.exit(f"plot_batch_trends: no summary.csv and no result.json below '{folder}'")
    return rows, f"{len(rows)} result.json file(s) below {folder}"


def acquisition_time(text):
    if not text:
        return None
    try:
        return datetime.fromisoformat(str(text).replace("Z", "+00:00"))
    except ValueError:
        return None


def plot(rows, out, title):
    ok = [r for r in rows if r.get("status", "ok") == "ok"]
    times = [acquisition_time(r.get("acquired")) for r in ok]
    by_time = bool(ok) and all(t is not None for t in times)
    fig, axes = plt.subplots(len(QUANTITIES), 1, figsize=(7.0, 8.5), sharex=True)
    plotted = {}
    for ax, (col, sig, label, _src) in zip(axes, QUANTITIES):
        xs, ys, es, trusted = [], [], [], []
        for i, r in enumerate(ok):
            y = number(r.get(col))
            if y is None:
                continue
            xs.append(times[i] if by_time else i)
            ys.append(y)
            e = number(r.get(sig))
            es.append(e if e is not None else 0.0)
            trusted.append(str(r.get("trusted", "true")).lower() != "false")
        plotted[col] = len(ys)
        if not ys:
            ax.text(0.5, 0.5, "no scan has this value", transform=ax.transAxes,
                    ha="center", va="center", color="0.45")
        for keep, face in ((True, "C0"), (False, "none")):
            sel = [k for k in range(len(ys)) if trusted[k] == keep]
            if not sel:
                continue
            ax.errorbar([xs[k] for k in sel], [ys[k] for k in sel], yerr=[es[k] for k in sel],
                        fmt="o", color="C0", mfc=face, capsize=3, lw=1,
                        label="trusted" if keep else "not trusted (quality checks failed)")
        if any(not t for t in trusted):
            ax.legend(fontsize=8, loc="best")
        ax.set_ylabel(label)
        ax.grid(True, color="0.9")
    if by_time:
        axes[-1].set_xlabel("acquisition time (UTC)")
        fig.autofmt_xdate()
    else:
        axes[-1].set_xlabel("scan")
        axes[-1].set_xticks(range(len(ok)))
        axes[-1].set_xticklabels([r.get("scan", str(i)) for i, r in enumerate(ok)],
                                 rotation=45, ha="right", fontsize=8)
    axes[0].set_title(title)
    fig.tight_layout()
    fig.savefig(out, format="pdf", metadata={"Title": title, "Creator": "streakwright example"})
    plt.close(fig)
    return len(ok), plotted


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("batch_dir", help="batch output folder (summary.csv or result.json files)")
    p.add_argument("--out", default="trends.pdf", help="PDF to write (default: trends.pdf)")
    p.add_argument("--title", default=None, help="figure title (default: the folder's name)")
    a = p.parse_args(argv)
    if not os.path.isdir(a.batch_dir):
        sys.exit(f"plot_batch_trends: '{a.batch_dir}' is not a folder")
    rows, source = load_rows(a.batch_dir)
    title = a.title or "streakwright batch: " + os.path.basename(os.path.abspath(a.batch_dir))
    n, plotted = plot(rows, a.out, title)
    counts = ", ".join(f"{k} {v}" for k, v in plotted.items())
    print(f"plot_batch_trends: {n} ok scan(s) from {source}; points: {counts}; wrote {a.out}")


if __name__ == "__main__":
    main()
