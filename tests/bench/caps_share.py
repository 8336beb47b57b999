#!/usr/bin/env python3
"""Share of capped commits per history (issue 11, item 6), read from the
shards that fixtures/corpus/build.sh writes under $OMEN_CORPUS_WORK/shards.

Reads only each shard's header and index (layout: src/features/shard.c):
samples n (u64 at 16), index offset (u64 at 24), the caps (4 x u32 at 32);
index entries of 88 bytes whose u32 at byte 24 holds label, fix flag and
capped flag (bits 16-23). The index CRC is not checked here: this is a
measuring aid, never a reader of untrusted files.

usage: caps_share.py <shard dir>
"""
import glob
import os
import struct
import sys

IDX = 88


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: caps_share.py <shard dir>")
    total = capped = 0
    caps = None
    for path in sorted(glob.glob(os.path.join(sys.argv[1], "*.shard"))):
        with open(path, "rb") as f:
            hdr = f.read(128)
            if len(hdr) != 128 or hdr[:8] != b"OMENSHRD":
                sys.exit("caps_share.py: cannot read shard '%s': not a shard" % path)
            n, off = struct.unpack_from("<QQ", hdr, 16)
            caps = struct.unpack_from("<4I", hdr, 32)
            f.seek(off)
            idx = f.read(IDX * n)
            if len(idx) != IDX * n:
                sys.exit("caps_share.py: cannot read shard '%s': index cut" % path)
        c = sum(1 for i in range(n)
                if (struct.unpack_from("<I", idx, IDX * i + 24)[0] >> 16) & 0xff)
        total += n
        capped += c
        name = os.path.basename(path)[:-len(".shard")]
        print("%-26s %7d commits %6d capped %5.1f%%" % (name, n, c, 100.0 * c / max(n, 1)))
    if not total:
        sys.exit("caps_share.py: no shard under '%s'" % sys.argv[1])
    print("%-26s %7d commits %6d capped %5.1f%%  (caps: files %d, hunks a file %d, "
          "tokens a hunk %d, message tokens %d)" % (("all",) + (total, capped,
          100.0 * capped / total) + tuple(caps)))


if __name__ == "__main__":
    main()
