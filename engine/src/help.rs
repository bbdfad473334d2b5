//! The language reference, one entry per verb (shown by `help` and by inspection).

/// One verb's help.
#[derive(Debug, Clone, Copy)]
pub struct VerbHelp {
    /// The verb.
    pub verb: &'static str,
    /// The statement's shape.
    pub usage: &'static str,
    /// What it does.
    pub summary: &'static str,
    /// Options after `with`.
    pub options: &'static [(&'static str, &'static str)],
    /// An example.
    pub example: &'static str,
}

/// Every verb.
pub const VERBS: &[VerbHelp] = &[
    VerbHelp {
        verb: "read",
        usage: "read \"PATH\" as NAME [with OPTION VALUE, …]",
        summary: "Loads a CSV, TSV or semicolon-separated file, or a sheet of a spreadsheet (.xlsx, .xlsm, .xls, .ods), as dataset NAME. The separator is detected from the header line; numeric and factor columns are detected from the values. Reading the same file again says what changed since the last read.",
        options: &[
            (
                "factor C1 C2 …",
                "treat these numeric columns as factor levels (dose codes, blocks)",
            ),
            (
                "missing \"X\"",
                "also treat X as a missing value (empty, NA and . always are)",
            ),
            (
                "delimiter \";\"",
                "the field separator: \",\", \";\" or \"tab\"",
            ),
            ("decimal \",\"", "numbers are written with a decimal comma"),
            (
                "header N",
                "the header is on line N (lines above it are skipped); 0 for no header",
            ),
            (
                "sheet \"NAME\"",
                "spreadsheets: the sheet to read (default the first)",
            ),
            (
                "watch",
                "follow the file: when it changes, the results that used it are recomputed and replaced in place",
            ),
        ],
        example: "read \"data/feeding.csv\" as trial with factor pen",
    },
    VerbHelp {
        verb: "unpivot",
        usage: "unpivot NAME columns C1, C2, … into FACTOR, VALUE as NEW",
        summary: "Turns a wide layout (one numeric column per week, dose or condition) into the long layout the analyses read: dataset NEW has one row per value, a factor FACTOR whose levels are the column names in the order listed, the numbers in VALUE, and every other column repeated. Messages still point to the file's lines.",
        options: &[],
        example: "unpivot log columns week1, week2, week3 into week, height as plants",
    },
    VerbHelp {
        verb: "show",
        usage: "show NAME [with rows N]",
        summary: "Shows the first rows of a dataset with each column's type, levels and missing count.",
        options: &[("rows N", "how many rows to show (default 10)")],
        example: "show trial with rows 5",
    },
    VerbHelp {
        verb: "levels",
        usage: "levels NAME.COLUMN \"a\", \"b\", …",
        summary: "Sets the order of a factor's levels; tables and figures follow it. Levels not named keep their order after the named ones.",
        options: &[],
        example: "levels trial.feed \"standard\", \"low protein\", \"high protein\"",
    },
    VerbHelp {
        verb: "label",
        usage: "label NAME.COLUMN \"text\"",
        summary: "Sets the label used for a column on axes and in sentences.",
        options: &[],
        example: "label trial.gain \"Weight gain (g)\"",
    },
    VerbHelp {
        verb: "describe",
        usage: "describe Y across F… [in NAME] [subject S] [where CONDITION] [with level L]",
        summary: "Per cell of the factors: n, mean, SD, SE and a confidence interval of the mean. With `subject S`, the factors are classified as within or between subjects and the summaries are over subjects (one value per subject per cell).",
        options: &[
            (
                "level L",
                "confidence level of the intervals (default 0.95)",
            ),
            (
                "duplicates error",
                "with `subject`: refuse several values of one subject in one cell (default: average them, with a note)",
            ),
        ],
        example: "describe gain across feed in trial",
    },
    VerbHelp {
        verb: "anova",
        usage: "anova Y across F… [in NAME] [subject S] [where CONDITION]",
        summary: "Without `subject`: one-way between-subjects ANOVA of Y across F (df, SS, MS, F, p, η², ω², a confidence interval for η² and f; `with welch` adds Welch's test for unequal spread), or with several factors the full factorial ANOVA (every interaction, partial η² and ω², an interaction figure), balanced or not. With `subject S`: repeated-measures or mixed ANOVA; each factor is classified from the data as within or between subjects, each effect is tested against its own error term, within effects get Mauchly's test and the Greenhouse–Geisser, Huynh–Feldt and lower-bound corrections, and the table gives partial and generalized η². Subjects missing a cell are set aside by name.",
        options: &[
            (
                "level L",
                "confidence level of the intervals (default 0.95)",
            ),
            (
                "correction auto|gg|hf|none",
                "with `subject`: the sphericity correction; auto (default) is Greenhouse–Geisser when ε_GG < .75, else Huynh–Feldt",
            ),
            (
                "ss 2|3",
                "several between factors: type 2 (default, each effect adjusted for the effects not containing it) or type 3 (sum-to-zero coding) sums of squares",
            ),
            (
                "welch",
                "one factor: add Welch's ANOVA, which does not assume equal spread",
            ),
            (
                "duplicates error",
                "with `subject`: refuse several values of one subject in one cell (default: average them)",
            ),
        ],
        example: "anova length across dose, day subject fish",
    },
    VerbHelp {
        verb: "check",
        usage: "check Y across F… [in NAME] [subject S] [where CONDITION]",
        summary: "Assumption checks for the ANOVA of Y across F…: equal spread across the cells (Brown–Forsythe, median-centred, and Levene, mean-centred), normal residuals (Shapiro–Wilk, Royston's approximation, valid for 3 to 5,000 values) with a residual Q–Q figure and a residual-against-fitted figure, and with `subject` Mauchly's sphericity test. Notes say what to consider; no test can show that an assumption holds.",
        options: &[],
        example: "check weight across feed, light in trial",
    },
    VerbHelp {
        verb: "compare",
        usage: "compare Y across F [in NAME] [subject S] [by B] [where CONDITION] [with method M, control \"L\", alpha A]",
        summary: "Which levels of F differ, with multiplicity control: a table of pairs (difference, SE, statistic, df, p, adjusted p, simultaneous interval), the levels with their compact letters (levels sharing a letter do not differ), a figure of the differences around zero and the means with their letters. With `subject` and F within subjects, paired t tests; with `by B`, F is compared within each level of B on the pooled error of the F × B model (simple effects).",
        options: &[
            (
                "method M",
                "tukey (default between groups), games-howell (unequal spread), holm (default within subjects), bonferroni, fdr (Benjamini–Hochberg), dunnett (against a control)",
            ),
            ("control \"L\"", "the control level for dunnett"),
            (
                "alpha A",
                "the familywise error rate (default 0.05); intervals are at 1 − A",
            ),
        ],
        example: "compare weight across feed in trial with method tukey",
    },
    VerbHelp {
        verb: "permute",
        usage: "permute Y across F… [in NAME] [subject S] [where CONDITION] [with draws N, seed K, threads T]",
        summary: "A randomisation test of each ANOVA effect's F, for skewed residuals, small samples or unequal spread: one factor permutes the responses across groups; several factors permute the residuals of the model without the effect (Freedman–Lane); with `subject`, within-subject effects permute each subject's values across its cells and between effects permute whole subjects. Exact when all distinct assignments number at most N, else Monte Carlo with p = (b + 1)/(m + 1) and a 99% interval. Long runs show progress; an interrupted run shows its partial result.",
        options: &[
            (
                "draws N",
                "Monte Carlo draws (default 10,000; at most 10,000,000)",
            ),
            (
                "seed K",
                "the seed (a whole number); drawn and shown when not given, so a run can be repeated",
            ),
            (
                "threads T",
                "threads to use (default: all cores); the p does not depend on it",
            ),
            ("ss 2|3", "several factors: the type of the F statistic"),
        ],
        example: "permute weight across feed in trial with draws 20000, seed 7",
    },
    VerbHelp {
        verb: "plot",
        usage: "plot KIND Y across F… [in NAME] [subject S] [where CONDITION]",
        summary: "A figure of Y across F. KIND: means (means with 95% CIs beside every observation), box (box plots with every observation), points (every observation), profile (needs `subject`: each subject's line faint across the first within factor, cell means with CIs bold, one colour per between group), qq (residuals against normal quantiles), residuals (residuals against fitted values), null (the randomisation distribution of F, as `permute` computes it, with the F density and the observed F).",
        options: &[(
            "level L",
            "confidence level of the intervals in `means` (default 0.95)",
        )],
        example: "plot box gain across feed",
    },
    VerbHelp {
        verb: "power",
        usage: "power groups K with f F, n N [, alpha A]   |   power within M with f F, n N, rho R [, epsilon E]",
        summary: "Power of a one-way design with K equal groups, or of a within-subject factor with M levels measured on N subjects; `power P` instead of `n N` finds the smallest n reaching P. The effect size is f, or `eta2 E`, or (groups) `means (m1, m2, …), sd S`. A figure shows power against n for several effect sizes.",
        options: &[
            ("f F", "Cohen's f: SD of the means over the within-group SD"),
            ("eta2 E", "the effect as η² (f = √(η²/(1 − η²)))"),
            ("means (…)", "the expected group means (with `sd`)"),
            ("sd S", "the within-group SD (with `means`)"),
            ("n N", "per group, or subjects for `within`"),
            (
                "power P",
                "the target power; the answer is the n that reaches it",
            ),
            ("alpha A", "the significance level (default 0.05)"),
            ("rho R", "`within`: correlation among the repeated measures"),
            (
                "epsilon E",
                "`within`: sphericity ε, from 1/(M − 1) to 1 (default 1)",
            ),
        ],
        example: "power groups 3 with means (4.1, 4.6, 5.3), sd 0.6, power 0.8",
    },
    VerbHelp {
        verb: "save",
        usage: "save LAST to \"PATH\" [with table N, dpi D]",
        summary: "Writes the last result's table as CSV (`.csv`; the first table unless `table N`) or its figure as SVG (`.svg`) or PNG (`.png`, at `dpi D`, 300 by default, with an embedded font so text renders the same everywhere). The file is written whole or not at all (a temporary file, then a rename); a file read as data in this session is never overwritten.",
        options: &[(
            "table N",
            "which table of the result to write as CSV (default 1)",
        )],
        example: "save LAST to \"results/anova.csv\"",
    },
    VerbHelp {
        verb: "help",
        usage: "help [VERB]",
        summary: "The language reference, or one verb's entry.",
        options: &[],
        example: "help anova",
    },
];

/// Conditions shared by the analysis verbs.
pub const WHERE_HELP: &str = "where: compare a column with a number or a quoted string (= != < <= > >=), or test membership with `in (\"a\", \"b\")`; join with `and` / `or`; group with parentheses.";

/// The entry for `verb`.
pub fn verb(verb: &str) -> Option<&'static VerbHelp> {
    VERBS.iter().find(|v| v.verb == verb)
}

/// One verb's entry as plain text.
pub fn verb_text(h: &VerbHelp) -> String {
    let mut s = format!("{}\n\n{}\n", h.usage, h.summary);
    if !h.options.is_empty() {
        s.push_str("\noptions (after `with`, separated by commas):\n");
        for (o, d) in h.options {
            s.push_str(&format!("  {o:<16} {d}\n"));
        }
    }
    if h.usage.contains("where") {
        s.push_str(&format!("\n{WHERE_HELP}\n"));
    }
    s.push_str(&format!("\nexample:\n  {}", h.example));
    s
}

#[cfg(test)]
mod tests {
    #[test]
    fn every_verb_has_an_entry_with_its_own_example() {
        for v in crate::lang::VERBS {
            let h = super::verb(v).unwrap_or_else(|| panic!("no help for {v}"));
            assert!(h.example.starts_with(v), "{v}: {}", h.example);
        }
    }
}
