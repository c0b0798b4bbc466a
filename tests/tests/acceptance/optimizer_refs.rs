//! Acceptance checks: optimizer_refs (filled in by the work on this area).
