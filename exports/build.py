"""Assemble the contract tables from a sequence of round outcomes, in memory or streamed to disk."""

from __future__ import annotations

from collections.abc import Callable, Iterable
from pathlib import Path

from ebbtide.game_logic.rounds import RoundOutcome
from ebbtide.game_logic.study import Study

from .schema import CONTRACT
from .tables import decision_rows, round_row, seat_rows, seat_rows_from_units
from .writer import TableFile, write_descriptor, write_table


def tables_from_outcomes(
    study: Study,
    session_id: str,
    outcomes: Iterable[RoundOutcome],
    sources: Callable[[RoundOutcome], Iterable[str]],
    groups: int | None = None,
) -> dict[str, list[dict]]:
    """decisions, rounds and seats rows; ``sources(outcome)`` names each seat's channel."""
    decisions: list[dict] = []
    rounds: list[dict] = []
    for outcome in outcomes:
        decisions.extend(decision_rows(study, session_id, outcome, sources(outcome)))
        rounds.append(round_row(study, session_id, outcome))
    return {
        "decisions": decisions,
        "rounds": rounds,
        "seats": seat_rows(study, session_id, decisions, groups),
    }


class StreamedExport:
    """An export folder written while outcomes arrive: decision and round rows go straight
    to their CSV files, seats are summed as they pass; the bytes equal ``write_export`` of
    ``tables_from_outcomes`` (tests/test_export_package.py compares them).

    A 100,000-group pilot has about ten million decision rows: held as dicts they need
    gigabytes, streamed they need one round's rows.
    """

    def __init__(self, out_dir: str | Path, study: Study, session_id: str, groups: int | None = None) -> None:
        self.out = Path(out_dir)
        self.out.mkdir(parents=True, exist_ok=True)
        self.study, self.session_id = study, session_id
        count = study.groups.count if groups is None else groups
        self.units = {(g, s): 0 for g in range(count) for s in range(study.seats)}
        self.decisions = TableFile(self.out / "decisions.csv", CONTRACT["decisions"])
        self.rounds = TableFile(self.out / "rounds.csv", CONTRACT["rounds"])

    def add(self, outcome: RoundOutcome, sources: Iterable[str]) -> dict:
        """Write one resolved round's rows; return its round row (for summaries)."""
        decisions = decision_rows(self.study, self.session_id, outcome, sources)
        self.decisions.write_rows(decisions)
        for seat, row in enumerate(decisions):
            self.units[outcome.group, seat] += row["harvest_taken"]
        row = round_row(self.study, self.session_id, outcome)
        self.rounds.write_rows([row])
        return row

    def finish(self, seed: int, source: str) -> Path:
        """Close the tables, write seats.csv and datapackage.json; return the folder."""
        self.decisions.close()
        self.rounds.close()
        write_table(self.out / "seats.csv", CONTRACT["seats"],
                    seat_rows_from_units(self.study, self.session_id, self.units))
        return write_descriptor(self.out, self.study, self.session_id, seed, source)
