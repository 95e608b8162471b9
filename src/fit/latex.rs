//! The LaTeX (booktabs) table of a study's fits, and plain text (figure captions) set in
//! LaTeX.

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

/// Text with kiln's Unicode mathematics set as LaTeX: the characters LaTeX reserves escaped,
/// Greek letters and symbols as inline math, `^` and `_` followed by a token as super- and
/// subscripts (`n^-ω` → $n^{-\omega}$). For captions written next to figures.
pub fn text(s: &str) -> String {
    fn symbol(c: char) -> Option<&'static str> {
        Some(match c {
            'α' => "\\alpha",
            'β' => "\\beta",
            'γ' => "\\gamma",
            'δ' => "\\delta",
            'ε' => "\\varepsilon",
            'κ' => "\\kappa",
            'χ' => "\\chi",
            'λ' => "\\lambda",
            'ξ' => "\\xi",
            'σ' => "\\sigma",
            'ω' => "\\omega",
            'Φ' => "\\Phi",
            'Ψ' => "\\Psi",
            '∞' => "\\infty",
            '±' => "\\pm",
            '−' => "-",
            '≤' => "\\le",
            '≥' => "\\ge",
            '≈' => "\\approx",
            '→' => "\\to",
            '√' => "\\sqrt{}",
            '∫' => "\\int",
            '‖' => "\\|",
            '·' => "\\cdot",
            '×' => "\\times",
            '²' => "^2",
            '³' => "^3",
            '′' => "'",
            _ => return None,
        })
    }
    let chars: Vec<char> = s.chars().collect();
    let mut out = String::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        // An underscore inside a name (`distance_sym`: a word of two or more letters before
        // it) is the character itself, not a subscript.
        let in_name =
            c == '_' && i >= 2 && chars[i - 1].is_alphabetic() && chars[i - 2].is_alphabetic();
        match c {
            '_' if in_name => out.push_str("\\_"),
            '^' | '_' if i + 1 < chars.len() && !chars[i + 1].is_whitespace() => {
                // The token after it: an optional sign, then letters, digits or a symbol.
                let mut j = i + 1;
                let mut tok = String::new();
                if matches!(chars[j], '-' | '−' | '+') {
                    tok.push(if chars[j] == '+' { '+' } else { '-' });
                    j += 1;
                }
                while j < chars.len() && (chars[j].is_alphanumeric() || chars[j] == '.') {
                    match symbol(chars[j]) {
                        Some(m) => tok.push_str(&format!("{m} ")),
                        None => tok.push(chars[j]),
                    }
                    j += 1;
                }
                let tok = tok.trim_end().trim_end_matches('.').to_string();
                let used = tok.len();
                if used == 0 {
                    out.push_str(if c == '^' { "\\^{}" } else { "\\_" });
                    i += 1;
                    continue;
                }
                // A trailing full stop ends the sentence, not the exponent.
                if chars[j - 1] == '.' {
                    j -= 1;
                }
                out.push_str(&format!("${c}{{{tok}}}$"));
                i = j;
                continue;
            }
            '\\' => out.push_str("\\textbackslash{}"),
            '&' | '%' | '$' | '#' | '{' | '}' => {
                out.push('\\');
                out.push(c);
            }
            '^' => out.push_str("\\^{}"),
            '_' => out.push_str("\\_"),
            '~' => out.push_str("\\~{}"),
            _ => match symbol(c) {
                Some(m) => out.push_str(&format!("${m}$")),
                None => out.push(c),
            },
        }
        i += 1;
    }
    out.replace("$$", "")
}

#[cfg(test)]
mod tests {
    /// Captions come out as LaTeX: reserved characters escaped, symbols in math, exponents
    /// raised (common practice for LaTeX text).
    #[test]
    fn captions_in_latex() {
        assert_eq!(super::text("n^-ω fits"), "n$^{-\\omega}$ fits");
        assert_eq!(super::text("a 50% & b_1"), "a 50\\% \\& b$_{1}$");
        // Column names keep their underscores (a double subscript would not compile).
        assert_eq!(
            super::text("column distance_point_sym, χ²"),
            "column distance\\_point\\_sym, $\\chi^2$"
        );
        assert_eq!(
            super::text("at ε = 0, ±1 SE."),
            "at $\\varepsilon$ = 0, $\\pm$1 SE."
        );
        assert_eq!(
            super::text("ω = 2/3 (n^-ω)."),
            "$\\omega$ = 2/3 (n$^{-\\omega}$)."
        );
    }
}
