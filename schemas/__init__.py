"""pandera schemas of thermoledger's staging tables. Declarations only: ``schemas`` never
imports ``pipeline`` or DuckDB; ``pipeline.validate`` runs them."""
from .staging import RECORDS, REACTIONS, SEGMENTS, SPECIES, SPECIES_META, TABLE_POINTS

#: Staging frame name → schema, in the order they are validated.
STAGING_SCHEMAS = {
    "species_meta": SPECIES_META,
    "records": RECORDS,
    "segments": SEGMENTS,
    "table_points": TABLE_POINTS,
    "reactions": REACTIONS,
    "species": SPECIES,
}
