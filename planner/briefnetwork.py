"""What a station's brief says about its network: what this station does and what the others
cover (``doc["network"]``, written by ``hiplan network``). Builds on ``planner.briefcontent``."""
from __future__ import annotations

from .briefcontent import DRIFT_SECTIONS, Bullets, Paragraph, Section, _bin_ranges, _text


def network_section(doc: dict) -> Section | None:
    """"The network": this station's share and what each other station covers, else None."""
    net = doc.get("network")
    if not isinstance(net, dict):
        return None
    width = (doc.get("settings") or {}).get("bin_width_deg", 1.0)
    mine = net.get("this_station_bins") or []
    lead = (f"This plan is one of {net.get('stations')} stations planned together: between "
            f"them {net.get('done_after')} of {net.get('wanted_bins')} wanted bins reach the "
            f"target depth ({net.get('done_alone')} if each station planned alone; no joint "
            f"plan reaches more than {net.get('upper_bound')}). Your minutes count toward "
            f"{len(mine)} of those bins" + (f": {_bin_ranges(mine, width)}." if mine else "."))
    items = []
    for other in net.get("others") or ():
        bins = other.get("bins_contributed") or []
        items.append((f"{_text(other.get('name'))}:",
                      (f"helps {len(bins)} bins at target ({_bin_ranges(bins, width)}), "
                       if bins else "helps no bin at target, ")
                      + f"{other.get('minutes', 0):.0f} min on wanted bins, "
                        f"{other.get('moves')} moves."))
    return Section("network", "The network: what the other stations cover",
                   (Paragraph(lead), Bullets(tuple(items)),
                    Paragraph("Keep to your own plan even where another station covers the same "
                              "longitudes: the depth counts everyone's minutes.", "note")))


DRIFT_SECTIONS.insert(3, network_section)  # after the site and the settings
