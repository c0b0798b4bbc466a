//! stria's acceptance tests: one test binary, one module per area. Every check names the
//! outside reference it is held to (docs/references.md lists them).

mod exact_refs;
mod handoff_fit;
mod membrane_refs;
mod model_refs;
mod optimizer_refs;
mod python_refs;
mod scaling_refs;
mod sensitivity_refs;
mod studies_e2e;
