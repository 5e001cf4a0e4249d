"""``hiplan sites``: the site files hiplan can find."""
from __future__ import annotations


from .common import add_output, check_outputs, emit

NAME = "sites"
HELP = "list the site files hiplan can find"


def add_arguments(p) -> None:
    add_output(p, formats=("table", "json"))


def run(args, console) -> int:
    from ..report import to_json
    from ..site import available_sites, load_site
    from rich.table import Table
    check_outputs(args, args.output, inputs=[("site file", p) for p in available_sites().values()])
    rows = []
    for stem, path in available_sites().items():
        site = load_site(str(path))
        rows.append({"id": stem, "path": str(path), **site.summary()})
    if args.format == "json":
        emit(args, console, to_json({"schema": "hiplan.sites/1", "sites": rows}))
        return 0
    table = Table(title="Sites")
    for col in ("id", "name", "latitude_deg", "longitude_deg", "timezone", "mount", "diameter_m"):
        table.add_column(col)
    for r in rows:
        table.add_row(*(str(r[c]) for c in ("id", "name", "latitude_deg", "longitude_deg",
                                             "timezone", "mount", "diameter_m")))
    emit(args, console, None, table)
    return 0


