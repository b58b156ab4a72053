"""Scenario references that go round in a circle: the one walk that both the `reference-cycle` check and the
cost indicators (which leave such scenarios out) run, so the two can never disagree on what a cycle is."""

from __future__ import annotations


def cyclic_scenarios(links: str) -> str:
    """A query of the scenarios whose references lead back to them: `model`, `scenario` and `steps` (the length
    of the shortest way round; 1 for a scenario naming itself). `links` is a SELECT of `model, scenario,
    reference` with no null reference; references are followed within a model only."""
    # Every walk starts at a link and stops when it is back at its start, or after as many steps as there are
    # links: a walk that runs into a circle it does not belong to goes on no longer than that.
    return (
        f"WITH RECURSIVE links AS ({links}), walk(model, start, cur, steps) AS ("  # noqa: S608 - `links` is SQL from our code
        "SELECT model, scenario, reference, 1 FROM links UNION ALL "
        "SELECT w.model, w.start, k.reference, w.steps + 1 FROM walk w JOIN links k "
        "ON k.model = w.model AND k.scenario = w.cur "
        "WHERE w.cur <> w.start AND w.steps <= (SELECT count(*) FROM links)) "
        "SELECT model, start AS scenario, min(steps) AS steps FROM walk WHERE cur = start GROUP BY ALL"
    )


__all__ = ["cyclic_scenarios"]
