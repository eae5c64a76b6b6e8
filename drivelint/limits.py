"""Bounds that keep hostile or runaway input from exhausting time or memory."""

from __future__ import annotations

from dataclasses import dataclass, fields


@dataclass(frozen=True, slots=True)
class Limits:
    """Every bound the reader and elaborator enforce; each is configurable."""

    max_file_bytes: int = 32 * 1024 * 1024
    max_line_chars: int = 1_000_000
    max_include_depth: int = 16
    max_files: int = 2_000
    max_subckt_nesting: int = 16
    max_instance_depth: int = 32
    max_expression_chars: int = 4_096
    max_word_chars: int = 1_024  # a name, node or number
    max_expression_depth: int = 64
    max_param_recursion: int = 64
    max_devices: int = 2_000_000
    max_if_nesting: int = 32
    max_function_depth: int = 64
    max_pwl_points: int = 1_000_000
    max_poly_dimensions: int = 16
    # Bytes read from all files of one netlist (each file also under max_file_bytes).
    max_total_bytes: int = 256 * 1024 * 1024
    # Lines read in all, a file counted again each time it is included.
    max_lines_read: int = 1_000_000
    # Wall-clock seconds one file may take in any command (netlist, stages, check).
    max_seconds_per_file: int = 60

    @classmethod
    def names(cls) -> tuple[str, ...]:
        return tuple(f.name for f in fields(cls))


# `drivelint merge`: one JSON report read at most (a shard's report holds each file's
# result, a few kB to some tens of kB; this leaves room for ~10⁵ files in one shard).
MAX_REPORT_BYTES = 1 << 30
