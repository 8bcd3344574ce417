"""Ids that pipeline stages emit directly (no check function)."""
from .registry import declare

declare("schema.rejected", """A raw record failed to parse or failed its pandera schema and went to `rejected`.

    Rule: error, one finding per rejected record (file, line and reason in the message);
    the record is kept verbatim in the `rejected` table. Source: inputs.md contract.
    """)
declare("schema.unlisted-file", """A file under raw/ that no manifest source lists.

    Rule: warning (a forgotten source, or a stray file). Source: inputs.md contract.
    """)
declare("schema.citation", """A data source without a citation in the manifest.

    Rule: warning: provenance must be traceable. Common practice.
    """)
declare("schema.species-key", """A record's name could not be re-cased to match its own element counts.

    Rule: warning; the name is kept as written. Source: inputs.md "Species identity".
    """)
declare("schema.standard-state", """A source at another standard pressure was converted to the database's.

    Relation: gas S and gef + R ln(p_s/p°); ΔfG − Δn RT ln(p_s/p°); condensed phases unchanged.
    Rule: info, one per converted source. Source: inputs.md; IUPAC standard pressure 1 bar.
    """)
declare("waiver.expired", """A waiver in the --waivers file whose expiry date has passed.

    Rule: warning; the waiver no longer waives anything, so its findings count again until a
    reviewer renews it (new date, fresh reason) or removes it. Source: checks.md "Waivers".
    """)
declare("waiver.stale", """A waiver in the --waivers file that matches no finding any more.

    Rule: warning: the problem was fixed or the subject renamed, and the waiver should go
    before it silently accepts a future, different problem. Source: checks.md "Waivers".
    """)

from ..refit import FIT_TOLERANCES  # noqa: E402  (the refit module owns the defaults)

declare("export.fit-quality", """A polynomial refit (of a table, or of segments exported to a form they do not fit) misses its source.

    Relation: the constrained two-range least-squares fit (Cp, H, S continuous at the joint,
    H and S exact at 298.15 K) is compared with the source functions on a dense grid:
    max |ΔCp|/Cp, max |ΔH|, max |ΔS|.
    Tolerance: warning beyond 0.5 % in Cp, 100 J/mol in H or 0.1 J/(mol·K) in S — the
    segment.discontinuity error limits, i.e. what the pipeline already accepts between two
    representations of one species at a joint; error beyond error_factor (4) times these
    (the duplicate.disagreement escalation, common practice). NASA Glenn fits reproduce their
    tables far better than this (McBride, Zehe & Gordon, NASA/TP-2002-211556, 2002).
    """, tolerances=FIT_TOLERANCES, module="pipeline.refit")
