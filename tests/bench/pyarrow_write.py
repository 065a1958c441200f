"""Writes a loadloom dataset's Parquet tables again with pyarrow, the
reference for `cargo bench --bench simulate`: the tables are read into
memory first, then only pyarrow's write is timed, at the settings loadloom
uses (zstd level 1, DELTA_BINARY_PACKED time, BYTE_STREAM_SPLIT floats,
dictionaries only on the categorical columns, statistics on, row groups of
1 Mi rows). Prints one JSON line: wall and CPU seconds (all threads), bytes written.

    python pyarrow_write.py DATASET_DIR OUT_DIR
"""
import json
import os
import sys
import time

import pyarrow as pa
import pyarrow.parquet as pq

TABLES = ("meters", "truth", "events")


def options(schema):
    encodings, dictionary = {}, []
    for f in schema:
        if pa.types.is_timestamp(f.type):
            encodings[f.name] = "DELTA_BINARY_PACKED"
        elif pa.types.is_floating(f.type):
            encodings[f.name] = "BYTE_STREAM_SPLIT"
        else:
            dictionary.append(f.name)
    return dict(
        compression="zstd",
        compression_level=1,
        use_dictionary=dictionary,
        column_encoding=encodings,
        write_statistics=True,
        row_group_size=1 << 20,
    )


def main(src, out):
    os.makedirs(out, exist_ok=True)
    tables = {n: pq.read_table(os.path.join(src, f"{n}.parquet")) for n in TABLES}
    started, cpu = time.perf_counter(), time.process_time()
    for n, t in tables.items():
        pq.write_table(t, os.path.join(out, f"{n}.parquet"), **options(t.schema))
    seconds, cpu = time.perf_counter() - started, time.process_time() - cpu
    size = sum(os.path.getsize(os.path.join(out, f"{n}.parquet")) for n in TABLES)
    print(json.dumps({"seconds": seconds, "cpu_seconds": cpu, "bytes": size}))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
