//! The reserved words of the command language: the words that start
//! statements and commands, and the other keywords, none of which can be
//! used as a name.

/// Words that cannot be used as names. `t` and `pi` are still values in
/// expressions, and `sin`, `cos`, `exp` are still called as functions.
pub const RESERVED_WORDS: &[&str] = &[
    "t",
    "pi",
    "sin",
    "cos",
    "exp",
    "state",
    "param",
    "input",
    "func",
    "flow",
    "on",
    "to",
    "magnus",
    "over",
    "average",
    "in",
    "strobo",
    "classic",
    "depth",
    "with",
    "transform",
    "carleman",
    "degree",
    "change",
    "by",
    "simulate",
    "from",
    "for",
    "plot",
    "compare",
    "sweep",
    "tol",
    "stability",
    "at",
    "equilibria",
    "near",
    "check",
    "show",
    "as",
    "save",
    "run",
    "names",
    "forget",
    "help",
    "set",
    "budget",
    "quit",
];

/// The words that start a series or numeric command.
pub const COMMAND_WORDS: &[&str] = &[
    "flow",
    "magnus",
    "average",
    "carleman",
    "change",
    "simulate",
    "compare",
    "stability",
    "equilibria",
];

/// The words that start the other statements.
pub const STATEMENT_WORDS: &[&str] = &[
    "state", "param", "input", "func", "check", "show", "save", "run", "names", "forget", "help",
    "set", "quit",
];

/// Whether `word` is reserved (see [`RESERVED_WORDS`]).
pub fn is_reserved(word: &str) -> bool {
    RESERVED_WORDS.contains(&word)
}
