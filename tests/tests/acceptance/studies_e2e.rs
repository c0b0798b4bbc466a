//! Acceptance checks: studies_e2e (filled in by the work on this area).
