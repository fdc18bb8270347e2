#!/bin/sh
# PostgreSQL archive_command for point-in-time recovery: copy one finished WAL segment into the archive.
#
#   archive_command = '/srv/registry/app/deploy/wal_archive.sh %p %f /srv/registry/backups/wal'
#
# (postgresql.conf, with archive_mode = on; see deploy/README.md "Point-in-time recovery".) Runs as the
# database server's user, which must be able to write the archive folder. The segment is written under a
# temporary name, flushed to disk, then renamed, so the archive never holds half a segment. If a segment of
# that name is already there (PostgreSQL retries after a crash) the command succeeds only when the bytes are
# the same; a different file of the same name is refused and PostgreSQL keeps the segment and retries, so
# nothing is overwritten. Exit 0 only when the segment is safely in the archive.
set -eu
if [ "$#" -ne 3 ]; then
  echo "usage: wal_archive.sh %p %f ARCHIVE_DIR" >&2
  exit 2
fi
src="$1"
name="$2"
dir="$3"
dest="$dir/$name"
if [ -f "$dest" ]; then
  if cmp -s "$src" "$dest"; then
    exit 0
  fi
  echo "wal_archive: $dest already exists with other content; not overwriting" >&2
  exit 1
fi
tmp="$dir/.$name.partial.$$"
cp "$src" "$tmp"
sync "$tmp" 2>/dev/null || sync
mv "$tmp" "$dest"
sync "$dir" 2>/dev/null || true
