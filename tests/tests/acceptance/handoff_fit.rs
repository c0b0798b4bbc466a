//! Acceptance checks: handoff_fit (filled in by the work on this area).
