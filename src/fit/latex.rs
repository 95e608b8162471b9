//! The LaTeX (booktabs) table of a study's fits.

use super::format::with_error;
use super::study::Row;
use super::{Omega, Params};

/// The fits as a booktabs table with its caption.
pub fn latex(name: &str, rows: &[Row], params: &Params) -> String {
    let mut s = String::new();
    s += "% kiln fit: finite-size-scaling extrapolation (needs \\usepackage{booktabs})\n";
    s += "\\begin{table}\n\\centering\n\\begin{tabular}{llrlll}\n\\toprule\n";
    s += "algorithm & $\\varepsilon$ & sizes & $e_\\infty$ & $a$ & $\\omega$ \\\\\n\\midrule\n";
    for r in rows {
        let omega = if params.omega == Omega::Fitted {
            with_error(r.fit.omega, r.fit.omega_se)
        } else {
            format!("{:.4}", r.fit.omega)
        };
        s += &format!(
            "{} & {} & {} & {} & {} & {} \\\\\n",
            r.algorithm.replace('_', "\\_").replace('&', "\\&"),
            r.epsilon,
            r.sizes,
            with_error(r.fit.e_inf, r.fit.e_inf_se),
            with_error(r.fit.a, r.fit.a_se),
            omega
        );
    }
    s += "\\bottomrule\n\\end{tabular}\n";
    s += &format!(
        "\\caption{{Energy per spin extrapolated to $n\\to\\infty$ with $e(n) = e_\\infty + a\\,n^{{-\\omega}}$, weighted least squares over the per-size means; 1$\\sigma$ errors in parentheses. Experiment \\texttt{{{}}}.}}\n",
        name.replace('_', "\\_")
    );
    s += "\\end{table}\n";
    s
}
