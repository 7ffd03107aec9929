//! Help texts: `help` lists the topics, `help WORD` explains one with an
//! example. The averaging and validation topics carry the safety caution.

use super::builtins;

const CAUTION: &str = "\
caution: an averaged model is an approximation, valid only for fast enough
oscillation (small enough eps, large enough w). Before a result drives a real machine,
validate it numerically (`compare`), then physically, and follow the
applicable engineering codes and licensed professional practice.";

const TOPICS: &[(&str, &str)] = &[
    ("state", "state q, p\n  declare the state coordinates, in this order (fields list one entry per coordinate).\n  Changing the state after fields exist is refused."),
    ("param", "param eps, k\n  declare exact symbolic constants; negative integer powers (eps^-1) are allowed."),
    ("input", "input u1, u2\n  declare unspecified time functions; `flow` then gives the Chen–Fliess series with\n  iterated integrals iint(u1, u2) (first argument at the latest time).\n  example: input u1\n           flow u1*[1, x] on y to 2"),
    ("func", "func V(s), J(a, b)\n  declare unspecified smooth functions of the state (the names in brackets are argument\n  placeholders). Apply them to linear forms of the state plus a constant (a number and/or a\n  multiple of pi): V(q), V(q + pi), J(x - 1, y), V(1/2); parameters, t and nonlinear arguments\n  are refused. Derivatives: V'(q), V''(q), ... for one argument, pd(J, a)(x, y), pd(J, a, b)(x, y)\n  for several; the chain rule is exact (pd(V(2*q), q) == 2*V'(2*q)). Every series command takes\n  them, so averaged results hold for any V; `carleman` and the numerical commands need concrete\n  functions: plug(e, V(s) = -k*cos(s)) replaces V and all its derivatives, plug(e, q = pi)\n  evaluates arguments. A result for any V is still an approximation: check it on the concrete\n  machine (plug, then `compare`) before relying on it.\n  example: func V(s)\n           A = average eps*[p, -V'(q)] + cos(t)*[0, b*sin(q)] to 1 in eps classic"),
    ("define", "NAME = EXPRESSION\n  bind a value (scalar, field or matrix); redefining replaces it (and says so).\n  example: X = [p, -q]"),
    ("flow", "flow V on h to N   |   flow V to N\n  the chronological expansion of h(x(t)) for x' = V(t, x), x(0) = x, term by term to order N\n  (earliest time outermost); without `on`, every coordinate. An output that depends on t is\n  read along the solution, h(t, x(t)). A truncated series is good only for short times or\n  small fields: check it numerically before relying on it.\n  example: flow cos(t)*[1, 0] + [0, q] on p to 3"),
    ("magnus", "magnus V to N [over T]\n  the chronological logarithm W_T (exp(W_T) = the time-T flow) by order; T is the period by default.\n  When V = Σ c_i(t)*X_i with named fields, `show W as brackets` gives the Lie polynomial.\n  example: W = magnus cos(t)*X + sin(t)*Y to 3"),
    ("average", "average V to N in eps [strobo | classic] [depth D]\nA, W = average V to N in eps classic with transform\naverage V to N in 1/w [strobo | classic]\n  higher-order averaging of x' = f_0 + Σ eps^j f_j (T-periodic in t).\n  forms: standard (f_0 = 0), fast oscillation (f_0 = Σ u_i(t) g_i, zero-mean u_i, commuting g_i),\n  linear centre (f_0 = A x with eigenvalues ±i*k).\n  strobo (default): the field whose time-T flow is the period map; classic: zero-mean\n  near-identity transform x = y + W(t, y).\n  fast oscillation: x = exp(Σ U_i(t) g_i)(z) removes f_0. The base of U_i differs:\n  strobo uses U_i = ∫_0^t u_i (x = z at multiples of the period; u = sin(t) gives\n  U = 1 - cos(t) and a [g, f_1] term); classic uses the zero-mean antiderivative\n  U_i = ∫_0^t u_i - mean(∫_0^t u_i), the textbook vibrational transform, with the full\n  transform x = exp(Y(t))(y + W(t, y)). The output says which base it used. With named\n  fields (eps*F0 + cos(t)*G1 + sin(t)*G2), `show A as brackets` gives the Lie polynomial\n  (strobo at every order, classic to order 2).\n  in 1/w: a symbolic frequency, the time dependence written through w*t (w a parameter,\n  rational multiples 2*w*t too): time is rescaled s = w*t, eps = 1/w, the system averaged\n  in s and the result given in the original time as a series in 1/w (order k carries\n  w^(1-k)). A term that grows with w after rescaling is refused: hold an amplitude times\n  w fixed, e.g. plug(S, a = b/w). One symbolic frequency at a time.\n  example: A = average eps*[p, -q + cos(t)*q^2] to 2 in eps\n           order(A, eps, 1)\n           B = average [p, -sin(q)] + b*w*cos(w*t)*[0, sin(q)] to 2 in 1/w\n           order(B, w, 0)"),
    ("change", "P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)\n  A (a field, possibly time-varying, or a scalar) in new coordinates: the old ones given as\n  expressions in the new ones and t (x = ψ(t, y)). A field becomes (Dψ)^-1 (A∘ψ − ∂_tψ), a scalar h∘ψ.\n  Exact when det Dψ is a nonzero number times a monomial (polar: r; scalings, shears, rotations by\n  constant or time-dependent angles: a number); another determinant is refused, naming it.\n  The new names form a chart: results on it print in it, and commands work on them there\n  (brackets, X(h), flow, average, simulate/compare/stability with `from r = 1, phi = 0`);\n  a line that mixes two charts is refused, naming both. `change A to z1, z2 by x = z1, v = z2`\n  renames; `average … as z1, z2` names the averaged state at once; `names` lists the charts.\n  example: A = average [v, -x] + eps*[0, (1 - x^2)*v] to 1 in eps\n           P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)   # eps*[r/2 - r^3/8, 0]"),
    ("carleman", "carleman X degree d\n  the finite section of h -> X(h) on monomials of degree <= d (1 first, graded lexicographic);\n  column j holds the coefficients of X(m_j).\n  example: carleman [p, -q - q^2] degree 2"),
    ("simulate", "simulate V from q=1, p=0 for L [with eps=1/20, k=1] [plot FILE.svg] [plot q, p FILE.svg]\n  integrate x' = V numerically (adaptive Runge–Kutta 5(4), tolerance as set by `set tolerance`,\n  default 1e-11 relative, 1e-13 absolute) over [0, L] and print a table. `plot FILE.svg` draws\n  every state against t; `plot q, p FILE.svg` draws the phase portrait of two states, the start\n  marked. The horizon may use parameters given in `with` (for 40/eps).\n  example: simulate [p, -q] from q=1, p=0 for 10 plot q, p orbit.svg"),
    ("compare", "compare S with A from q=1, p=0 for L [with k=1] sweep eps=0.2,0.1,0.05 [tol E] [plot FILE.svg]\n        [plot paths FILE.svg] [table FILE.csv]\n  integrate the system S and each order of the averaged model A and measure the error: the largest\n  Euclidean distance between them (in the state's coordinates; a classical model through its\n  transform) at the multiples of the period with eps*t <= L. `for L/eps^k` sets the time scale\n  explicitly, eps^k*t <= L, for drifts of order eps^k (nonholonomic steering: for 1/eps^2).\n  The table gives the error per eps and order and, between rows, the local slope\n  log(e_i/e_j)/log(eps_i/eps_j). `slope order K: S.SS` is fitted over the asymptotic range: the\n  smallest eps whose local slopes agree (within 0.2, or 10% for steep slopes); the line names the\n  eps it used and those it left out. Every integration is repeated 10 times tighter; an error\n  below 10 times the change that makes is at the integrator's floor: marked `*`, left out of\n  fits, and the line says so (lower `set tolerance` to see further). Integration tolerance: set by\n  `set tolerance E` (relative E, absolute E/100), default 1e-11.\n  `tol E`: the largest eps whose error meets E, per order. `plot FILE.svg`: error against eps,\n  log-log, floor points as rings. `plot paths FILE.svg`: the system and every averaged order at\n  the largest eps, one panel per state. `table FILE.csv`: every (eps, order, time, error, at_floor) row.\n  example: compare S with A from q=1, p=0 for 2 sweep eps=0.2,0.1,0.05 table errors.csv"),
    ("stability", "stability F at q=pi, p=0 [with k=1]\n  the Jacobian of the autonomous field F at the point and its eigenvalues, with what they say\n  (linearisation). Point values may be numbers, decimals, `pi` or parameters (`p = alp`, with\n  `alp` given in `with`). Exact when the point is exact and the numbers short; otherwise in\n  decimals, with the residual |F| there (a residual below 1e-9 of the field's scale counts as an\n  equilibrium). Without values for every parameter: the exact characteristic polynomial."),
    ("check", "check A == B\n  exact comparison of normal forms; a failure shows both sides and the difference\n  (a script goes on, and exits with status 1)."),
    ("show", "show E as latex   |   show A as brackets   |   show E as python|julia|c|rust [to FILE]\n  latex: for papers; an averaged result is an `aligned` block, one row per coordinate\n  (\\dot{th} &= …), terms grouped by powers of eps; products read number, parameters, states,\n  functions; alp, kap, Om, th, … are Greek, a12 is a_{12}, q_dot is \\dot{q}. Needs amsmath.\n  brackets: the Lie-polynomial form of a result written over named fields.\n  python, julia, c, rust: a self-contained function of (t, state, params) evaluating the value\n  in floating point (NumPy, plain Julia, C99, Rust), parameters as named arguments (a name\n  that is a keyword there gets a trailing _), the exact value in a comment. `to FILE`\n  writes it atomically instead of printing it (never over a script).\n  A simulation of an averaged model is an approximation: validate it (`compare`) first.\n  example: show A as latex\n           show order(A, eps, 1) as python to boom_model.py"),
    ("save", "save FILE   |   save FILE with checks\n  write the session's accepted lines as a script (atomically; `help` and `names` lines are\n  not saved). `with checks` also writes, after each line that defines a name,\n  `check NAME == VALUE` with its exact value, so a replay (`ordex FILE`) re-derives and\n  re-checks every result: exit 0 when all hold, 1 naming the line of a result that changed.\n  example: save boom_derivation.ordex with checks"),
    ("run", "run FILE\n  replay a script into this session."),
    ("names", "names\n  list declarations and definitions."),
    ("forget", "forget NAME\n  remove a definition, or a parameter or input that no definition uses (otherwise it names\n  the definitions that do). State and chart coordinates stay: `state …` declares a new state."),
    ("equilibria", "equilibria F near q=1, p=0 [with k=1]\n  find an equilibrium of the autonomous field F by Newton's method from the guess (steps cut to\n  at most max(1, |x|), halved until |F| decreases); print it in decimals with its residual |F|,\n  say so when it is exactly a rational multiple of 1 or pi, then the `stability` report there.\n  A failure (no convergence, singular Jacobian) says why and where the iterates ended.\n  example: equilibria order(A, eps, 1) near th=3, p=0 with gam=1, bet=2"),
    ("set", "set tolerance E\n  the integration tolerance of `simulate` and `compare` (relative E, absolute E/100; from 1e-13\n  to 1e-3; default 1e-11).\nset budget N\n  the most terms one result may hold (a large coefficient counts as a term per 64 bytes),\n  and with it the work of one statement (250*N term products), before the computation\n  stops with a message. Digits (100,000), order (40) and nesting (256) are fixed limits."),
    ("kernel", "ordex kernel install   (at the shell, once)\n  register ordex as a Jupyter kernel for this user (kernel.json in the Jupyter data directory,\n  JUPYTER_DATA_DIR when set); then pick the kernel \"ordex\" in a notebook. A cell runs as a script:\n  results in input syntax and LaTeX, plots inline, errors with the caret, failed checks as errors;\n  interrupt keeps the session; `save FILE` writes the accepted lines as a script."),
    ("quit", "quit\n  leave the prompt (Ctrl-D too)."),
    // The text of this topic is built from the table of built-ins.
    ("builtins", ""),
];

/// Paragraphs added to a topic (kept apart so that topics stay one entry each).
const EXTRA: &[(&str, &str)] = &[
    ("average", "  `average … as z1, z2` names the averaged state z (a chart of its own, see `help change`);\n  without it, the result prints z under the system's names."),
    ("flow", "  with inputs: `plug(F, u1 = eps*cos(2*t), u2 = eps*cos(t))` evaluates every iterated integral\n  iint(u_i1, …, u_ik) = ∫_{0≤τk≤…≤τ1≤t} u_i1(τ1)…u_ik(τk) exactly (first argument at the latest\n  time; the letter 1 is the constant input). Products of iint are rewritten by the shuffle\n  identity (iint(u1)*iint(u2) = iint(u1, u2) + iint(u2, u1)), so `check` decides their identities."),
    ("magnus", "  ordex keeps coefficients rational (no sqrt(3)): `over T` needs cos and sin of every frequency\n  rational at T (multiples of pi/2 always work; the message says which T do)."),
    ("input", "  `plug(F, u1 = eps*cos(t))` puts concrete inputs into a result (see `help flow`)."),
    ("builtins", "  plug also takes inputs (`plug(F, u1 = cos(t))`): see `help flow`."),
];

/// The help text for `word`, or the topic list for `None`; `None` when
/// the word has no help.
pub fn help(word: Option<&str>) -> Option<String> {
    match word {
        None => {
            let words: Vec<&str> = TOPICS.iter().map(|(w, _)| *w).collect();
            Some(format!(
                "ordex: exact series computations on time-varying systems.\nhelp topics: {}\ntype `help WORD` for one of them.",
                words.join(", ")
            ))
        }
        Some(w) => {
            let key = match w {
                w if builtins::is_builtin(w) => "builtins",
                "budget" | "tolerance" => "set",
                "chart" | "charts" | "coordinates" => "change",
                other => other,
            };
            let (_, text) = TOPICS.iter().find(|(k, _)| *k == key)?;
            let mut s = if key == "builtins" {
                builtins::help_text()
            } else {
                text.to_string()
            };
            if let Some(extra) = EXTRA.iter().find(|(k, _)| *k == key).map(|(_, e)| e) {
                s.push('\n');
                s.push_str(extra);
            }
            if matches!(
                key,
                "average" | "compare" | "stability" | "equilibria" | "simulate"
            ) {
                s.push('\n');
                s.push_str(CAUTION);
            }
            Some(s)
        }
    }
}

/// The help topics and the words `help` also answers for, for suggestions.
pub fn topic_words() -> Vec<&'static str> {
    let mut v: Vec<&'static str> = TOPICS.iter().map(|(w, _)| *w).collect();
    v.extend(super::parse::COMMAND_WORDS);
    v.extend(
        builtins::BUILTINS
            .iter()
            .filter(|builtin| builtin.help_suggests)
            .map(|builtin| builtin.name),
    );
    v.push("chart");
    v
}

/// The caution shown in the README and in help texts.
pub fn caution() -> &'static str {
    CAUTION
}
