//! (module tune: work in progress, see DEVELOPERS.md)
