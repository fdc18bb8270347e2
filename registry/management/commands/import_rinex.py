"""``python manage.py import_rinex FILE --mark CODE --as USERNAME [--method M] [--dry-run] [--json]``."""

from __future__ import annotations

import json
from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import CommandError

from registry.errors import RegistryError
from registry.management.common import HelpAsWrittenCommand, actor_by_username, read_input_file
from registry.models import OccupationMethod
from registry.services.rinex import occupation_from_rinex

HELP = """\
Record an occupation of a mark from a RINEX observation file (versions 2.11, 3.x, 4.x; plain or gzip):

  python manage.py import_rinex CRV0310.25o --mark CRV-031 --as USERNAME

The file's header fills in the session: start and end (converted to UTC), observer, receiver, antenna
and its vertical height (the header's antenna delta H), and notes with the marker name and number,
interval, satellite systems and observation types. The file is kept with the occupation, with its
SHA-256 checksum.

Refused, changing nothing: files that are not RINEX observation files, truncated headers,
Hatanaka-compressed (Compact RINEX) files (decompress them first), a last observation before the first,
an approximate position far from the mark's published position, a file already attached to the mark.

--dry-run checks everything and prints what would be recorded. --json prints the header and the
occupation as JSON.
"""


class Command(HelpAsWrittenCommand):
    help = HELP

    def add_arguments(self, parser):
        parser.add_argument("file", help="RINEX observation file (.rnx, .YYo, optionally .gz)")
        parser.add_argument("--mark", required=True, help="code of the mark that was occupied")
        parser.add_argument("--as", dest="username", required=True, help="user recording it (technician or manager)")
        parser.add_argument(
            "--method",
            choices=OccupationMethod.values,
            default=OccupationMethod.STATIC_GNSS,
            help="default static_gnss",
        )
        parser.add_argument("--dry-run", action="store_true", help="check and show, change nothing")
        parser.add_argument("--json", action="store_true", help="print the result as JSON")

    def handle(self, *args, **opts):
        path = Path(opts["file"])
        content = read_input_file(path)
        actor = actor_by_username(opts["username"])
        try:
            occupation, prefill = occupation_from_rinex(
                actor=actor,
                mark_code=opts["mark"],
                content=content,
                filename=path.name,
                data={"method": opts["method"]},
                dry_run=opts["dry_run"],
            )
        except ValidationError as exc:
            raise CommandError(f"{path.name}: " + " ".join(exc.messages)) from None
        except RegistryError as exc:
            raise CommandError(f"{path.name}: {exc.message}") from None
        if opts["json"]:
            out = prefill.as_dict()
            out["mark"] = opts["mark"]
            out["dry_run"] = opts["dry_run"]
            out["recorded"] = occupation is not None
            self.stdout.write(json.dumps(out, indent=2))
            return
        h, d = prefill.header, prefill.data
        lines = [
            f"{path.name}: RINEX {h.version} observation file{' (gzip)' if h.compressed else ''}, "
            f"sha256 {prefill.sha256[:12]}",
            f"  marker           {h.marker_name or '-'} (number {h.marker_number or '-'})",
            f"  session (UTC)    {d['start_utc']:%Y-%m-%d %H:%M:%S} to "
            + (f"{d['end_utc']:%Y-%m-%d %H:%M:%S}" if d["end_utc"] else "(not given)"),
            f"  receiver         {d['receiver'] or '-'}",
            f"  antenna          {d['antenna'] or '-'}, height {h.antenna_delta_h_m:.4f} m (vertical to the ARP)"
            if h.antenna_delta_h_m is not None
            else f"  antenna          {d['antenna'] or '-'}, height not given",
            f"  interval         {h.interval_s:g} s" if h.interval_s is not None else "  interval         not given",
            f"  systems          {h.systems_text() or '-'}",
        ]
        if prefill.offset_m is not None:
            lines.append(f"  approx. position {prefill.offset_m:.1f} m from the published position of {opts['mark']}")
        for warning in prefill.warnings:
            lines.append(f"  warning: {warning}")
        if occupation is None:
            lines.append("Dry run: nothing was recorded.")
        else:
            lines.append(f"Occupation recorded for {opts['mark']}; the file is kept with it.")
        self.stdout.write("\n".join(lines))
