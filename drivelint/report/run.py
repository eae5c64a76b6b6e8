"""What a ``drivelint check`` run was, beside its results: the JSON report's ``run`` header.

A JSON report is a complete record: each file's result (in the codec's form, so every
format can be rendered from it again) and this header, which says which slice of which
library it holds and what decided its results, so that ``drivelint merge`` can tell
whether the reports of a CI matrix's shards belong to one run and put their files back
in the order a single run would have had them.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class RunRecord:
    code: str  # digest of drivelint's code, grammar and rule cards (batch.code_digest)
    shard: tuple[int, int] | None  # (I, N) of --shard I/N; None: the whole library
    files: int  # files the run named before sharding (after exclusions it may check fewer)
    library: str  # digest of those paths, in their order
    config: str | None  # --config, as given
    parts: tuple[str, ...]  # --parts, as given
    allow_outside_root: bool
    allow_hidden_includes: bool
    rules: tuple[str, ...] | None  # the rules --select/--ignore kept (None: every rule)
    stdin: str | None  # --stdin-name when '-' was checked
    # Configuration and parts files the checks read (relative to the working folder when
    # under it) with the SHA-256 of their content.
    inputs: Mapping[str, str]
    fail_on: tuple[str, ...]  # the failing severities the files' configurations set

    def whole(self) -> RunRecord:
        """The header a single run over the whole library would have written."""
        from dataclasses import replace

        return replace(self, shard=None)
