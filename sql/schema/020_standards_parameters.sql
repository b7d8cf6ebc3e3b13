-- name: standards_parameters
-- One row (exactly one): the expected-value parameters of the program, written from
-- settings by pipeline.standards.parameters.sync_standards_settings and read by check_results.
-- The row inserted here equals the defaults of StandardsSettings, so the view works before any sync.
CREATE TABLE IF NOT EXISTS standards_parameters (
    parameters_id                     INTEGER PRIMARY KEY CHECK (parameters_id = 1),
    simulator_nominal_c               DOUBLE NOT NULL,
    simulator_window_c                DOUBLE NOT NULL,
    correct_wet_bath_temperature      BOOLEAN NOT NULL,
    correct_dry_gas_pressure          BOOLEAN NOT NULL,
    wet_bath_temperature_coefficient  DOUBLE NOT NULL,   -- per deg C, Dubowski (1979)
    reference_pressure_kpa            DOUBLE NOT NULL,
    settings_digest                   TEXT,              -- Settings.digest() of the last sync
    synced_at                         TIMESTAMP
);
INSERT INTO standards_parameters
SELECT 1, 34.0, 0.2, TRUE, TRUE, 0.06583, 101.325, NULL, NULL
WHERE NOT EXISTS (SELECT 1 FROM standards_parameters);
