"""The network's combined chart: the plane from 0 to 360 deg, each station's minutes per bin.

Drawn from a ``hiplan.network/1`` summary (``cli/network.py``): one panel with stacked bars
per wanted bin (the logs in grey, then each station in its Okabe-Ito colour), the target
depth dashed, and a strip under it marking the bins at target with the network plan and with
each station planning alone. Longitude increases to the left, as on the sky. No pyplot.
"""
from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .plots import OKABE_ITO

# Station colours in order (Okabe-Ito, the target's vermillion and black kept apart).
STATION_COLOURS = ("blue", "orange", "green", "purple", "sky_blue", "yellow")
_LOG_GREY = "#B0B0B0"


def station_colour(k: int) -> str:
    return OKABE_ITO[STATION_COLOURS[k % len(STATION_COLOURS)]]


def network_chart(summary: dict) -> Figure:
    """Stacked minutes per wanted bin by station, the target, and where each plan reaches it."""
    bins = summary["bins"]
    width = float(summary["bin_width_deg"])
    target = float(summary["target_minutes"])
    l_deg = np.array([b["l_bin"] for b in bins]) + 0.5 * width
    logged = np.array([b["logged_min"] for b in bins])
    by_station = np.array([b["by_station_min"] for b in bins]).reshape(len(bins), -1).T
    fig = Figure(figsize=(13.0, 6.0), layout="constrained")
    ax, strip = fig.subplots(2, 1, sharex=True, height_ratios=(5, 1))
    # One step outline per layer over all bins (zero outside the wanted ones): a few artists
    # instead of a bar per bin and station, which matters for networks of many stations.
    n_all = int(round(360.0 / width))
    edges = np.arange(n_all + 1) * width
    index = np.round((l_deg - 0.5 * width) / width).astype(int) % n_all

    def full(values):
        out = np.zeros(n_all)
        out[index] = values
        return out

    bottom = full(logged)
    ax.stairs(bottom, edges, fill=True, color=_LOG_GREY, label="already logged", gid="logged")
    for k, (station, minutes) in enumerate(zip(summary["stations"], by_station)):
        top = bottom + full(minutes)
        ax.stairs(top, edges, baseline=bottom, fill=True, color=station_colour(k),
                  label=f"{station['name']} ({station['done_bins_contributed']} bins helped, "
                        f"{station['moves']} moves)", gid=f"station-{k}")
        bottom = top
    ax.axhline(target, color=OKABE_ITO["vermillion"], ls="--", lw=1.5,
               label=f"target depth ({target:g} min)")
    ax.set_ylabel("Integration depth (min)")
    ax.set_ylim(0.0, 1.1 * max(float(bottom.max()) if bottom.size else 0.0, target))
    ax.grid(True, axis="y", color="0.85", lw=0.5)
    ax.set_axisbelow(True)
    after = np.array([b["after_min"] >= target - 1e-9 for b in bins])
    alone = np.array([b["alone_min"] >= target - 1e-9 for b in bins])
    for row, (mask, label, colour) in enumerate(((after, "network plan", OKABE_ITO["black"]),
                                                 (alone, "each alone", _LOG_GREY))):
        strip.bar(l_deg[mask], 0.7, width=width, bottom=row + 0.15, color=colour, lw=0,
                  gid=f"at-target-{row}")
    strip.set_yticks([0.5, 1.5], ["network plan", "each alone"], fontsize=8)
    strip.set_ylim(0.0, 2.0)
    strip.set_xlim(360.0, 0.0)
    strip.set_xticks(np.arange(0, 361, 30))
    strip.set_xlabel("Galactic longitude l (deg, increasing to the left); strip: bins at target")
    ax.set_title(f"Network of {len(summary['stations'])} stations — wanted bins at target: "
                 f"{summary['done_after']} together, {summary['done_alone']} each planning alone "
                 f"(bound {summary['upper_bound']}, of {summary['wanted_bins']})")
    fig.legend(loc="outside lower center", ncols=3, fontsize=9)
    return fig
