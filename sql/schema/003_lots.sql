-- name: lots
-- One row: a certified reference-standard lot (wet-bath solution or dry-gas cylinder).
-- target and expanded_uncertainty are stored in g/210L; units keeps the certificate's unit.
CREATE TABLE IF NOT EXISTS lots (
    lot_id                TEXT PRIMARY KEY,
    standard_kind         TEXT NOT NULL,   -- wet_bath or dry_gas
    target                DOUBLE NOT NULL,
    units                 TEXT NOT NULL,
    expanded_uncertainty  DOUBLE,          -- k = 2, g/210L
    certified_on          DATE,
    expires_on            DATE,
    supplier              TEXT
);
