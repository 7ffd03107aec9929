//! The built-in functions of the command language, in one table.
//!
//! Every place that lists the built-ins reads [`BUILTINS`]: evaluation
//! (arity and the usage shown in its errors, `super::eval`), completion
//! at the prompt ([`BUILTIN_NAMES`]), name suggestions, and the
//! `help builtins` topic ([`help_text`]), so that adding a built-in is one
//! row here plus its evaluation.

/// How many positional arguments a built-in takes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Arity {
    /// Exactly this many, none of them `name = value`.
    Exactly(usize),
    /// One expression, then any number of `name = value` bindings (`plug`).
    OneThenBindings,
    /// One or more input names (`iint`).
    AtLeastOne,
}

/// One built-in function.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Builtin {
    /// The name it is called by.
    pub name: &'static str,
    /// The arguments it takes.
    pub arity: Arity,
    /// How a call is written, as error messages show it (`ad(X, Y, k)`).
    pub usage: &'static str,
    /// How `help builtins` lists it; `None` when it is listed together
    /// with the entry before it (`cos` and `exp` with `sin`).
    pub listing: Option<&'static str>,
    /// Whether a mistyped `help` topic may be corrected to this name. The
    /// shortest names (`ad`, `div`, `det`, `trace`) are not offered, so
    /// that they do not capture typos of longer topics.
    pub help_suggests: bool,
}

const fn exactly(
    name: &'static str,
    n: usize,
    usage: &'static str,
    listing: Option<&'static str>,
    help_suggests: bool,
) -> Builtin {
    Builtin {
        name,
        arity: Arity::Exactly(n),
        usage,
        listing,
        help_suggests,
    }
}

/// The built-in functions, in the order `help builtins` lists them.
pub const BUILTINS: &[Builtin] = &[
    exactly(
        "sin",
        1,
        "sin(x)",
        Some("sin cos exp (of linear arguments)"),
        true,
    ),
    exactly("cos", 1, "cos(x)", None, true),
    exactly("exp", 1, "exp(x)", None, true),
    exactly("ad", 3, "ad(X, Y, k)", Some("ad(X, Y, k)"), false),
    exactly("pd", 2, "pd(h, q)", Some("pd(h, q)"), true),
    exactly("jac", 1, "jac(X)", Some("jac(X)"), true),
    exactly("div", 1, "div(X)", Some("div(X)"), false),
    exactly("det", 1, "det(M)", Some("det(M)"), false),
    exactly("trace", 1, "trace(M)", Some("trace(M)"), false),
    Builtin {
        name: "plug",
        arity: Arity::OneThenBindings,
        usage: "plug(e, q = v, \u{2026})",
        listing: Some("plug(e, q = v, ...)"),
        help_suggests: true,
    },
    exactly(
        "order",
        3,
        "order(e, eps, k)",
        Some("order(e, eps, k)"),
        true,
    ),
    exactly("mean", 1, "mean(e)", Some("mean(e)"), true),
    exactly("bch", 3, "bch(X, Y, N)", Some("bch(X, Y, N)"), true),
    Builtin {
        name: "iint",
        arity: Arity::AtLeastOne,
        usage: "iint(u1, \u{2026})",
        listing: Some("iint(u1, ...)"),
        help_suggests: true,
    },
];

/// The names of [`BUILTINS`], in the same order (for completion and
/// suggestions).
pub const BUILTIN_NAMES: &[&str] = &names_of(BUILTINS);

const N_BUILTINS: usize = 14;

const fn names_of(table: &[Builtin]) -> [&'static str; N_BUILTINS] {
    let mut names = [""; N_BUILTINS];
    let mut idx = 0;
    while idx < N_BUILTINS {
        names[idx] = table[idx].name;
        idx += 1;
    }
    names
}

// The table and its count agree (checked when compiling).
const _: () = assert!(BUILTINS.len() == N_BUILTINS);

/// The built-in called `name`, if any.
pub fn find(name: &str) -> Option<&'static Builtin> {
    BUILTINS.iter().find(|builtin| builtin.name == name)
}

/// True if and only if `name` is a built-in function.
pub fn is_builtin(name: &str) -> bool {
    find(name).is_some()
}

/// Forms that are not functions but are listed with them.
const OTHER_FORMS: &[&str] = &[
    "X(h) (Lie derivative)",
    "[X, Y] (Lie bracket: [X,Y](h) = X(Y(h)) - Y(X(h)))",
];

/// The widest line of the `help builtins` listing.
const HELP_WIDTH: usize = 102;

/// The text of the `help builtins` topic: every listing of [`BUILTINS`]
/// and the other forms, comma separated, wrapped at [`HELP_WIDTH`].
pub fn help_text() -> String {
    let entries: Vec<&str> = BUILTINS
        .iter()
        .filter_map(|builtin| builtin.listing)
        .chain(OTHER_FORMS.iter().copied())
        .collect();
    let mut text = String::from("built-in functions");
    let mut line = String::new();
    for (idx, entry) in entries.iter().enumerate() {
        let last = idx + 1 == entries.len();
        let piece = format!("{entry}{}", if last { "." } else { "," });
        if !line.is_empty() && line.len() + 1 + piece.len() > HELP_WIDTH {
            text.push('\n');
            text.push_str(&line);
            line.clear();
        }
        if line.is_empty() {
            line.push_str("  ");
        } else {
            line.push(' ');
        }
        line.push_str(&piece);
    }
    text.push('\n');
    text.push_str(&line);
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn help_text_lists_every_builtin_in_lines_of_the_topic() {
        insta::assert_snapshot!(help_text(), @r"
        built-in functions
          sin cos exp (of linear arguments), ad(X, Y, k), pd(h, q), jac(X), div(X), det(M), trace(M),
          plug(e, q = v, ...), order(e, eps, k), mean(e), bch(X, Y, N), iint(u1, ...), X(h) (Lie derivative),
          [X, Y] (Lie bracket: [X,Y](h) = X(Y(h)) - Y(X(h))).
        ");
    }

    #[test]
    fn names_follow_the_table() {
        let from_table: Vec<&str> = BUILTINS.iter().map(|builtin| builtin.name).collect();
        assert_eq!(BUILTIN_NAMES, from_table.as_slice());
        assert!(is_builtin("plug"));
        assert!(!is_builtin("plot"));
    }

    #[test]
    fn every_builtin_has_the_builtins_help_topic() {
        for builtin in BUILTINS {
            assert_eq!(
                crate::lang::help::help(Some(builtin.name)),
                crate::lang::help::help(Some("builtins")),
                "{}",
                builtin.name
            );
        }
    }
}
