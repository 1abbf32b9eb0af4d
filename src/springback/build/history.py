"""What earlier builds and reviews left behind, read once per build under the build lock.

`History.read` takes one snapshot of the archive: the latest trusted build (its manifest, its
study tables and its files, for reusing unchanged participants), every participant's booklet
versions and every review decision of the audit log. The participants' jobs get plain values
from it (their version and the decision on their booklet), so per-participant work reads no
file; an unchanged participant's outcome is read from the archived build by `reused`.
"""

from __future__ import annotations

import shutil
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import TYPE_CHECKING, Any, cast

import pandas as pd

if TYPE_CHECKING:
    from springback.build.records import ParticipantOutcome

REUSABLE = ("built", "no feedback", "not enough data", "withdrawn")
"""Outcomes that can be carried over from the last build when nothing they depend on changed."""

REUSED_TABLES = ("metrics.csv", "findings.csv", "shifts.csv")
"""The study tables whose rows a reused participant takes from the last build (its flags'
rows come from its flags, which the manifest keeps)."""


@dataclass(frozen=True)
class LastBuild:
    """The latest archived build that the audit log vouches for, every file as listed."""

    folder: Path
    people: Mapping[str, Mapping[str, Any]]
    """Participant -> the manifest's record of them."""
    rows: Mapping[str, Mapping[str, list[dict[str, Any]]]]
    """Study table -> participant -> its rows as exact strings."""


@dataclass(frozen=True)
class History:
    """The archive as this build found it (see the module's docstring)."""

    last: LastBuild | None
    versions: Mapping[str, Mapping[str, int]]
    """Participant -> booklet fingerprint -> version (`archive.manifest.booklet_versions`)."""
    decisions: Mapping[tuple[str, str], str]
    """(participant, fingerprint) -> 'approved' or 'rejected', the latest decision."""
    unreadable: str = ""
    """Why review decisions could not be read (a damaged key store), else ''."""

    @classmethod
    def read(cls, project: Path, with_last: bool = True) -> History:
        """Read the snapshot; the caller holds the build lock. `with_last=False` leaves the
        last build out (a forced build of everyone reuses nothing)."""
        from springback.archive.manifest import booklet_versions
        from springback.errors import ArchiveError
        from springback.files import project_dirs
        from springback.review.gate import review_decisions

        versions = booklet_versions(project)
        try:
            found = review_decisions(project_dirs(project).archive)
            decisions, unreadable = {key: d.state for key, d in found.items()}, ""
        except ArchiveError as exc:  # only a booklet with a hold flag needs a decision
            decisions, unreadable = {}, str(exc)
        return cls(_last_build(project) if with_last else None,
                   MappingProxyType({p: MappingProxyType(v) for p, v in versions.items()}),
                   MappingProxyType(decisions), unreadable)

    def version(self, participant: str, fingerprint: str) -> int:
        """The booklet version of this fingerprint (a new fingerprint gets the next number)."""
        from springback.archive.manifest import version_of

        return version_of(self.versions.get(participant, {}), fingerprint)

    def decision(self, participant: str, fingerprint: str) -> str:
        """The decision on this booklet version: 'approved', 'rejected' or 'held' (none yet)."""
        return self.decisions.get((participant, fingerprint), "held")

    def review_state(self, participant: str, fingerprint: str, flags: list[Any]) -> str:
        """The booklet's review state (see `review_state`)."""
        return review_state(flags, self.decision(participant, fingerprint), self.unreadable)

    def reused(self, pid: str, staging: Path, *, fingerprint: str | None = None,
               version: int | None = None) -> ParticipantOutcome | None:
        """The participant's outcome in the last build, its files copied into `staging`.

        With a fingerprint (a participant being built): only when the last build had that
        very fingerprint, a reusable outcome and the review state it has now; the outcome
        then takes the fingerprint and version given. Without (a participant a partial build
        leaves out): as the last build had them. None, with nothing copied, otherwise.
        """
        from springback.build.records import BOOKLETS, ParticipantOutcome
        from springback.model import EDITIONS, Flag

        last = self.last
        rec = last.people.get(pid) if last else None
        if last is None or not rec:
            return None
        flags = [Flag.from_row(row, pid) for row in rec.get("flags", [])]
        if fingerprint is None:
            fingerprint = str(rec.get("fingerprint", ""))
            version = int(rec.get("version", 0) or 0)
            state = self.review_state(pid, fingerprint, flags)
        else:
            if rec.get("fingerprint") != fingerprint or rec.get("status") not in REUSABLE:
                return None
            state = self.review_state(pid, fingerprint, flags)
            if state != rec.get("review_state"):
                return None  # the therapist edition shows the review state: render it anew
        names = [str(rel) for rel in rec.get("files", [])]
        if not all((last.folder / "out" / rel).is_file() for rel in names):
            return None
        for rel in names:  # file by file: no booklet is held in memory
            (staging / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(last.folder / "out" / rel, staging / rel)
        rows = {name: last.rows[name].get(pid, []) for name in REUSED_TABLES}
        compliance = next((r["value"] for r in rows["metrics.csv"]
                           if r["measure"] == "compliance"), "")
        period = rec.get("period", {})
        return ParticipantOutcome(
            participant=pid, status=str(rec.get("status", "")), reason=rec.get("reason", ""),
            stored=tuple(sorted(names)), metrics_rows=rows["metrics.csv"],
            shift_rows=rows["shifts.csv"],
            finding_rows=rows["findings.csv"], review_state=state, fingerprint=fingerprint,
            version=int(version or 0),
            period=(period.get("first", ""), period.get("last", "")),
            compliance=float(compliance) if compliance not in ("", None) else None,
            editions=tuple(e for e in EDITIONS if f"{BOOKLETS}/{pid}/{e}.html" in names
                           or f"{BOOKLETS}/{pid}/{e}.pdf" in names),
            flags=tuple(flags), reused=True,
        )


def review_state(flags: list[Any], decision: str, unreadable: str = "") -> str:
    """A booklet's review state from its flags and the decision on its version; a booklet
    that needs a decision fails with the key store's problem when that could not be read."""
    from springback.errors import ArchiveError
    from springback.review.gate import NOT_NEEDED, decided_state

    state = decided_state(flags, decision)
    if state != NOT_NEEDED and unreadable:
        raise ArchiveError(unreadable)
    return state


def _last_build(project: Path) -> LastBuild | None:
    """The latest build's record, or None before the first build.

    Only a build whose manifest the audit log vouches for, with every archived file as
    listed, is reused; otherwise everyone is built anew, so nothing edited in the archive
    (a hold flag taken out, a booklet changed) is carried into a new build.
    """
    from springback.archive.manifest import trusted_manifest
    from springback.archive.verify import folder_mismatches
    from springback.errors import ArchiveError
    from springback.files import project_dirs

    try:
        manifest = trusted_manifest(project)
    except ArchiveError:
        return None
    if not manifest:
        return None
    folder = project_dirs(project).archive / manifest["build"]
    if folder_mismatches(folder, manifest):
        return None
    rows = {name: MappingProxyType(_rows_by_participant(folder / "out" / name))
            for name in REUSED_TABLES}
    return LastBuild(folder, MappingProxyType(manifest.get("participants", {})),
                     MappingProxyType(rows))


def _rows_by_participant(path: Path) -> dict[str, list[dict[str, Any]]]:
    """A study table's rows as exact strings, grouped by participant (empty if absent)."""
    if not path.is_file():
        return {}
    df = pd.read_csv(path, dtype=str, keep_default_na=False)
    out: dict[str, list[dict[str, Any]]] = {}
    for row in df.to_dict("records"):
        out.setdefault(row["participant"], []).append(cast(dict[str, Any], row))
    return out
