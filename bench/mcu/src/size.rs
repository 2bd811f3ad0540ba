//! Size builds: the two-axis tick called once, so that the `.text` it adds can be read
//! as (this build) - (the build without features).
//! Placeholder until the ctrl-core drive tick is wired in.

/// Calls the tick once with inputs the optimiser cannot see.
pub fn once() {}
