//! Plain printing of expressions in the input syntax.

use std::fmt;

use super::Expr;

impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.terms.is_empty() {
            return write!(f, "0");
        }
        for (i, (k, c)) in self.terms.iter().enumerate() {
            let neg = c.is_negative();
            let a = c.abs();
            if i == 0 {
                if neg {
                    write!(f, "-")?;
                }
            } else {
                write!(f, "{}", if neg { " - " } else { " + " })?;
            }
            let factors = k.factors();
            if factors.is_empty() {
                write!(f, "{a}")?;
            } else if a.is_one() {
                write!(f, "{}", factors.join("*"))?;
            } else {
                write!(f, "{a}*{}", factors.join("*"))?;
            }
        }
        Ok(())
    }
}

impl fmt::Debug for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{self}")
    }
}
