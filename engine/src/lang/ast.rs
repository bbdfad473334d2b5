//! The syntax tree: statements with byte spans, checked for syntax only.

use crate::error::Span;

/// A value with the span it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct Spanned<T> {
    /// The value.
    pub value: T,
    /// Where it stands in the cell source.
    pub span: Span,
}

impl<T> Spanned<T> {
    /// Wraps `value`.
    pub fn new(value: T, span: Span) -> Self {
        Spanned { value, span }
    }
}

/// A name (dataset, column).
pub type Name = Spanned<String>;

/// One statement of a cell.
#[derive(Debug, Clone, PartialEq)]
pub struct Statement {
    /// The whole statement.
    pub span: Span,
    /// What it asks for.
    pub kind: StmtKind,
}

/// Statement kinds, one per verb.
#[derive(Debug, Clone, PartialEq)]
pub enum StmtKind {
    /// `read "PATH" as NAME [with …]`
    Read {
        /// The path.
        path: Spanned<String>,
        /// The dataset name.
        name: Name,
        /// Options.
        options: Vec<Opt>,
    },
    /// `show NAME [with rows N]`
    Show {
        /// The dataset.
        name: Name,
        /// Options.
        options: Vec<Opt>,
    },
    /// `levels NAME.COLUMN "a", "b"`
    Levels {
        /// The factor.
        target: ColumnRef,
        /// The levels in the wanted order.
        order: Vec<Spanned<String>>,
    },
    /// `label NAME.COLUMN "text"`
    Label {
        /// The column.
        target: ColumnRef,
        /// The label.
        text: Spanned<String>,
    },
    /// `unpivot NAME columns C1, C2, … into FACTOR, VALUE as NEW`
    Unpivot {
        /// The wide dataset.
        source: Name,
        /// The columns to stack.
        columns: Vec<Name>,
        /// The new factor (its levels are the column names).
        factor: Name,
        /// The new numeric column.
        value: Name,
        /// The long dataset's name.
        new: Name,
    },
    /// `describe`, `anova`, `plot KIND` with the shared clauses.
    Analysis(Analysis),
    /// `save LAST to "PATH" [with table N]`
    Save {
        /// The word naming what is saved (`LAST`).
        what: Name,
        /// The path.
        path: Spanned<String>,
        /// Options.
        options: Vec<Opt>,
    },
    /// `help [TOPIC]`
    Help {
        /// The verb asked about.
        topic: Option<Name>,
    },
    /// `power groups K with …` or `power within M with …`.
    Power {
        /// `groups` or `within`.
        design: Name,
        /// K groups or M levels.
        count: Spanned<f64>,
        /// Options.
        options: Vec<Opt>,
    },
    /// `pause SECONDS` (tests only).
    Pause {
        /// Seconds to wait.
        seconds: Spanned<f64>,
    },
}

/// `DATASET.COLUMN`, or a bare `COLUMN` of the current dataset.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnRef {
    /// The dataset, if named.
    pub dataset: Option<Name>,
    /// The column.
    pub column: Name,
}

/// Analysis verbs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verb {
    /// Per-cell summaries.
    Describe,
    /// Analysis of variance.
    Anova,
    /// Assumption checks.
    Check,
    /// Multiple comparisons.
    Compare,
    /// Randomisation tests.
    Permute,
    /// A figure of the given kind.
    Plot(PlotKind),
}

impl Verb {
    /// The verb as written.
    pub fn word(self) -> &'static str {
        match self {
            Verb::Describe => "describe",
            Verb::Anova => "anova",
            Verb::Check => "check",
            Verb::Compare => "compare",
            Verb::Permute => "permute",
            Verb::Plot(_) => "plot",
        }
    }
}

/// Figure kinds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlotKind {
    /// Means with 95% CIs and every point.
    Means,
    /// Box plots with every point.
    Box,
    /// Every point.
    Points,
    /// Each subject's line across a within factor, cell means with CIs (needs `subject`).
    Profile,
    /// Residuals against normal quantiles.
    Qq,
    /// Residuals against fitted values.
    Residuals,
    /// The randomisation null distribution of F.
    Null,
}

impl PlotKind {
    /// Every kind with its word.
    pub const ALL: [(&'static str, PlotKind); 7] = [
        ("means", PlotKind::Means),
        ("box", PlotKind::Box),
        ("points", PlotKind::Points),
        ("profile", PlotKind::Profile),
        ("qq", PlotKind::Qq),
        ("residuals", PlotKind::Residuals),
        ("null", PlotKind::Null),
    ];
    /// The word.
    pub fn word(self) -> &'static str {
        match self {
            PlotKind::Means => "means",
            PlotKind::Box => "box",
            PlotKind::Points => "points",
            PlotKind::Profile => "profile",
            PlotKind::Qq => "qq",
            PlotKind::Residuals => "residuals",
            PlotKind::Null => "null",
        }
    }
}

/// `VERB Y across F… [in D] [subject S] [where C] [with …]`
#[derive(Debug, Clone, PartialEq)]
pub struct Analysis {
    /// The verb.
    pub verb: Verb,
    /// The verb's span.
    pub verb_span: Span,
    /// The response column.
    pub response: Name,
    /// The factors.
    pub factors: Vec<Name>,
    /// `in DATASET`.
    pub dataset: Option<Name>,
    /// `subject COLUMN`.
    pub subject: Option<Name>,
    /// `by FACTOR` (comparisons within each level of it).
    pub by: Option<Name>,
    /// `where …`.
    pub filter: Option<Expr>,
    /// `with …`.
    pub options: Vec<Opt>,
}

/// A `with` option: a name and zero or more values.
#[derive(Debug, Clone, PartialEq)]
pub struct Opt {
    /// The option name.
    pub name: Name,
    /// Its values.
    pub values: Vec<Spanned<Value>>,
    /// The whole option.
    pub span: Span,
}

/// A literal value.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// A number with its source text.
    Num(f64, String),
    /// A quoted string.
    Str(String),
    /// A bare word.
    Word(String),
    /// A parenthesised list, e.g. `(4.1, 4.6, 5.3)`.
    List(Vec<Spanned<Value>>),
}

impl Value {
    /// The value as text (for matching levels and names).
    pub fn text(&self) -> String {
        match self {
            Value::Num(_, t) => t.clone(),
            Value::Str(s) | Value::Word(s) => s.clone(),
            Value::List(v) => {
                format!(
                    "({})",
                    v.iter()
                        .map(|x| x.value.text())
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            }
        }
    }
}

/// A `where` condition.
#[derive(Debug, Clone, PartialEq)]
pub enum Expr {
    /// Every condition holds (`a and b and …`, kept flat so that a long chain neither
    /// recurses nor nests).
    All(Vec<Expr>),
    /// Some condition holds (`a or b or …`).
    Any(Vec<Expr>),
    /// `COLUMN OP VALUE`.
    Compare {
        /// The column.
        column: Name,
        /// The operator.
        op: Spanned<&'static str>,
        /// The value.
        value: Spanned<Value>,
    },
    /// `COLUMN in (V, …)`.
    In {
        /// The column.
        column: Name,
        /// The set.
        values: Vec<Spanned<Value>>,
    },
}
