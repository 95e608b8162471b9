//! `perceptron`: Gaussian patterns at density α = m/n with a margin κ, on the cube (the binary
//! perceptron) or on the sphere (the spherical perceptron); see [`crate::model::perceptron`].

use std::sync::Arc;

use super::ksat::{DENSITY, read_density};
use crate::algo::Key;
use crate::cell::Canon;
use crate::model::perceptron::{Constraint, Patterns, REVISION, patterns_at};
use crate::model::{Couplings, Domain, Family, FamilyEntry, Instance};
use crate::rng::Id;
use crate::spec::{Settings, SpecError};

/// The registry entry of `perceptron`.
pub const ENTRY: FamilyEntry = FamilyEntry {
    name: "perceptron",
    title: "perceptron",
    summary: "The perceptron: m = round(α·n) patterns g_a of i.i.d. standard normals and a margin κ; x satisfies pattern a when ⟨g_a, x⟩/√n ≥ κ. H(x) = Σ_a u(⟨g_a, x⟩/√n − κ): with `constraint = \"step\"` u(t) = −1[t < 0], so H = −(unsatisfied patterns) and `energy` = −unsatisfied/n; with `\"quadratic\"` u(t) = −½·min(t, 0)², differentiable (gradient ascent and Langevin dynamics run on it). A solution, and only a solution, scores 0. `domain = \"cube\"` is the binary perceptron (±1 spins: every spin algorithm runs on it), `domain = \"sphere\"` the spherical one (points with ‖x‖² = n: `least-distance` decides it exactly). The correlated copy is g'_a = (1 − ε)g_a + sqrt(1 − (1 − ε)²)G_a. Column `satisfied` says whether the reference output satisfies every pattern, and with the step `unsatisfied` counts the violated ones.",
    keys: &[DENSITY, MARGIN, DOMAIN, CONSTRAINT],
    couplings: &[Couplings::Gaussian],
    sizes: "the dimensions n (round(α·n) ≥ 1)",
    parse,
};

const MARGIN: Key = Key {
    name: "margin",
    ty: "number in [−10, 10]",
    default: "0",
    doc: "the margin κ a projection ⟨g_a, x⟩/√n must reach",
};

const DOMAIN: Key = Key {
    name: "domain",
    ty: "`\"cube\"` or `\"sphere\"`",
    default: "`\"cube\"`",
    doc: "±1 spins (binary perceptron) or points with ‖x‖² = n (spherical perceptron)",
};

const CONSTRAINT: Key = Key {
    name: "constraint",
    ty: "`\"step\"` or `\"quadratic\"`",
    default: "`\"step\"`",
    doc: "the constraint function u: the step counts violated patterns, the quadratic sums their squared shortfalls (½·(κ − t)² per pattern with t < κ)",
};

fn parse(s: &Settings<'_>) -> Result<Arc<dyn Family>, SpecError> {
    let Some(density) = read_density(s)? else {
        return Err(s.missing(
            "density",
            format!("the `{}` family needs `density`", ENTRY.name),
            "add e.g. density = 1.5 (patterns per dimension) under [model], or densities = [1.5, 2.0] under [sweep]",
        ));
    };
    let margin = s.number("margin")?.unwrap_or(0.0);
    if !(-10.0..=10.0).contains(&margin) {
        return Err(s.fail(
            "margin",
            format!("margin {margin} is not in [−10, 10]"),
            "κ is the least projection ⟨g_a, x⟩/√n a solution reaches, e.g. margin = 0.5",
        ));
    }
    let domain = match s.value("domain") {
        None => Domain::Cube,
        Some(toml::Value::String(d)) if d == "cube" => Domain::Cube,
        Some(toml::Value::String(d)) if d == "sphere" => Domain::Sphere,
        Some(v) => {
            return Err(s.fail(
                "domain",
                format!("domain {v} is not a domain"),
                "domain = \"cube\" (±1 spins) or domain = \"sphere\" (‖x‖² = n)",
            ));
        }
    };
    let constraint = match s.value("constraint") {
        None => Constraint::Step,
        Some(v) => match v.as_str().and_then(Constraint::parse) {
            Some(c) => c,
            None => {
                return Err(s.fail(
                    "constraint",
                    format!("constraint {v} is not a constraint function"),
                    format!("one of {}", Constraint::NAMES.join(", ")),
                ));
            }
        },
    };
    Ok(Arc::new(Perceptron {
        density,
        margin,
        domain,
        constraint,
    }))
}

/// The density α, the margin κ, the domain and the constraint function.
#[derive(Clone, Debug, PartialEq)]
pub struct Perceptron {
    pub density: f64,
    pub margin: f64,
    pub domain: Domain,
    pub constraint: Constraint,
}

impl Perceptron {
    fn patterns(&self, n: u64) -> u64 {
        patterns_at(n, self.density)
    }
}

impl Family for Perceptron {
    fn name(&self) -> &'static str {
        ENTRY.name
    }
    fn revision(&self) -> u32 {
        REVISION
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("density", self.density)
            .with("domain", if self.spins() { "cube" } else { "sphere" })
            .with("margin", self.margin)
            .with("constraint", self.constraint.name())
    }
    /// The patterns depend on the density alone: one seed gives the same patterns at every
    /// margin, in either domain and for either constraint function, so those compare on the
    /// same instances.
    fn disorder_canon(&self, _sampler: Canon, couplings: Couplings) -> Canon {
        Canon::map()
            .with("family", ENTRY.name)
            .with("couplings", couplings.name())
            .with("revision", REVISION)
            .with("density", self.density)
    }
    fn spins(&self) -> bool {
        self.domain == Domain::Cube
    }
    fn takes_field(&self) -> bool {
        false
    }
    fn density(&self) -> Option<f64> {
        Some(self.density)
    }
    fn at_density(&self, alpha: f64) -> Option<Arc<dyn Family>> {
        Some(Arc::new(Perceptron {
            density: alpha,
            ..self.clone()
        }))
    }
    fn counts_violations(&self) -> bool {
        self.constraint == Constraint::Step
    }
    fn solved_at_zero(&self) -> bool {
        true
    }
    fn differentiable(&self) -> bool {
        self.constraint == Constraint::Quadratic
    }
    fn size_problem(&self, n: u64) -> Option<(String, String)> {
        let m = self.patterns(n);
        if m == 0 {
            Some((
                format!("m = round({}·{n}) = 0 patterns", self.density),
                "use a larger n or density so that there are patterns".into(),
            ))
        } else if m >= 1 << 31 {
            Some((
                format!("{m} patterns exceed 2³¹"),
                "use a smaller n or density".into(),
            ))
        } else {
            None
        }
    }
    /// The patterns, and on the sphere the m×m Gram matrix and factor `least-distance` builds.
    fn instance_bytes(&self, n: u64) -> u128 {
        let m = self.patterns(n) as u128;
        Patterns::bytes(n, m as u64) + if self.spins() { 0 } else { m * m * 16 }
    }
    /// A flip recomputes m projections of n terms and n gains of m terms.
    fn flip_cost(&self, n: u64) -> f64 {
        (2.0 * self.patterns(n) as f64 * n as f64).max(1.0)
    }
    fn sample(&self, n: usize, _couplings: Couplings, instance: &Id, epsilon: f64) -> Instance {
        let m = self.patterns(n as u64) as usize;
        Instance::Patterns(
            Patterns::sample(n, m, self.margin, instance, epsilon).with_constraint(self.constraint),
            self.domain,
        )
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}
