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
