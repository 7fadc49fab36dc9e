//! Progress reporting hooks. Long work in the library calls these; the binary shows them on a
//! terminal (indicatif), tests and the viewer pass [`NoProgress`].

/// Receives progress of a long operation, in the operation's own unit (bytes read, rows done).
pub trait Progress: Sync {
    /// Work of `total` units named `what` begins (`total` = 0 when unknown).
    fn start(&self, _what: &str, _total: u64) {}
    /// `done` units of the current work are complete (absolute, not an increment).
    fn set(&self, _done: u64) {}
    /// The current work is finished.
    fn finish(&self) {}
}

/// A progress sink that ignores everything.
#[derive(Debug, Default, Clone, Copy)]
pub struct NoProgress;

impl Progress for NoProgress {}
