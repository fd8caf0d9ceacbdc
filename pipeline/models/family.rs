//! The model families, defined once: each family's name (its key in results.json, weights.csv and the
//! config's `models` section), its label in the PDF and what it aims at. Every list of models in the run,
//! the backtest, the bench, the pack and the report follows from [`Family::ALL`].

/// One family of CVaR portfolio models on the common feasible set X.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Family {
    /// Maximum expected return with CVaR at most the cap.
    MaxReturn,
    /// Minimum CVaR with expected return at least the floor.
    MinCvar,
    /// Maximum expected return per unit of CVaR (Charnes & Cooper 1962 change of variables).
    MaxRatio,
}

impl Family {
    /// Every family, in report order.
    pub const ALL: [Family; 3] = [Family::MaxReturn, Family::MinCvar, Family::MaxRatio];

    /// The serialised name, also the family's key under the config's `models` section.
    pub const fn name(self) -> &'static str {
        match self {
            Family::MaxReturn => "max_return",
            Family::MinCvar => "min_cvar",
            Family::MaxRatio => "max_ratio",
        }
    }

    /// The label the PDF prints.
    pub const fn label(self) -> &'static str {
        match self {
            Family::MaxReturn => "Max return",
            Family::MinCvar => "Min CVaR",
            Family::MaxRatio => "Max ratio",
        }
    }

    /// What the family aims at, in one line for the PDF.
    pub const fn aim(self) -> &'static str {
        match self {
            Family::MaxReturn => "highest expected return with CVaR within the cap",
            Family::MinCvar => "lowest CVaR with expected return at or above the floor",
            Family::MaxRatio => "highest expected return per unit of CVaR",
        }
    }

    /// The objective reported for an optimal portfolio with `expected_return` (net of transaction costs,
    /// which is μ·x when nothing is charged) and `cvar` (at the model confidence), given its LP's
    /// objective `lp`: the LP's own, except for the ratio family, whose Charnes–Cooper objective is
    /// reported as the ratio (net return) / CVaR(x) of the portfolio itself — equal at the optimum, and
    /// computed from the same figures as the rest of the pack.
    pub fn reported_objective(self, lp: f64, expected_return: f64, cvar: f64) -> f64 {
        match self {
            Family::MaxReturn | Family::MinCvar => lp,
            Family::MaxRatio => expected_return / cvar,
        }
    }

    /// The family of a serialised name.
    pub fn from_name(name: &str) -> Option<Family> {
        Family::ALL.into_iter().find(|f| f.name() == name)
    }
}

#[cfg(test)]
mod tests {
    use super::Family;

    #[test]
    fn names_are_distinct_and_round_trip() {
        for f in Family::ALL {
            assert_eq!(Family::from_name(f.name()), Some(f));
            assert_eq!(
                Family::ALL.iter().filter(|g| g.name() == f.name()).count(),
                1
            );
        }
        assert_eq!(Family::from_name("current"), None);
    }
}
