//! (module analysis: work in progress, see DEVELOPERS.md)
