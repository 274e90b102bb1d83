//! The LP/MILP backends behind good_lp a plan may be asked for, by name:
//! what a `PlanRequest` carries, below the model (`lp`) that uses them.

/// The LP/MILP backend behind good_lp.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Backend {
    /// microlp: pure Rust, in every build.
    #[default]
    Microlp,
    /// HiGHS, built from source with the `highs` cargo feature.
    #[cfg(feature = "highs")]
    Highs,
}

impl Backend {
    /// The name in plans and tables.
    pub fn name(self) -> &'static str {
        match self {
            Backend::Microlp => "microlp",
            #[cfg(feature = "highs")]
            Backend::Highs => "highs",
        }
    }

    /// Whether its MILP is worth running on whole components within a
    /// time limit (microlp's is not: it returns nothing when stopped early).
    pub fn solves_milp(self) -> bool {
        match self {
            Backend::Microlp => false,
            #[cfg(feature = "highs")]
            Backend::Highs => true,
        }
    }

    /// Whether several of its solves may run at once on different threads
    /// (HiGHS's shared task scheduler has crashed when they did: HiGHS
    /// issues 810 and 1005).
    pub(crate) fn runs_on_threads(self) -> bool {
        match self {
            Backend::Microlp => true,
            #[cfg(feature = "highs")]
            Backend::Highs => false,
        }
    }

    /// The backends this build has, the default first.
    pub fn available() -> Vec<Backend> {
        vec![
            Backend::Microlp,
            #[cfg(feature = "highs")]
            Backend::Highs,
        ]
    }

    /// The backend called `name`, if this build has it.
    pub fn from_name(name: &str) -> Option<Backend> {
        Backend::available().into_iter().find(|b| b.name() == name)
    }
}
